"""The one home of F = m r w^2: the shaft's angular speed, the force a weight pulls with, its
inverse (the mass for a force), and the force limit a job asks the user to confirm.

Source of every check: Newton's second law for uniform circular motion, F = m * r * w^2 with
w = 2*pi*n/60 (Meriam & Kraige, *Engineering Mechanics: Dynamics*, kinetics of particles, normal
acceleration a_n = r*w^2)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from runtrue.balancing import BalancingError, centrifugal_force_n
from runtrue.balancing.forces import force_at_speed_n, mass_for_force_g, shaft_speed_rad_s
from runtrue.balancing.trial import TRIAL_FORCE_CAP_FRACTION, rotor_weight_share_n, trial_force_limit_n


def test_one_revolution_a_second_is_two_pi_radians_a_second() -> None:
    assert shaft_speed_rad_s(60.0) == pytest.approx(2 * math.pi)
    assert shaft_speed_rad_s(3000.0) == pytest.approx(100 * math.pi)


def test_a_weight_at_fan_speed_by_hand() -> None:
    # 10 g at 160 mm on a fan at 1470 rpm: w = 153.94 rad/s, F = 0.010 kg * 0.160 m * w^2 = 37.9 N.
    w = 2 * math.pi * 1470 / 60
    assert force_at_speed_n(10, 160, 1470) == pytest.approx(0.010 * 0.160 * w * w)
    assert force_at_speed_n(10, 160, 1470) == pytest.approx(37.92, abs=0.01)


def test_the_checked_and_the_bare_formula_agree_on_sensible_numbers() -> None:
    assert centrifugal_force_n(12.5, 95, 2950) == force_at_speed_n(12.5, 95, 2950)


def test_only_the_bare_formula_takes_an_empty_position() -> None:
    # A fitting list may show a 0 g weight (a plane needing nothing): it pulls 0 N.
    assert force_at_speed_n(0.0, 160, 1470) == 0.0
    with pytest.raises(BalancingError, match="above 0 g"):
        centrifugal_force_n(0.0, 160, 1470)


@given(
    mass_g=st.floats(0.01, 5000.0),
    radius_mm=st.floats(1.0, 2000.0),
    speed_rpm=st.floats(30.0, 100_000.0),
)
def test_the_mass_for_a_force_is_the_inverse_of_the_force(mass_g: float, radius_mm: float, speed_rpm: float) -> None:
    force = force_at_speed_n(mass_g, radius_mm, speed_rpm)
    assert mass_for_force_g(force, radius_mm, speed_rpm) == pytest.approx(mass_g, rel=1e-12)


def test_the_force_limit_is_thirty_percent_of_the_weight_share() -> None:
    # 40 kg rotor, 2 planes: weight share 40 * 9.80665 / 2 = 196.13 N; 30 % of it = 58.84 N.
    assert rotor_weight_share_n(40.0, 2) == pytest.approx(196.133)
    assert trial_force_limit_n(40.0, 2) == pytest.approx(TRIAL_FORCE_CAP_FRACTION * 196.133)
    assert trial_force_limit_n(40.0, 2) == pytest.approx(58.84, abs=0.01)
    # The mass that pulls exactly that limit at 160 mm and 1470 rpm pulls it back.
    m = mass_for_force_g(trial_force_limit_n(40.0, 2), 160.0, 1470.0)
    assert force_at_speed_n(m, 160.0, 1470.0) == pytest.approx(trial_force_limit_n(40.0, 2))
