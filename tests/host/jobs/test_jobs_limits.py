"""The force limit on weights and the speed rule of runs (``runtrue.jobs.limits``).

Source for the force: Newton's second law for uniform circular motion, F = m·r·ω² with
ω = 2πn/60 (any mechanics text, e.g. Meriam & Kraige, *Engineering Mechanics: Dynamics*,
normal acceleration a_n = r·ω²).  F is linear in m, so the mass that pulls the limit is the
limit over the force of one gram.  The 30 % limit itself is runtrue's own figure.
"""

from __future__ import annotations

import math

import pytest

from runtrue.jobs import Machine, PlaneSpec, Weight
from runtrue.jobs.limits import (
    capped_trial_mass,
    force_limit_n,
    force_n,
    limit_mass_g,
    speed_warning,
    within_force_limit,
)


def fan() -> Machine:
    return Machine("fan", 14.0, 1470.0, [PlaneSpec(160.0, count=8)])


def test_force_of_a_weight_is_m_r_omega_squared() -> None:
    w = Weight(1, 10.0, 0.0, 160.0)
    omega = 2 * math.pi * 1470.0 / 60.0
    assert force_n(fan(), w) == pytest.approx(0.010 * 0.160 * omega**2, rel=1e-12)  # about 37.9 N


def test_limit_is_thirty_percent_of_the_rotor_weight_share_per_plane() -> None:
    two_planes = Machine("roll", 40.0, 900.0, [PlaneSpec(100.0), PlaneSpec(100.0)])
    assert force_limit_n(fan()) == pytest.approx(0.3 * 14.0 * 9.80665)
    assert force_limit_n(two_planes) == pytest.approx(0.3 * 40.0 * 9.80665 / 2)


@pytest.mark.parametrize("radius_mm", [20.0, 160.0, 900.0])
def test_the_limit_mass_pulls_exactly_the_limit(radius_mm: float) -> None:
    m = fan()
    mass = limit_mass_g(m, radius_mm)
    assert force_n(m, Weight(1, mass, 0.0, radius_mm)) == pytest.approx(force_limit_n(m), rel=1e-12)


def test_a_larger_trial_is_held_at_the_limit_but_never_below_the_trial_used() -> None:
    m = fan()
    at_limit = limit_mass_g(m, 160.0)
    assert capped_trial_mass(m, 0.5 * at_limit, 1.0, 160.0) == (0.5 * at_limit, "")
    mass, note = capped_trial_mass(m, 3.0 * at_limit, 1.0, 160.0)
    assert mass == pytest.approx(at_limit) and "3.0 times" in note and "force limit" in note
    mass, _ = capped_trial_mass(m, 3.0 * at_limit, 2.0 * at_limit, 160.0)  # already above: stays
    assert mass == pytest.approx(2.0 * at_limit)


def test_a_stock_rounding_above_the_limit_is_asked_again_a_little_lighter() -> None:
    m = fan()
    at_limit = limit_mass_g(m, 160.0)
    asked: list[float] = []

    def make(mass_g: float, at_least: bool) -> Weight:  # a stock that rounds up by 5 %
        asked.append(mass_g)
        return Weight(1, mass_g * 1.05, 0.0, 160.0)

    w = within_force_limit(m, make, 0.99 * at_limit, at_least=False)
    assert force_n(m, w) <= force_limit_n(m) and len(asked) > 1
    asked.clear()
    w = within_force_limit(m, make, 2.0 * at_limit, at_least=False)  # above on purpose: kept
    assert len(asked) == 1 and w.mass_g == pytest.approx(2.1 * at_limit)


def test_runs_more_than_five_percent_apart_in_speed_get_a_warning() -> None:
    m = fan()
    assert speed_warning(m, "trial", 2, 1500.0, 1470.0) == ""
    assert "1600 rpm but the reference run at 1470 rpm" in speed_warning(m, "trial", 2, 1600.0, 1470.0)
    assert "not the 1470 rpm given for the machine" in speed_warning(m, "reference", 1, 1300.0, 1300.0)
