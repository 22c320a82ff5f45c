"""The decisions of a four-run (amplitude-only) cycle, as the jobs take them: the pickup that
judges, the trial weight's effect, the early look after the first trial run, and the check run's
verdict against the permissible residual.

Source: the four-run method (Wowk, *Machinery Vibration: Balancing*, McGraw-Hill 1995,
"balancing without phase"): the trial should change the amplitude by 20-30 % or more; without
phase the residual is estimated as amplitude / |a|.  Normal quantiles: 1.95996 (two-sided 95 %)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from runtrue.balancing import BalancingError, four_run
from runtrue.balancing.four_run import (
    MIN_TRIAL_EFFECT_FRACTION,
    Z95,
    amplitude_only,
    amplitude_sd,
    first_trial_look,
    loudest_pickup,
    pickup_gain,
    residual_check,
    trial_effect,
    trial_effect_ratio,
)
from runtrue.readings.units import phasor


def test_the_loudest_pickup_judges_and_the_first_wins_a_tie() -> None:
    assert loudest_pickup([0.12, 0.41, 0.30]) == 1
    assert loudest_pickup([0.3, 0.3]) == 0
    with pytest.raises(BalancingError, match="one per pickup"):
        loudest_pickup([])


def test_an_amplitude_scatters_by_the_vector_spread_over_root_two() -> None:
    # A reading 1.0 with complex scatter of spread 0.02 (E|e|^2 = 0.02^2): its amplitude's standard
    # deviation is the part along the vector, 0.02 / sqrt(2).
    rng = np.random.default_rng(5)
    spread = 0.02
    e = (rng.normal(size=200_000) + 1j * rng.normal(size=200_000)) * spread / math.sqrt(2)
    assert np.std(np.abs(1.0 + e)) == pytest.approx(amplitude_sd(spread), rel=0.01)


def test_a_trial_moving_the_amplitude_by_a_quarter_is_enough() -> None:
    # |a| = 0.002 g per g*mm, trial 200 g*mm, reference 1.6 g: effect 0.4 g = 25 % of the reference.
    assert trial_effect_ratio(0.002, 200.0, 1.6) == pytest.approx(0.25)
    verdict = trial_effect(0.002, 200.0, 1.6 * (1 - 1e-9))
    assert verdict.ok and verdict.suggested_scale <= 1.0
    weak = trial_effect(0.002, 100.0, 1.6)
    assert not weak.ok
    assert weak.ratio == pytest.approx(0.125)
    assert weak.suggested_scale == pytest.approx(2.0)  # twice the trial reaches 25 %
    assert MIN_TRIAL_EFFECT_FRACTION == 0.25


def test_a_trial_without_effect_or_a_silent_reference() -> None:
    assert trial_effect(0.0, 200.0, 1.6).suggested_scale == 4.0
    silent = trial_effect(0.002, 200.0, 0.0)
    assert silent.ratio == math.inf and silent.ok


def test_the_engine_warns_exactly_when_the_cycle_verdict_says_weak() -> None:
    # Unbalance 1000 g*mm at 40 deg, |a| = 0.001: trials of 150 g*mm move the amplitude ~15 %.
    a, u = 0.001, phasor(1000.0, 40.0)
    for t_gmm, weak in ((150.0, True), (600.0, False)):
        trials = [0j] + [phasor(t_gmm, ang) for ang in (0.0, 120.0, 240.0)]
        amps = [a * abs(u + t) for t in trials]
        sol = amplitude_only(amps, trials, 100.0)
        gain, _sd = pickup_gain(sol, 0)
        verdict = trial_effect(gain, t_gmm, amps[0])
        assert verdict.ok is not weak
        assert any("trial weight's effect" in w for w in sol.warnings) is weak


def test_the_early_look_after_the_first_trial_run() -> None:
    look = first_trial_look(0.40, 0.52)
    assert look is not None
    assert look.fraction == pytest.approx(0.30) and look.percent == pytest.approx(30.0)
    assert look.large_enough
    small = first_trial_look(0.40, 0.42)
    assert small is not None and not small.large_enough
    # Fit 1.2 x 25 % / 5 % = 6 times... capped at 4 times the trial.
    assert small.suggested_scale == pytest.approx(4.0)
    some = first_trial_look(0.40, 0.36)
    assert some is not None and some.percent == pytest.approx(-10.0)
    assert some.suggested_scale == pytest.approx(1.2 * 0.25 / 0.10)
    assert first_trial_look(0.0, 0.3) is None


def test_the_check_run_passes_on_its_upper_bound() -> None:
    # Amplitude 0.05 +/- 0.002 g, |a| = 0.001 +/- 0.00002 g per g*mm: residual 50 g*mm, upper
    # bound (0.05 + 1.96 * 0.002) / (0.001 - 1.96 * 0.00002) = 56.1 g*mm.
    upper = (0.05 + Z95 * 0.002) / (0.001 - Z95 * 0.00002)
    check = residual_check(0.05, 0.002, 0.001, 0.00002, permissible_gmm=57.0)
    assert check.residual_gmm == pytest.approx(50.0)
    assert check.upper_gmm == pytest.approx(upper) and upper == pytest.approx(56.1, abs=0.05)
    assert check.uncertainty_gmm == pytest.approx(upper - 50.0)
    assert check.passed
    assert not residual_check(0.05, 0.002, 0.001, 0.00002, permissible_gmm=55.0).passed


def test_no_pass_without_the_scatter() -> None:
    check = residual_check(0.01, None, 0.001, 0.00002, permissible_gmm=1000.0)
    assert check.residual_gmm == pytest.approx(10.0)
    assert check.upper_gmm == math.inf and not check.passed


def test_the_gain_of_a_pickup_and_its_scatter() -> None:
    a, u = 0.001, phasor(1000.0, 40.0)
    trials = [0j] + [phasor(600.0, ang) for ang in (0.0, 120.0, 240.0)]
    amps = [a * abs(u + t) for t in trials]
    sol = amplitude_only(amps, trials, 100.0, amp_sd=[0.0005] * 4)
    gain, sd = pickup_gain(sol, 0)
    assert gain == pytest.approx(a, rel=1e-6)
    assert sd is not None and 0 < sd < 0.1 * a
    plain = four_run(amps, 6.0, [0.0, 120.0, 240.0], 100.0)
    assert pickup_gain(plain, 0)[1] is None
