"""Balance tolerance: ISO 21940-11 balance quality grades, allocation to planes, pass/fail.

Source: ISO 21940-11:2016, *Mechanical vibration - Rotor balancing - Part 11: Procedures and
tolerances for rotors with rigid behaviour* (replaces ISO 1940-1:2003):
* clause 6: permissible residual unbalance ``U_per = 1000 * G * m / Omega`` (g*mm) with the grade
  G in mm/s, rotor mass m in kg and Omega = 2*pi*n/60 the maximum service angular speed in rad/s;
  hence ``U_per = 9549 * G * m / n`` with n in rpm, and the permissible specific unbalance
  (eccentricity) ``e_per = U_per / m`` in g*mm/kg = um.
* Table 1: grades from G 4000 down to G 0.4, in steps of a factor of about 2.5 (STANDARD_GRADES;
  the list of grades is from memory).
* clause 7: allocation to two tolerance planes.  For a rotor whose centre of mass lies midway
  between the planes, each plane gets U_per / 2.  Otherwise (from memory) each plane gets the
  share given by the lever rule, ``U_per1 = U_per * L2 / L`` and ``U_per2 = U_per * L1 / L``
  (L1, L2 the distances from the centre of mass to planes 1 and 2, L = L1 + L2), each share kept
  between 30 % and 70 % of U_per.  Check against the standard's text before relying on unequal
  allocation for acceptance.
API-style limit (the "4W/N" family, API 610/617/684 practice, from memory): maximum residual
unbalance per plane (journal) ``U_max = 4 * W / N`` oz*in with W the static journal load in lb
and N the maximum continuous speed in rpm; in SI ``U_max ~= 6350 * W / N`` g*mm with W in kg.

Residual unbalance from a reading: ``U = A^+ * reading`` (least squares) with A the influence
coefficients (reading per g*mm) -- the unbalance that would produce the reading in a linear
machine whose only 1x source is unbalance (run-out, misalignment and resonance break this).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from runtrue.balancing.forces import check_speed_rpm
from runtrue.balancing.model import BalancingError
from runtrue.balancing.units import G_PER_OZ, MM_PER_IN

#: ISO 21940-11 Table 1 balance quality grades, G in mm/s (from memory).
STANDARD_GRADES: tuple[float, ...] = (4000, 1600, 630, 250, 100, 40, 16, 6.3, 2.5, 1, 0.4)
#: 1000 * 60 / (2*pi): turns G (mm/s) * m (kg) / n (rpm) into g*mm.
GMM_FACTOR = 30000.0 / math.pi  # 9549.2966...
#: Share limits per plane in the unequal allocation (clause 7, from memory).
SHARE_MIN = 0.3
SHARE_MAX = 0.7
LB_PER_KG = 1.0 / 0.45359237


@dataclass(frozen=True)
class Tolerance:
    """A permissible residual unbalance: the rotor total (g*mm), the specific unbalance (um =
    g*mm/kg), the allocation per plane (g*mm), and the rule used to allocate it."""

    grade: float
    mass_kg: float
    speed_rpm: float
    permissible_unbalance_gmm: float
    permissible_eccentricity_um: float
    per_plane_gmm: list[float]
    rule: str
    warnings: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class GradeCheck:
    """Residual unbalance per plane against its permissible value; ``passed`` if every plane is
    within.  ``ratio`` = residual / permissible per plane (<= 1 passes)."""

    residual_gmm: list[float]
    permissible_gmm: list[float]
    passed: bool
    ratio: list[float]


def _positive(value: float, what: str, unit: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise BalancingError(f"{what} must be a number of {unit}, got {value!r}") from None
    if not (math.isfinite(x) and x > 0.0):
        raise BalancingError(f"{what} must be a number above 0 {unit}, got {value!r}")
    return x


def permissible_unbalance(
    grade: float,
    mass_kg: float,
    speed_rpm: float,
    planes: int = 1,
    distances_mm: tuple[float, float] | None = None,
) -> Tolerance:
    """Permissible residual unbalance for balance quality grade ``grade`` (G, mm/s), rotor mass
    ``mass_kg`` and maximum service speed ``speed_rpm`` (ISO 21940-11, clause 6), allocated to
    ``planes`` (1 or 2) tolerance planes.  ``distances_mm`` = (centre of mass to plane 1, centre
    of mass to plane 2), planes on either side of it; without it two planes share equally."""
    g = _positive(grade, "grade G", "mm/s")
    m = _positive(mass_kg, "rotor mass", "kg")
    n = check_speed_rpm(speed_rpm)
    warnings: list[str] = []
    if not any(math.isclose(g, s, rel_tol=1e-9) for s in STANDARD_GRADES):
        warnings.append(
            f"G {g:g} is not one of the standard grades ({', '.join(f'G {s:g}' for s in STANDARD_GRADES)})."
        )
    u_per = GMM_FACTOR * g * m / n
    e_per = u_per / m
    if planes == 1:
        if distances_mm is not None:
            raise BalancingError("plane distances only apply to two tolerance planes (--planes 2)")
        per = [u_per]
        rule = "One plane: the whole permissible residual unbalance (ISO 21940-11, clause 6)."
    elif planes == 2:
        if distances_mm is None:
            per = [u_per / 2.0, u_per / 2.0]
            rule = (
                "Two planes, centre of mass midway: half of the permissible residual unbalance in "
                "each (ISO 21940-11, clause 7)."
            )
        else:
            if len(distances_mm) != 2:
                raise BalancingError("give two distances: centre of mass to plane 1 and to plane 2")
            l1 = _positive(distances_mm[0], "distance from the centre of mass to plane 1", "mm")
            l2 = _positive(distances_mm[1], "distance from the centre of mass to plane 2", "mm")
            share1 = l2 / (l1 + l2)
            clamped = min(max(share1, SHARE_MIN), SHARE_MAX)
            if clamped != share1:
                warnings.append(
                    f"The lever rule gives plane 1 {share1:.0%} of the tolerance; kept within "
                    f"{SHARE_MIN:.0%}-{SHARE_MAX:.0%} as the standard asks (from memory)."
                )
            per = [u_per * clamped, u_per * (1.0 - clamped)]
            rule = (
                "Two planes, centre of mass off-centre: shared by the lever rule, the nearer plane "
                f"taking more, each between {SHARE_MIN:.0%} and {SHARE_MAX:.0%} (ISO 21940-11, clause 7; "
                "from memory - check the standard's text for acceptance)."
            )
    else:
        raise BalancingError(f"tolerance planes must be 1 or 2, got {planes!r}")
    return Tolerance(
        grade=g,
        mass_kg=m,
        speed_rpm=n,
        permissible_unbalance_gmm=u_per,
        permissible_eccentricity_um=e_per,
        per_plane_gmm=per,
        rule=rule,
        warnings=warnings,
    )


def residual_unbalance_gmm(
    influence: np.ndarray | Sequence[Sequence[complex]], reading: Sequence[complex]
) -> list[float]:
    """The residual unbalance per plane (g*mm) that explains ``reading`` through ``influence``
    (pickups x planes, reading units per g*mm), by least squares."""
    a = np.array(influence, dtype=complex)
    r = np.array([complex(z) for z in reading])
    if a.ndim != 2 or a.shape[0] != r.shape[0]:
        raise BalancingError("one reading per pickup (row) of the influence coefficients is needed")
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(r))):
        raise BalancingError("influence coefficients and readings must be finite numbers")
    if np.any(np.linalg.norm(a, axis=0) == 0.0):
        raise BalancingError("a plane has zero influence on every pickup; its residual cannot be estimated")
    u = np.linalg.lstsq(a, r, rcond=None)[0]
    return [float(abs(v)) for v in u]


def check_grade(
    influence: np.ndarray | Sequence[Sequence[complex]], reading: Sequence[complex], tolerance: Tolerance
) -> GradeCheck:
    """Pass/fail of the residual unbalance estimated from ``reading`` against ``tolerance``.

    With one tolerance plane and several correction planes, the planes' residuals are added
    (a conservative bound on the resultant)."""
    res = residual_unbalance_gmm(influence, reading)
    per = list(tolerance.per_plane_gmm)
    if len(per) == 1 and len(res) > 1:
        res = [float(sum(res))]
    if len(per) != len(res):
        raise BalancingError(
            f"the tolerance has {len(per)} plane(s) but the influence coefficients have {len(res)}"
        )
    ratio = [r / p for r, p in zip(res, per)]
    return GradeCheck(residual_gmm=res, permissible_gmm=per, passed=all(x <= 1.0 for x in ratio), ratio=ratio)


def api_limit_gmm(journal_load_kg: float, speed_rpm: float) -> float:
    """API-style maximum residual unbalance per plane, U = 4 * W / N oz*in (W journal static load
    in lb, N maximum continuous speed in rpm), returned in g*mm (from memory; use the edition
    your specification names)."""
    w_lb = _positive(journal_load_kg, "journal static load", "kg") * LB_PER_KG
    n = check_speed_rpm(speed_rpm)
    return 4.0 * w_lb / n * G_PER_OZ * MM_PER_IN
