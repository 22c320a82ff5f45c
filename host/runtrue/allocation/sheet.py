"""The fitting sheet: what to fit where, and the centrifugal force each weight must withstand.

Centrifugal force of a point mass on a rotor: F = m·r·ω² with ω = 2π·n/60 (n in rev/min);
with m in g and r in mm, F[N] = m/1000 · r/1000 · ω².  (Newton's second law for uniform
circular motion, any dynamics text, e.g. Meriam & Kraige, *Engineering Mechanics: Dynamics*,
normal acceleration a_n = r·ω²; from memory.)  The formula's home is
``runtrue.balancing.forces``; :func:`centrifugal_force_n` here is its unchecked form
(``force_at_speed_n``) under the allocator's name.  Each weight's fixing (screw, clip, weld, glue)
must hold at least this force with margin; follow the machine maker's instructions and local
practice for securing weights, and stop and lock out the machine before fitting anything.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from runtrue.allocation.model import Allocation, ExistingWeight
from runtrue.balancing.forces import force_at_speed_n

#: F = m·r·ω² in newtons for ``mass_g`` at ``radius_mm`` turning at ``speed_rpm`` (no checks).
centrifugal_force_n = force_at_speed_n


@dataclass(frozen=True)
class SheetRow:
    """One line of the fitting sheet (angles against rotation from the reference mark)."""

    number: int | None
    angle_deg: float
    radius_mm: float
    what: str
    mass_g: float
    force_n: float
    action: str


def _fmt_mass(m: float) -> str:
    return f"{m:g} g"


def fitting_sheet(
    allocation: Allocation, speed_rpm: float, existing: Sequence[ExistingWeight] = ()
) -> list[SheetRow]:
    """Rows to fit, one per placement (removals of old weights first when ``existing`` is given)."""
    rows: list[SheetRow] = []
    for i in allocation.removed_existing:
        if i < len(existing):
            w = existing[i]
            number = None if w.position_index is None else w.position_index + 1
            rows.append(SheetRow(number, w.angle_deg, w.radius_mm, f"remove old weight #{i + 1}",
                                 w.mass_g, 0.0, "remove"))
    for p in allocation.placements:
        parts: list[str] = []
        if p.pieces:
            parts.append(" + ".join(_fmt_mass(m) for m in p.pieces))
        if p.length_mm is not None:
            parts.append(f"strip {p.length_mm:g} mm")
        for i in p.moved_existing:
            parts.append(f"old weight #{i + 1} moved here")
        number = None if p.position_index is None else p.position_index + 1
        # the force follows the unbalance m·r_cm (a strip along an arc has its centroid inside r)
        r_cm = abs(p.unbalance_gmm) / p.mass_g if p.mass_g > 0 and p.unbalance_gmm != 0 else p.radius_mm
        rows.append(SheetRow(number, p.angle_deg, p.radius_mm, ", ".join(parts), p.mass_g,
                             centrifugal_force_n(p.mass_g, r_cm, speed_rpm), "fit"))
    return rows
