"""Trial weight sizing, and whether a trial run changed the reading enough to trust.

Sizing rule (common practice, no single published source; quoted in field-balancing guides in
several forms): choose a trial weight whose centrifugal force at running speed is about 10 % of
the static load the rotor puts on its supports, shared between the correction planes.  Large
enough to move the reading clearly out of its scatter, small enough to be safe to run.
F = m * r * w^2 (``runtrue.balancing.forces``).  With a target grade, a second floor of our own
choice: TRIAL_GRADE_MULTIPLE times the ISO 21940-11 allowance (see ``suggest_trial_weight``).

Trial-effect check: the influence coefficient comes from the change ``trial - reference``; its
error is the error of that difference, whose standard deviation is
``sqrt(spread_ref^2 + spread_trial^2)`` (independent readings).  The ratio of the change to that
standard deviation bounds the coefficient's error: at ratio 10 the coefficient is good to about
10 % in size and 6 deg in angle (1 sd).  We ask for at least TRIAL_MIN_RATIO (our choice);
when the ratio falls short, the suggested scale is TRIAL_MIN_RATIO / ratio (the change grows in
proportion to the trial weight in a linear machine).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from runtrue.balancing.forces import centrifugal_force_n, check_radius_mm, check_speed_rpm, mass_for_force_g
from runtrue.balancing.model import BalancingError
from runtrue.balancing.tolerance import permissible_unbalance
from runtrue.balancing.units import STANDARD_GRAVITY_M_S2 as STANDARD_GRAVITY_M_S2  # re-exported: trial rules use it
from runtrue.readings.numbers import force_text, unbalance_text

#: Fraction of the rotor's weight (per plane share) the trial weight's force should reach.
TRIAL_FORCE_FRACTION = 0.10
#: With a target grade: the trial unbalance is at least this many times the plane's allowance.
TRIAL_GRADE_MULTIPLE = 5.0
# Safety cap on the grade rule (our choice): a suggested trial never pulls with more than 30 % of
# the rotor's weight share at running speed, however small the allowance makes the 10 % rule look.
TRIAL_FORCE_CAP_FRACTION = 0.3
#: Minimum change / noise ratio for a trustworthy trial run (see module docstring).
TRIAL_MIN_RATIO = 10.0
#: Without spreads: the change should be at least this fraction of the reference.  The trade's
#: rule of thumb asks the trial to change the amplitude by 30 % or the phase by 30 deg (common
#: practice); either way the reading moves by at least 30 % of the reference as a vector.
TRIAL_MIN_CHANGE_FRACTION = 0.30


@dataclass(frozen=True)
class TrialSuggestion:
    """A trial weight: ``mass_g`` at ``radius_mm`` per plane, its force ``force_n`` at speed, and
    the ``rule`` used (a sentence to show the user)."""

    mass_g: float
    radius_mm: float
    force_n: float
    rule: str


@dataclass(frozen=True)
class TrialVerdict:
    """``ok``: the trial changed the reading enough.  ``ratio``: change / its noise (standard
    deviations).  ``message``: a sentence for the user.  ``suggested_scale``: multiply the trial
    mass by this (1.0 when ok)."""

    ok: bool
    ratio: float
    message: str
    suggested_scale: float


def rotor_weight_share_n(rotor_mass_kg: float, n_planes: int = 1) -> float:
    """The rotor's weight in newtons shared between its correction planes: m * g_n / planes
    (no checks: give a mass above 0 and planes from 1)."""
    return rotor_mass_kg * STANDARD_GRAVITY_M_S2 / n_planes


def trial_force_limit_n(rotor_mass_kg: float, n_planes: int = 1) -> float:
    """The largest force a suggested weight may pull with, in newtons: TRIAL_FORCE_CAP_FRACTION
    (30 %) of the rotor's weight share per plane (our choice, the cap of
    :func:`suggest_trial_weight`); a job asks the user to confirm any weight above it.  No checks."""
    return TRIAL_FORCE_CAP_FRACTION * rotor_mass_kg * STANDARD_GRAVITY_M_S2 / n_planes


def suggest_trial_weight(
    rotor_mass_kg: float,
    speed_rpm: float,
    radius_mm: float,
    n_planes: int = 1,
    grade: float | None = None,
) -> TrialSuggestion:
    """Trial mass per plane, fitted at ``radius_mm``.

    Rule 1 (common practice): its centrifugal force at ``speed_rpm`` is 10 % of the rotor's
    weight share (rotor weight / planes).  Rule 2, only when the target ``grade`` (G, mm/s) is
    given (our choice): its unbalance is at least TRIAL_GRADE_MULTIPLE times the plane's share of
    the ISO 21940-11 permissible residual unbalance -- a rotor that needs balancing is usually
    several to tens of times over its allowance, and a trial much smaller than the unbalance is
    lost in the readings' scatter (fast, light rotors are where rule 1 falls short).  The larger
    of the two is suggested; the rule sentence says which, and the force it must withstand.
    """
    try:
        mass = float(rotor_mass_kg)
    except (TypeError, ValueError):
        raise BalancingError(f"rotor mass must be a number of kg, got {rotor_mass_kg!r}") from None
    if not (math.isfinite(mass) and mass > 0.0):
        raise BalancingError(f"rotor mass must be above 0 kg, got {rotor_mass_kg!r}")
    if mass > 500_000.0:
        raise BalancingError(f"rotor mass {mass:g} kg is implausible; check the units (kg)")
    n = check_speed_rpm(speed_rpm)
    r_mm = check_radius_mm(radius_mm)
    if isinstance(n_planes, bool) or not isinstance(n_planes, int) or n_planes < 1:
        raise BalancingError(f"number of planes must be a whole number from 1, got {n_planes!r}")
    weight_share_n = rotor_weight_share_n(mass, n_planes)
    force_n = TRIAL_FORCE_FRACTION * weight_share_n
    mass_g = mass_for_force_g(force_n, r_mm, n)
    per_plane = " per plane" if n_planes > 1 else ""
    rule = (
        f"Trial weight sized so its centrifugal force at {n:g} rpm is {TRIAL_FORCE_FRACTION * 100:.0f} % of the "
        f"rotor's weight{per_plane} ({force_text(force_n)}) - common practice, not a standard."
    )
    if grade is not None:
        u_per = permissible_unbalance(grade, mass, n).permissible_unbalance_gmm / n_planes
        grade_mass_g = TRIAL_GRADE_MULTIPLE * u_per / r_mm
        if grade_mass_g > mass_g:
            cap_mass_g = mass_for_force_g(TRIAL_FORCE_CAP_FRACTION * weight_share_n, r_mm, n)
            capped = grade_mass_g > cap_mass_g
            mass_g = min(grade_mass_g, cap_mass_g)
            force_n = centrifugal_force_n(mass_g, r_mm, n)
            rule = (
                f"Trial weight sized to {TRIAL_GRADE_MULTIPLE:g} times the G {grade:g} allowance{per_plane} "
                f"({unbalance_text(TRIAL_GRADE_MULTIPLE * u_per)}), larger than the 10 %-of-weight rule gives at "
                f"{n:g} rpm: runtrue's own rule, not from a standard."
            )
            if capped:
                rule += (
                    f" Capped so its force stays at {TRIAL_FORCE_CAP_FRACTION * 100:.0f} % of the rotor's weight{per_plane} "
                    f"({force_text(force_n)}): runtrue's own safety limit, not from a standard."
                )
            else:
                rule += (f" Its force is {force_text(force_n)}, {100 * force_n / weight_share_n:.0f} % of the rotor's "
                         f"weight{per_plane}.")
    rule += " Secure it for that force; if the machine is delicate, start smaller."
    return TrialSuggestion(
        mass_g=mass_g, radius_mm=r_mm, force_n=centrifugal_force_n(mass_g, r_mm, n), rule=rule
    )


def check_trial_effect(
    reference: complex, trial: complex, spread: float, trial_spread: float | None = None
) -> TrialVerdict:
    """Whether the trial run changed the reading enough, given the readings' spreads.

    ``spread`` is the reference reading's spread (standard deviation of the mean, same unit);
    ``trial_spread`` the trial reading's (default: the same).  An infinite spread means the
    scatter is unknown: the verdict then uses the 30 % rule of thumb (``ratio`` 0).  Returns a verdict with the ratio
    of the change to its noise and, if too small, how much larger to make the trial weight.
    """
    ref = complex(reference)
    tri = complex(trial)
    s0 = float(spread)
    s1 = s0 if trial_spread is None else float(trial_spread)
    for v in (ref.real, ref.imag, tri.real, tri.imag):
        if not math.isfinite(v):
            raise BalancingError("trial check: readings must be finite numbers")
    if math.isnan(s0) or math.isnan(s1) or s0 < 0 or s1 < 0:
        raise BalancingError("trial check: spreads must be numbers >= 0")
    change = abs(tri - ref)
    if math.isinf(s0) or math.isinf(s1):
        # Scatter unknown (too few revolutions): fall back on the 30 % rule of thumb.
        frac = change / abs(ref) if abs(ref) > 0 else math.inf
        ok = frac >= TRIAL_MIN_CHANGE_FRACTION
        scale = 1.0 if ok else (TRIAL_MIN_CHANGE_FRACTION / frac if frac > 0 else math.inf)
        msg = (
            f"The reading's scatter is unknown; the trial moved it by {frac:.0%} of the reference "
            f"({'enough' if ok else 'under'} the {TRIAL_MIN_CHANGE_FRACTION:.0%} rule of thumb)."
        )
        if not ok:
            msg += f" Make the trial weight about {math.ceil(scale * 10) / 10:g} times larger, or measure more revolutions."
        return TrialVerdict(ok=ok, ratio=0.0, message=msg, suggested_scale=scale)
    noise = math.hypot(s0, s1)
    if noise == 0.0:
        ratio = math.inf if change > 0 else 0.0
    else:
        ratio = change / noise
    if ratio >= TRIAL_MIN_RATIO:
        return TrialVerdict(
            ok=True,
            ratio=ratio,
            message=f"The trial weight changed the reading by {ratio:.0f} times its scatter: enough.",
            suggested_scale=1.0,
        )
    if change == 0.0:
        return TrialVerdict(
            ok=False,
            ratio=0.0,
            message="The trial weight did not change the reading at all: check that it was fitted, "
            "and use a much larger one.",
            suggested_scale=math.inf,
        )
    scale = TRIAL_MIN_RATIO / ratio
    return TrialVerdict(
        ok=False,
        ratio=ratio,
        message=(
            f"The trial weight changed the reading by only {ratio:.1f} times its scatter (need "
            f"{TRIAL_MIN_RATIO:g}): the coefficient would be unreliable. Make the trial weight about "
            f"{math.ceil(scale * 10) / 10:g} times larger (or average more revolutions), and repeat."
        ),
        suggested_scale=scale,
    )
