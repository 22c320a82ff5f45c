"""ISO 21940-11 permissible residual unbalance, allocation, residual estimate and pass/fail.

Source: ISO 21940-11:2016, clause 6: U_per = 1000 * G * m / Omega (g*mm; G mm/s, m kg, Omega
rad/s), e_per = U_per / m; clause 7 allocation; Table 1 grades (from memory).  Values below are
recomputed here from that formula, independently of the code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from runtrue.balancing import (
    STANDARD_GRADES,
    BalancingError,
    api_limit_gmm,
    check_grade,
    permissible_unbalance,
    phasor,
    residual_unbalance_gmm,
)


@pytest.mark.parametrize(
    ("grade", "mass_kg", "rpm"),
    [(6.3, 100, 3000), (2.5, 20, 12000), (16, 5, 1450), (1, 3.6, 30000), (40, 250, 600)],
)
def test_permissible_unbalance_follows_the_iso_formula(grade: float, mass_kg: float, rpm: float) -> None:
    omega = 2 * math.pi * rpm / 60
    u = 1000 * grade * mass_kg / omega
    t = permissible_unbalance(grade, mass_kg, rpm)
    assert t.permissible_unbalance_gmm == pytest.approx(u, rel=1e-12)
    assert t.permissible_eccentricity_um == pytest.approx(u / mass_kg, rel=1e-12)
    assert t.per_plane_gmm == pytest.approx([u])


def test_g63_at_3000_rpm_is_about_20_um() -> None:
    # ISO 21940-11 Figure 2 (from memory): G 6.3 at 3000 rpm reads about 20 um.  9549 * 6.3 / 3000 = 20.05.
    t = permissible_unbalance(6.3, 1, 3000)
    assert t.permissible_eccentricity_um == pytest.approx(20.05, abs=0.01)


def test_standard_grades_step_by_about_two_and_a_half() -> None:
    ratios = [a / b for a, b in zip(STANDARD_GRADES, STANDARD_GRADES[1:])]
    assert all(2.3 < r < 2.7 for r in ratios)
    assert permissible_unbalance(6.3, 10, 1000).warnings == []
    assert "not one of the standard grades" in permissible_unbalance(5, 10, 1000).warnings[0]


def test_two_planes_midway_share_equally() -> None:
    t = permissible_unbalance(2.5, 40, 3000, planes=2)
    assert t.per_plane_gmm == pytest.approx([t.permissible_unbalance_gmm / 2] * 2)


def test_unequal_planes_follow_the_lever_rule_within_limits() -> None:
    t = permissible_unbalance(2.5, 40, 3000, planes=2, distances_mm=(200, 300))
    u = t.permissible_unbalance_gmm
    assert t.per_plane_gmm == pytest.approx([u * 0.6, u * 0.4])  # nearer plane 1 takes more
    clamped = permissible_unbalance(2.5, 40, 3000, planes=2, distances_mm=(50, 450))
    assert clamped.per_plane_gmm == pytest.approx([u * 0.7, u * 0.3])
    assert clamped.warnings


@pytest.mark.parametrize(
    ("args", "match"),
    [((0, 10, 1000), "grade"), ((6.3, -1, 1000), "rotor mass"), ((6.3, 10, 0), "speed"),
     ((6.3, 10, math.nan), "finite"), ((6.3, 10, 1000, 3), "1 or 2")],
)
def test_nonsense_tolerance_inputs_are_refused(args, match: str) -> None:
    with pytest.raises(BalancingError, match=match):
        permissible_unbalance(*args)


def test_residual_unbalance_from_reading_and_coefficients() -> None:
    a = np.array([[phasor(0.004, 30), phasor(0.001, 190)], [phasor(0.0015, 250), phasor(0.005, 80)]])
    u = np.array([phasor(120, 10), phasor(40, 220)])
    assert residual_unbalance_gmm(a, a @ u) == pytest.approx([120, 40], rel=1e-10)


def test_grade_check_passes_and_fails_per_plane() -> None:
    a = np.array([[phasor(0.01, 0)]])
    tol = permissible_unbalance(6.3, 10, 3000)  # 200.5 g*mm
    ok = check_grade(a, [0.01 * 150], tol)
    bad = check_grade(a, [0.01 * 250], tol)
    assert ok.passed and ok.ratio[0] == pytest.approx(150 / tol.permissible_unbalance_gmm)
    assert not bad.passed


def test_api_4w_over_n_in_si_units() -> None:
    # 4 W / N oz*in with W in lb: 1000 kg journal load at 3600 rpm.
    w_lb = 1000 / 0.45359237
    ozin = 4 * w_lb / 3600
    assert api_limit_gmm(1000, 3600) == pytest.approx(ozin * 28.349523125 * 25.4, rel=1e-12)
    assert api_limit_gmm(1000, 3600) == pytest.approx(6350.3 * 1000 / 3600, rel=1e-4)
