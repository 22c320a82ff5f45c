"""Closed-form special cases: the two-position vector split and radius conversion.

Formulas: resolution of a vector into two given directions by the law of sines, as taught for
forces (Beer & Johnston, *Vector Mechanics for Engineers: Statics*, "resolution of a force into
components"; from memory, so every check below also recomputes the answer independently — by
solving the 2×2 linear system or summing the vectors).  Radius conversion: the unbalance m·r is
what counts, so m2 = m1·r1/r2 (ISO 21940-2 vocabulary: unbalance = mass × radius; from memory).
"""

from __future__ import annotations

import cmath
import math
import random

import numpy as np
import pytest

from runtrue.allocation import Positions, Strip, allocate, convert_radius, split_two_positions, weight_gmm


def test_split_between_two_holes_ninety_degrees_apart_is_cos_and_sin() -> None:
    # 10 g at 30°, holes at 0° and 90°, same radius: 10·cos30° and 10·sin30° (right triangle)
    ma, mb = split_two_positions(weight_gmm(10.0, 30.0, 100.0), 0.0, 90.0, 100.0)
    assert ma == pytest.approx(10 * math.cos(math.radians(30)), rel=1e-12)
    assert mb == pytest.approx(5.0, rel=1e-12)


@pytest.mark.parametrize("seed", range(20))
def test_split_agrees_with_an_independent_linear_solve(seed: int) -> None:
    rng = random.Random(seed)
    theta_a = rng.uniform(0, 360)
    theta_b = theta_a + rng.uniform(10, 170)
    ra, rb = rng.uniform(50, 200), rng.uniform(50, 200)
    u = weight_gmm(rng.uniform(1, 20), rng.uniform(theta_a, theta_b), 120.0)
    ma, mb = split_two_positions(u, theta_a, theta_b, ra, rb)
    # independent: [ra·e^{jθa}, rb·e^{jθb}] · [ma, mb] = U as a real 2x2 system
    ea, eb = ra * cmath.exp(1j * math.radians(theta_a)), rb * cmath.exp(1j * math.radians(theta_b))
    A = np.array([[ea.real, eb.real], [ea.imag, eb.imag]])
    x = np.linalg.solve(A, [u.real, u.imag])
    assert (ma, mb) == pytest.approx(tuple(x), rel=1e-9, abs=1e-12)
    assert ma >= 0 and mb >= 0  # the correction lies between the two holes
    assert ma * ea + mb * eb == pytest.approx(u, rel=1e-12)


def test_split_outside_the_angle_gives_a_negative_mass() -> None:
    ma, mb = split_two_positions(weight_gmm(5.0, 200.0, 100.0), 0.0, 90.0, 100.0)
    assert ma < 0 and mb < 0


def test_split_refuses_positions_in_line() -> None:
    with pytest.raises(ValueError, match="in line"):
        split_two_positions(100j, 10.0, 190.0, 100.0)


def test_radius_conversion_keeps_the_unbalance() -> None:
    assert convert_radius(10.0, 100.0, 125.0) == pytest.approx(8.0)
    assert convert_radius(8.0, 125.0, 100.0) == pytest.approx(10.0)


def test_allocator_reproduces_the_split_with_fine_strip() -> None:
    # Two holes only and strip cut in 0.01 mm steps (1 g/mm, so 0.01 g steps): the allocation
    # must be the closed-form split to within a few cutting steps.
    correction = (9.4, 212.5, 120.0)
    positions = Positions.at_angles([195.0, 250.0], [120.0, 140.0])
    a = allocate(correction, positions, strip=Strip(1.0, 0.1, 0.01, 15.0), good_enough_gmm=0.0)
    assert a.optimal
    ma, mb = split_two_positions(weight_gmm(*correction), 195.0, 250.0, 120.0, 140.0)
    fitted = {p.position_index: p.mass_g for p in a.placements}
    assert fitted[0] == pytest.approx(ma, abs=0.03)
    assert fitted[1] == pytest.approx(mb, abs=0.03)
    # and the residual is no worse than rounding the closed form to the cutting step
    rounded = round(ma, 2) * 120 * cmath.exp(1j * math.radians(195)) + round(mb, 2) * 140 * cmath.exp(
        1j * math.radians(250))
    assert abs(a.residual_gmm) <= abs(weight_gmm(*correction) - rounded) + 1e-9


def test_allocator_reproduces_radius_conversion() -> None:
    # one hole at the correction's angle but further out: the mass shrinks by r1/r2
    a = allocate((9.0, 40.0, 100.0), Positions.at_angles([40.0], 150.0), strip=Strip(1.0, 0.5, 0.01, 12.0),
                 good_enough_gmm=0.0)
    (p,) = a.placements
    assert p.mass_g == pytest.approx(convert_radius(9.0, 100.0, 150.0), abs=0.005)
    assert a.residual_mass_g < 0.005 * 150 / 100
