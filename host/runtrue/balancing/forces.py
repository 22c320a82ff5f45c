"""Centrifugal force on a weight, and refusal of speeds, masses and radii that make no sense.

Source: Newton's second law for uniform circular motion, F = m * r * w^2 with w = 2*pi*n/60
(any mechanics text, e.g. Meriam & Kraige, *Engineering Mechanics: Dynamics*, kinetics of
particles, normal acceleration a_n = r*w^2).

This module is the one home of that law in runtrue: the shaft's angular speed
(:func:`shaft_speed_rad_s`), the force a weight pulls with (:func:`centrifugal_force_n`, which
refuses nonsense input, and :func:`force_at_speed_n`, the bare formula for numbers already
checked or for a display that may show 0 g) and its inverse, the mass that pulls a given force
(:func:`mass_for_force_g`).

Caution: rotating machinery can kill.  Every weight must be secured for the force it sees at
the highest speed the rotor can reach; never exceed a wheel's or rotor's rated speed; stop and
lock out the machine before fitting weights.  Local codes, the machine maker's instructions and
licensed practice take precedence over anything this program says.
"""

from __future__ import annotations

import math

from runtrue.balancing.model import BalancingError

#: Above this speed we refuse: no in-place balancing job on a shop machine runs faster.  Small
#: turbochargers and dental turbines exceed it; they are not balanced in place (common practice).
MAX_SPEED_RPM = 200_000.0
#: Below this speed the 1x reading of an accelerometer is too small to mean anything (the
#: signal falls as speed squared); the meter cannot balance a rotor turning this slowly.
MIN_SPEED_RPM = 30.0
#: Heavier than this a single "weight" is not a balance weight (common practice).
MAX_WEIGHT_G = 50_000.0
#: Radii beyond this (10 m) are not a rotor a hand-held meter balances.
MAX_RADIUS_MM = 10_000.0
#: A weight closer to the axis than 1 mm corrects nothing measurable.
MIN_RADIUS_MM = 1.0
#: Lighter than 1 mg is below any balance weight or shop scale.
MIN_WEIGHT_G = 0.001


def _number(value: float, what: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise BalancingError(f"{what} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise BalancingError(f"{what} must be a finite number, got {value!r}")
    return x


def check_speed_rpm(speed_rpm: float) -> float:
    """The speed as a float, or :class:`BalancingError` saying why it makes no sense."""
    n = _number(speed_rpm, "speed")
    if n <= 0.0:
        raise BalancingError(f"speed must be above 0 rpm, got {n:g} rpm; give the running speed of the rotor")
    if n < MIN_SPEED_RPM:
        raise BalancingError(
            f"speed {n:g} rpm is below {MIN_SPEED_RPM:g} rpm, too slow for a 1x vibration reading; "
            "balance at a higher running speed"
        )
    if n > MAX_SPEED_RPM:
        raise BalancingError(
            f"speed {n:g} rpm is above {MAX_SPEED_RPM:g} rpm; check the units (rpm, not Hz*60 twice?) "
            "and the rotor's rated speed"
        )
    return n


def check_mass_g(mass_g: float, what: str = "mass") -> float:
    """A weight's mass in g as a float (> 0), or :class:`BalancingError` with the reason."""
    m = _number(mass_g, what)
    if m <= 0.0:
        raise BalancingError(
            f"{what} must be above 0 g, got {m:g} g; give the mass as a positive number and "
            "put the direction in the angle"
        )
    if m < MIN_WEIGHT_G:
        raise BalancingError(f"{what} {m:g} g is below {MIN_WEIGHT_G:g} g; check the units (grams)")
    if m > MAX_WEIGHT_G:
        raise BalancingError(f"{what} {m:g} g is above {MAX_WEIGHT_G:g} g; check the units (grams)")
    return m


def check_radius_mm(radius_mm: float) -> float:
    """A radius in mm as a float (> 0), or :class:`BalancingError` with the reason."""
    r = _number(radius_mm, "radius")
    if r <= 0.0:
        raise BalancingError(f"radius must be above 0 mm, got {r:g} mm; measure from the shaft axis")
    if r < MIN_RADIUS_MM:
        raise BalancingError(f"radius {r:g} mm is below {MIN_RADIUS_MM:g} mm; check the units (millimetres)")
    if r > MAX_RADIUS_MM:
        raise BalancingError(f"radius {r:g} mm is above {MAX_RADIUS_MM:g} mm; check the units (millimetres)")
    return r


def shaft_speed_rad_s(speed_rpm: float) -> float:
    """The shaft's angular speed in rad/s at ``speed_rpm``: w = 2*pi*n/60 (no checks)."""
    return 2.0 * math.pi * speed_rpm / 60.0


def force_at_speed_n(mass_g: float, radius_mm: float, speed_rpm: float) -> float:
    """F = m * r * w^2 in newtons (m in kg, r in m, w in rad/s) for ``mass_g`` at ``radius_mm``
    turning at ``speed_rpm``, without checks: for numbers already checked, or a display that may
    show a 0 g weight (0 N).  :func:`centrifugal_force_n` refuses nonsense input."""
    w = shaft_speed_rad_s(speed_rpm)
    return (mass_g / 1000.0) * (radius_mm / 1000.0) * w * w


def centrifugal_force_n(mass_g: float, radius_mm: float, speed_rpm: float) -> float:
    """Force in newtons pulling a weight of ``mass_g`` at ``radius_mm`` outward at ``speed_rpm``:
    F = m * r * w^2 (m in kg, r in m, w = 2*pi*n/60 rad/s).  :class:`BalancingError` when the
    mass, radius or speed makes no sense (see ``check_mass_g`` and the others)."""
    return force_at_speed_n(check_mass_g(mass_g), check_radius_mm(radius_mm), check_speed_rpm(speed_rpm))


def mass_for_force_g(force_n: float, radius_mm: float, speed_rpm: float) -> float:
    """The mass in g that pulls ``force_n`` newtons at ``radius_mm`` turning at ``speed_rpm``:
    m = F / (r * w^2), the inverse of :func:`force_at_speed_n`.  No checks: give a radius and a
    speed above zero (a zero one divides by zero)."""
    w = shaft_speed_rad_s(speed_rpm)
    return force_n / ((radius_mm / 1000.0) * w * w) * 1000.0
