"""Closed-form special cases of weight allocation: the two-position vector split and radius conversion.

Two-position split: a correction vector U (g·mm) resolved along two position directions a and b
(angles θa, θb, radii ra, rb) by the law of sines in the force triangle:

    ma·ra = |U|·sin(θb − θU) / sin(θb − θa),   mb·rb = |U|·sin(θU − θa) / sin(θb − θa)

This is the usual "splitting a correction weight between two holes" rule of field balancing
(vector resolution into two non-parallel components; any vector-algebra text, e.g. Beer &
Johnston, *Vector Mechanics for Engineers: Statics*, resolution of a force into two components
by the law of sines) — formula written from memory and checked in the tests by recomputing the
vector sum.  Radius conversion keeps the unbalance m·r constant: m2 = m1·r1/r2.
"""

from __future__ import annotations

import cmath
import math


def split_two_positions(
    correction_gmm: complex,
    angle_a_deg: float,
    angle_b_deg: float,
    radius_a_mm: float,
    radius_b_mm: float | None = None,
) -> tuple[float, float]:
    """Masses (g) at positions a and b whose vector sum is exactly the correction.

    A negative mass means the correction lies outside the angle between a and b (the weight
    would have to go opposite that position).  Raises ValueError when a and b are parallel.
    """
    rb = radius_a_mm if radius_b_mm is None else radius_b_mm
    if radius_a_mm <= 0 or rb <= 0:
        raise ValueError("radii must be positive")
    ta = math.radians(angle_a_deg)
    tb = math.radians(angle_b_deg)
    s = math.sin(tb - ta)
    if abs(s) < 1e-12:
        raise ValueError("the two positions are in line (0° or 180° apart); a split needs two directions")
    u = abs(correction_gmm)
    tu = cmath.phase(correction_gmm) if u > 0 else 0.0
    ma = u * math.sin(tb - tu) / s / radius_a_mm
    mb = u * math.sin(tu - ta) / s / rb
    return ma, mb


def convert_radius(mass_g: float, from_radius_mm: float, to_radius_mm: float) -> float:
    """The mass at ``to_radius_mm`` with the same unbalance (m·r) as ``mass_g`` at ``from_radius_mm``."""
    if from_radius_mm <= 0 or to_radius_mm <= 0:
        raise ValueError("radii must be positive")
    return mass_g * from_radius_mm / to_radius_mm
