"""Trial weight sizing (common practice rule) and the trial-effect check."""

from __future__ import annotations

import math

import pytest

from runtrue.balancing import (
    TRIAL_MIN_RATIO,
    BalancingError,
    centrifugal_force_n,
    check_trial_effect,
    phasor,
    suggest_trial_weight,
)


def test_trial_force_is_ten_percent_of_rotor_weight() -> None:
    s = suggest_trial_weight(rotor_mass_kg=50, speed_rpm=1500, radius_mm=200)
    # By hand: F = 0.1 * 50 * 9.80665 = 49.03 N; w = 157.08 rad/s; m = F / (r w^2).
    w = 2 * math.pi * 1500 / 60
    assert s.force_n == pytest.approx(0.1 * 50 * 9.80665)
    assert s.mass_g == pytest.approx(49.03325 / (0.2 * w * w) * 1000, rel=1e-9)
    assert s.mass_g == pytest.approx(9.94, abs=0.01)
    assert "common practice" in s.rule
    assert centrifugal_force_n(s.mass_g, 200, 1500) == pytest.approx(s.force_n)


def test_two_planes_share_the_trial_force() -> None:
    one = suggest_trial_weight(80, 3000, 100)
    two = suggest_trial_weight(80, 3000, 100, n_planes=2)
    assert two.mass_g == pytest.approx(one.mass_g / 2)
    assert "per plane" in two.rule


@pytest.mark.parametrize("bad", [0, -5, math.nan, "heavy"])
def test_nonsense_rotor_mass_is_refused(bad) -> None:
    with pytest.raises(BalancingError, match="rotor mass"):
        suggest_trial_weight(bad, 1500, 100)


def test_trial_well_above_scatter_is_ok() -> None:
    v = check_trial_effect(phasor(8, 40), phasor(5, 100), spread=0.1)
    assert v.ok and v.suggested_scale == 1.0
    assert v.ratio == pytest.approx(abs(phasor(5, 100) - phasor(8, 40)) / math.hypot(0.1, 0.1))


def test_trial_lost_in_scatter_says_how_much_larger() -> None:
    ref, tri = phasor(8, 40), phasor(8.3, 41)
    v = check_trial_effect(ref, tri, spread=0.2, trial_spread=0.2)
    ratio = abs(tri - ref) / math.hypot(0.2, 0.2)
    assert not v.ok
    assert v.ratio == pytest.approx(ratio)
    assert v.suggested_scale == pytest.approx(TRIAL_MIN_RATIO / ratio)
    assert "times larger" in v.message


def test_trial_with_no_effect_at_all() -> None:
    v = check_trial_effect(3 + 1j, 3 + 1j, spread=0.1)
    assert not v.ok and math.isinf(v.suggested_scale)
    assert "fitted" in v.message


def test_with_a_grade_a_fast_light_rotor_gets_a_trial_of_five_allowances() -> None:
    # 20 kg roll at 1000 rpm, G 6.3, radius 200 mm: allowance 9549 * 6.3 * 20 / 1000 = 1203 g*mm,
    # five of them 6016 g*mm = 30.1 g.  The force rule gives 0.1 * 20 * 9.80665 N /
    # (0.2 m * (104.72 rad/s)^2) = 8.9 g; the grade rule's 30.1 g would pull 66 N, 34 % of the
    # roll's weight, over the 30 % cap; at G 2.5 it is 11.9 g, 26 N, 13 %: under it.
    s = suggest_trial_weight(20, 1000, 200, grade=2.5)
    u_per = 30000 / math.pi * 2.5 * 20 / 1000
    assert s.mass_g * 200 == pytest.approx(5 * u_per, rel=1e-9)
    assert "allowance" in s.rule and "runtrue's own rule" in s.rule and "Capped" not in s.rule
    assert "our choice" not in s.rule and f"{5 * u_per:.0f} g\N{MIDDLE DOT}mm" in s.rule  # one number format
    assert s.force_n == pytest.approx(centrifugal_force_n(s.mass_g, 200, 1000))
    assert s.force_n < 0.3 * 20 * 9.80665


def test_grade_rule_is_capped_at_30_percent_of_the_rotor_weight_for_safety() -> None:
    # 3 kg spindle at 24000 rpm, G 2.5: five allowances (5 * 2.98 g*mm = 14.9 g*mm, 0.50 g at
    # 30 mm) would pull 95 N, three times the spindle's weight: the cap holds it to 30 % of its weight.
    s = suggest_trial_weight(3, 24000, 30, grade=2.5)
    weight_n = 3 * 9.80665
    assert s.force_n == pytest.approx(0.3 * weight_n, rel=1e-9)
    assert s.force_n == pytest.approx(centrifugal_force_n(s.mass_g, 30, 24000))
    assert "Capped" in s.rule and "runtrue's own safety limit" in s.rule and "our choice" not in s.rule


def test_with_a_grade_a_slow_heavy_rotor_keeps_the_force_rule() -> None:
    # 200 kg at 250 rpm, G 6.3: 5 allowances = 5 * 9549 * 6.3 * 200 / 250 = 240,600 g*mm, while the
    # force rule gives 0.1 * 200 * 9.80665 / (26.18 rad/s)^2 = 0.2861 kg*m = 286,100 g*mm: it wins.
    plain = suggest_trial_weight(200, 250, 300)
    graded = suggest_trial_weight(200, 250, 300, grade=6.3)
    assert graded.mass_g == pytest.approx(plain.mass_g)
    assert "common practice" in graded.rule


def test_unknown_scatter_falls_back_on_the_thirty_percent_rule() -> None:
    big = check_trial_effect(10 + 0j, 6 + 0j, spread=math.inf)
    small = check_trial_effect(10 + 0j, 9 + 0j, spread=math.inf)
    assert big.ok and "unknown" in big.message
    assert not small.ok and small.suggested_scale == pytest.approx(3.0)


def test_a_large_trial_allowance_reads_in_plain_digits_and_the_unbalance_unit() -> None:
    # 200 kg at 1000 rpm, G 6.3, radius 300 mm: five allowances are 60,160 g*mm (over 10,000: kg*mm)
    s = suggest_trial_weight(200, 1000, 300, grade=6.3)
    assert "e+" not in s.rule and "g*mm" not in s.rule
    assert "allowance" not in s.rule or "\N{MIDDLE DOT}mm" in s.rule
