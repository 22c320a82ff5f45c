"""The safety limits of a job: the force limit on weights and the speed rules of runs.

Force: F = m·r·ω² (``runtrue.balancing.centrifugal_force_n``); F is linear in m, so the mass
that pulls a given force at a radius is ``force / centrifugal_force_n(1.0, radius_mm, speed_rpm)``.
The force limit (``TRIAL_FORCE_CAP_FRACTION`` of the rotor's weight share per plane) is
runtrue's own figure, not from a standard; a weight above it needs the user's confirmation
(:class:`ForceLimitExceeded`).  A run above the machine's rated speed is refused until the user
confirms it (:class:`OverSpeed`); runs at different speeds get a warning (common practice).
"""

from __future__ import annotations

import math
from collections.abc import Callable

from runtrue.balancing import centrifugal_force_n
from runtrue.balancing.trial import TRIAL_FORCE_CAP_FRACTION, trial_force_limit_n
from runtrue.jobs.model import Machine, Weight

#: Runs more than 5 % apart in speed get a warning (common practice).
SPEED_TOLERANCE = 0.05


def force_limit_n(machine: Machine) -> float:
    """The largest centrifugal force a weight may pull with before the user must confirm it:
    ``TRIAL_FORCE_CAP_FRACTION`` (30 %) of the rotor's weight share per plane, in newtons."""
    return trial_force_limit_n(machine.rotor_mass_kg, machine.n_planes)


def force_limit_basis(machine: Machine) -> str:
    """The limit and where it comes from, in one sentence (said once where it matters)."""
    per_plane = " per plane" if machine.n_planes > 1 else ""
    return (
        f"Force limit {force_limit_n(machine):.3g} N: {TRIAL_FORCE_CAP_FRACTION * 100:.0f} % of the rotor's weight{per_plane}. "
        "This is runtrue's own figure, not from a standard (common practice sizes a trial weight near 10 %); "
        "a weight above it needs your confirmation."
    )


def force_n(machine: Machine, w: Weight) -> float:
    """The centrifugal force of ``w`` at the machine's running speed, newtons."""
    return float(centrifugal_force_n(w.mass_g, w.radius_mm, machine.speed_rpm))


def limit_mass_g(machine: Machine, radius_mm: float) -> float:
    """The mass at ``radius_mm`` that pulls exactly the force limit at running speed."""
    return force_limit_n(machine) / centrifugal_force_n(1.0, radius_mm, machine.speed_rpm)


def capped_trial_mass(machine: Machine, needed_g: float, floor_g: float, radius_mm: float) -> tuple[float, str]:
    """A larger trial of ``needed_g`` held at the force limit (never below ``floor_g``, the trial
    already used): ``(mass_g, note)``, the note empty when the limit did not bite."""
    limit_g = limit_mass_g(machine, radius_mm)
    if needed_g <= limit_g:
        return needed_g, ""
    mass_g = max(limit_g, floor_g)
    note = (
        f"A trial of {needed_g:.3g} g would be needed, but that pulls "
        f"{needed_g / limit_g:.1f} times the {force_limit_n(machine):.3g} N force limit: "
        f"the suggestion stays at {mass_g:.3g} g. Average longer (more revolutions), or choose a "
        "larger trial with w and confirm its force."
    )
    return mass_g, note


def within_force_limit(machine: Machine, make: Callable[[float, bool], Weight], mass_g: float,
                       at_least: bool) -> Weight:
    """``make(mass_g, at_least)`` rounds a trial to what the stock can make; when that rounding
    lands above the force limit (and the wish was not), ask for a little less, a few times."""
    w = make(mass_g, at_least)
    limit = force_limit_n(machine)
    if force_n(machine, Weight(w.plane, mass_g, 0.0, w.radius_mm)) > limit:
        return w  # asked for more than the limit on purpose: the user confirms it
    for _ in range(4):
        force = force_n(machine, w)
        if force <= limit:
            break
        mass_g *= 0.97 * limit / force
        w = make(mass_g, False)
    return w


class ForceLimitExceeded(ValueError):
    """A weight would pull with more than the force limit; the user must confirm it first."""

    def __init__(self, weight: Weight, force_n: float, limit_n: float) -> None:
        self.weight = weight
        self.force_n = force_n
        self.limit_n = limit_n
        self.multiple = force_n / limit_n if limit_n > 0 else math.inf
        super().__init__(
            f"{weight.mass_g:.3g} g at radius {weight.radius_mm:g} mm pulls with {force_n:.0f} N at speed, "
            f"{self.multiple:.1f} times the {limit_n:.3g} N force limit: confirm it to go on"
        )


class OverSpeed(ValueError):
    """A run's measured speed is above the machine's rated speed; the user must confirm it."""

    def __init__(self, speed_rpm: float, rated_rpm: float) -> None:
        self.speed_rpm = speed_rpm
        self.rated_rpm = rated_rpm
        super().__init__(
            f"the run was at {speed_rpm:.0f} rpm, above the rated {rated_rpm:g} rpm of the machine: "
            "stop it now; record the run only if the maker allows this speed"
        )


def speeds_differ(speed_rpm: float, other_rpm: float) -> bool:
    """True when two speeds are more than :data:`SPEED_TOLERANCE` apart (relative to ``other_rpm``)."""
    return abs(speed_rpm - other_rpm) > SPEED_TOLERANCE * other_rpm


def speed_warning(machine: Machine, kind: str, seq: int, speed_rpm: float, reference_rpm: float) -> str:
    """The warning for a run whose speed differs from the reference run's or, for the reference
    run itself, from the machine's running speed; empty when it does not."""
    if reference_rpm > 0 and speeds_differ(speed_rpm, reference_rpm):
        return (
            f"Run {seq} was at {speed_rpm:.0f} rpm but the reference run at {reference_rpm:.0f} rpm: the "
            "machine's response changes with speed; run at the same speed every time."
        )
    if kind == "reference" and speeds_differ(speed_rpm, machine.speed_rpm):
        return (
            f"The reference run was at {speed_rpm:.0f} rpm, not the {machine.speed_rpm:g} rpm given for the machine; "
            "the grade is checked at the machine's running speed."
        )
    return ""
