"""From a computed weight to what the fitter bolts on: trial weights and correction placements.

Uses the allocator (``runtrue.allocation``) with the machine's positions and stock or strip;
without either, a weight is shown as computed, at the plane's radius, at any angle.
Conventions: angles from the reference mark against rotation; planes numbered from 1.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace
from typing import Any

from runtrue.allocation import (
    ExistingWeight,
    Positions,
    SheetRow,
    Stock,
    Strip,
    allocate,
    centrifugal_force_n,
    fitting_sheet,
    split_two_positions,
)
from runtrue.jobs.model import Machine, PlaneSpec, Weight
from runtrue.jobs.results import PlaneCorrection
from runtrue.readings.numbers import angle_text, mass_text
from runtrue.readings.units import angle_between_deg, lag_deg, wrap_deg


def positions_for(spec: PlaneSpec) -> Positions:
    """The allocator's ``Positions`` for a plane (excluded positions are 1-based in a PlaneSpec)."""
    excluded = [n - 1 for n in spec.excluded]
    if spec.continuous:
        return Positions.groove(spec.radius_mm)
    if spec.count is not None:
        return Positions.equally_spaced(spec.count, spec.radius_mm, spec.first_angle_deg, excluded)
    return Positions.at_angles(spec.angles_deg or [], spec.radius_mm, excluded)


def available_stock(machine: Machine, in_use: Sequence[float] = ()) -> list[tuple[float, int]]:
    """The machine's stock less the pieces (masses, g) already on the rotor: ``[(mass_g, count)]``."""
    left = [[p.mass_g, p.count] for p in machine.stock]
    for m in in_use:
        for item in left:
            if abs(item[0] - m) <= 1e-9 * max(1.0, m) and item[1] > 0:
                item[1] -= 1
                break
    return [(float(m), int(c)) for m, c in left if c > 0]


def _material(machine: Machine, in_use: Sequence[float] = ()) -> dict[str, Any]:
    if machine.strip is not None:
        s = machine.strip
        return {"strip": Strip(s.grams_per_mm, s.min_mm, s.step_mm)}
    if machine.stock:
        left = available_stock(machine, in_use)
        if not left:
            raise ValueError("every piece of the stock is already on the rotor: add pieces to the machine's stock")
        return {"stock": Stock.of(left)}
    return {}


def _round_up_2sig(mass_g: float) -> float:
    """Round a trial mass up to two significant figures (a trial a little heavier is harmless)."""
    if mass_g <= 0:
        return mass_g
    step = 10 ** (math.floor(math.log10(mass_g)) - 1)
    return round(math.ceil(mass_g / step - 1e-9) * step, 12)


def first_usable_angle_deg(spec: PlaneSpec) -> float:
    angles = spec.position_angles_deg()
    if angles is None:
        return 0.0
    for n, a in enumerate(angles, start=1):
        if n not in spec.excluded:
            return a
    raise ValueError("every position of this plane is excluded: free at least one to fit weights")


def trial_weight(
    machine: Machine,
    plane: int,
    mass_g: float,
    angle_deg: float | None = None,
    in_use: Sequence[float] = (),
    at_least: bool = False,
) -> Weight:
    """A trial weight near ``mass_g`` that can really be fitted at one position of ``plane``.

    The angle is the first usable position (0° in a continuous groove) unless given; the mass is
    rounded to what the stock or strip can make there (the allocator's nearest combination), or,
    with ``at_least`` (a repeat of a trial that was too small), to the nearest combination not
    lighter than ``mass_g`` when the stock allows.
    """
    spec = machine.planes[plane - 1]
    angle = first_usable_angle_deg(spec) if angle_deg is None else wrap_deg(angle_deg)
    label = f"trial weight, plane {plane}"
    try:
        material = _material(machine, in_use)
    except ValueError:
        material = {}
    if not material:
        return Weight(plane, _round_up_2sig(mass_g), angle, spec.radius_mm, label)
    if "stock" in material:
        step = min(item.mass_g for item in material["stock"].items)
    else:
        strip = material["strip"]
        step = strip.grams_per_mm * strip.step_mm
    best: tuple[float, tuple[float, ...]] = (0.0, ())
    for k in range(6 if at_least else 1):
        try:
            alloc = allocate(
                (mass_g + k * step / 2.0, angle, spec.radius_mm),
                Positions.at_angles([angle], spec.radius_mm),
                max_pieces_per_position=spec.max_pieces_per_position,
                max_mass_per_position_g=spec.max_mass_per_position_g,
                **material,
            )
        except ValueError:
            break
        total = sum(p.mass_g for p in alloc.placements)
        if total > best[0]:
            best = (total, tuple(m for p in alloc.placements for m in p.pieces))
        if total >= mass_g * (1.0 - 1e-9):
            break
    if best[0] <= 0:  # the stock cannot make it: say the mass, the user makes it up
        return Weight(plane, _round_up_2sig(mass_g), angle, spec.radius_mm, label)
    return Weight(plane, best[0], angle, spec.radius_mm, label, best[1])


#: Placements stop improving once the residual they leave is below this share of the plane's
#: permissible residual unbalance (margin for measurement error; common practice).
GOOD_ENOUGH_FRACTION = 0.2


#: Bound on the allocator's search so a screen never waits long (it then states its bound).
MAX_SEARCH_NODES = 5_000


def plan_plane(
    machine: Machine,
    plane: int,
    correction_gmm: complex,
    kind: str,
    number: int,
    permissible_gmm: float | None = None,
    in_use: Sequence[float] = (),
    existing: Sequence[Weight] = (),
) -> PlaneCorrection:
    """The correction for one plane as placements and a fitting sheet (a ``PlaneCorrection``).

    With ``permissible_gmm`` (the plane's share of the permissible residual unbalance) the
    allocator may stop at a residual of :data:`GOOD_ENOUGH_FRACTION` of it, preferring fewer
    positions.  ``existing``: weights already on this plane (their effect is in the reading and
    so in ``correction_gmm``) that may stay, be moved to another position or be taken off; the
    ones that come off their place are the result's ``taken_off``.
    """
    spec = machine.planes[plane - 1]
    mag = abs(correction_gmm)
    angle = lag_deg(correction_gmm)
    correction = Weight(plane, mag / spec.radius_mm, angle, spec.radius_mm, f"{kind} plane {plane}")
    label = f"{kind} {number}" if kind == "trim" else "correction"
    if mag == 0.0:
        return PlaneCorrection(plane, correction, [], [], 0.0, 0.0, [])
    note: list[str] = []
    old = _existing_weights(spec, existing)
    try:
        material = _material(machine, in_use)
        alloc = None
        if material or any(e.may_move for e in old):
            alloc = allocate(
                correction_gmm,
                positions_for(spec),
                correction_radius_mm=spec.radius_mm,
                max_pieces_per_position=spec.max_pieces_per_position,
                max_mass_per_position_g=spec.max_mass_per_position_g,
                good_enough_gmm=GOOD_ENOUGH_FRACTION * permissible_gmm if permissible_gmm else None,
                prefer_fewer_positions=permissible_gmm is not None,
                max_nodes=MAX_SEARCH_NODES,
                existing=old,
                **material,
            )
    except ValueError as exc:  # AllocationError is a ValueError: stock used up, nothing fits...
        alloc = None
        note = [f"Plane {plane}: the stock cannot make this correction ({exc}); exact masses are shown instead."]
    if alloc is None:
        if spec.continuous:
            w = Weight(plane, correction.mass_g, angle, spec.radius_mm, f"{label}, plane {plane}")
            row = SheetRow(None, angle, spec.radius_mm, f"{w.mass_g:.3g} g", w.mass_g,
                           centrifugal_force_n(w.mass_g, w.radius_mm, machine.speed_rpm), "fit")
            return PlaneCorrection(plane, correction, [w], [row], 0.0, 0.0, note)
        pc = _split_without_stock(machine, spec, plane, correction, correction_gmm, label)
        if note:
            pc.warnings = note
        return pc
    sheet = list(fitting_sheet(alloc, machine.speed_rpm))
    fit = []
    taken_off = [existing[i] for i in alloc.removed_existing]
    for k, p in enumerate(alloc.placements):
        where = f"position {p.position_index + 1}" if p.position_index is not None else "groove"
        text = f"{label}, plane {plane}, {where}"
        if p.moved_existing:
            moved = [existing[i] for i in p.moved_existing]
            taken_off += moved
            text += ", with " + " and ".join(f"the {_old_text(spec, w)} moved here" for w in moved)
            row = sheet[k]
            new_parts = " + ".join(mass_text(m) for m in p.pieces)
            sheet[k] = replace(row, what=", ".join(
                [x for x in [new_parts] if x] + [f"the {_old_text(spec, w)} moved here" for w in moved]))
        fit.append(Weight(plane, float(p.mass_g), float(p.angle_deg), float(p.radius_mm),
                          text, tuple(float(m) for m in p.pieces)))
    warnings = note + [f"Plane {plane}: {w}" for w in alloc.warnings]
    return PlaneCorrection(
        plane, correction, fit, sheet, abs(alloc.residual_gmm), float(alloc.residual_fraction), warnings,
        taken_off,
    )


def _position_index(spec: PlaneSpec, w: Weight) -> int | None:
    """The 0-based position a weight sits at (within 0.5 degree, same radius), or None."""
    if spec.continuous or abs(w.radius_mm - spec.radius_mm) > 0.5:
        return None
    for i, a in enumerate(positions_for(spec).angles_deg):
        if angle_between_deg(w.angle_deg, a) <= 0.5:
            return i
    return None


def _existing_weights(spec: PlaneSpec, existing: Sequence[Weight]) -> list[ExistingWeight]:
    """The allocator's view of weights already on: each may come off; one sitting at a known
    position may also be moved to another (the allocator needs its position to do that)."""
    out: list[ExistingWeight] = []
    if spec.continuous:  # in a groove they stay where they are (the correction allows for them)
        return out
    for w in existing:
        index = _position_index(spec, w)
        out.append(ExistingWeight(w.mass_g, w.angle_deg, w.radius_mm, index, may_move=index is not None,
                                  may_remove=True))
    return out


def _old_text(spec: PlaneSpec, w: Weight) -> str:
    index = _position_index(spec, w)
    where = f"position {index + 1}" if index is not None else angle_text(w.angle_deg)
    return f"{mass_text(w.mass_g)} from {where}"


def _split_without_stock(
    machine: Machine, spec: PlaneSpec, plane: int, correction: Weight, correction_gmm: complex, label: str
) -> PlaneCorrection:
    """No stock described, fixed positions: the classic split between the two usable positions
    either side of the correction angle (closed form, ``runtrue.allocation.split_two_positions``)."""
    angles = spec.position_angles_deg() or []
    usable = [(n, a) for n, a in enumerate(angles, start=1) if n not in spec.excluded]
    if not usable:
        raise ValueError(f"plane {plane}: every position is excluded; free at least one to fit weights")
    target = correction.angle_deg
    ahead = sorted(usable, key=lambda na: (na[1] - target) % 360.0)
    behind = sorted(usable, key=lambda na: (target - na[1]) % 360.0)
    a, b = behind[0], ahead[0]
    fit: list[Weight] = []
    rows = []
    if a[0] == b[0] or len(usable) == 1:
        masses = [(a, correction.mass_g * math.cos(math.radians(target - a[1])))]
    else:
        ma, mb = split_two_positions(correction_gmm, a[1], b[1], spec.radius_mm)
        masses = [(a, ma), (b, mb)]
    for (n, ang), m in masses:
        if m <= 1e-9:
            continue
        fit.append(Weight(plane, m, ang, spec.radius_mm, f"{label}, plane {plane}, position {n}"))
        rows.append(SheetRow(n, ang, spec.radius_mm, f"{m:.3g} g", m,
                             centrifugal_force_n(m, spec.radius_mm, machine.speed_rpm), "fit"))
    fitted = sum((w.unbalance_gmm for w in fit), 0j)
    residual = abs(correction_gmm - fitted)
    frac = residual / abs(correction_gmm) if correction_gmm else 0.0
    warn = [f"Plane {plane}: no stock or strip described; masses are exact values, make up pieces to match."]
    return PlaneCorrection(plane, correction, fit, rows, residual, frac, warn)

