"""What the fitter must do before the next run, as a tick-off list: weights to take off, then
weights to fit, each with where (position, angle against rotation from the mark, radius), what
(pieces or strip), and the centrifugal force it must withstand at running speed.

Derived from the job (``runtrue.jobs.BalanceJob``): the weights on the rotor now (its last run)
against ``planned_weights()`` for the next run; for a correction or trim, the allocator's
fitting sheet gives the pieces.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from runtrue.balancing.forces import force_at_speed_n as centrifugal_force_n
from runtrue.tui.format import DEG
from runtrue.tui.units_text import METRIC, force_text, mass_text, radius_text


@dataclass(frozen=True)
class FitItem:
    key: str  # stable id for the tick-off list
    plane: int
    letter: str  # shown on the dial
    angle_deg: float
    remove: bool
    text: str


def _multiset_minus(a: list[Any], b: list[Any]) -> list[Any]:
    rest = list(b)
    out = []
    for x in a:
        if x in rest:
            rest.remove(x)
        else:
            out.append(x)
    return out


def imperial_lines(job: Any, units: str) -> list[str]:
    """The runs screen's instructions come from the job in metric; with imperial display units,
    one more line gives the weights to fit for the coming run in oz and in (nothing in metric)."""
    if units == METRIC or job is None:
        return []
    on = list(job.runs[-1].weights) if job.runs else []
    add = _multiset_minus(list(job.planned_weights()), on)
    if not add:
        return []
    parts = [
        f"plane {w.plane} {mass_text(w.mass_g, units)} at {w.angle_deg:.1f}{DEG}, r {radius_text(w.radius_mm, units)}"
        for w in add
    ]
    return [f"In oz and in, fit: {'; '.join(parts)}."]


def fit_items(job: Any, units: str = METRIC) -> list[FitItem]:
    on = list(job.runs[-1].weights) if job.runs else []
    planned = list(job.planned_weights())
    remove = _multiset_minus(on, planned)
    add = _multiset_minus(planned, on)
    speed = job.machine.speed_rpm
    m = job.machine
    trial_word = "trial weight"
    sheet_rows: dict[int, list[Any]] = {}
    plan = job.state.plan
    if plan is not None:
        for pc in plan.planes:
            sheet_rows[pc.plane] = [r for r in pc.sheet if getattr(r, "action", "fit") == "fit"]
    items: list[FitItem] = []
    for k, w in enumerate(remove):
        items.append(
            FitItem(f"r{k}", w.plane, "x", w.angle_deg, True,
                    f"TAKE OFF {mass_text(w.mass_g, units)}: "
                    f"{trial_word if w.label.startswith(trial_word) else (w.label or 'weight')}\n"
                    f"  {m.plane_name(w.plane)} at {w.angle_deg:.1f}{DEG}, r {radius_text(w.radius_mm, units)}")
        )
    letters = "ABCDEFGHIJKLMNOPQRSTUVWXYZ"
    used: dict[int, int] = {}
    for k, w in enumerate(add):
        rows = sheet_rows.get(w.plane, [])
        n = used.get(w.plane, 0)
        row = rows[n] if n < len(rows) else None
        used[w.plane] = n + 1
        force = centrifugal_force_n(w.mass_g, w.radius_mm, speed)
        where = f"pos {row.number} " if row is not None and row.number is not None else ""
        what = f" = {row.what}" if row is not None and row.what else ""
        items.append(
            FitItem(f"a{k}", w.plane, letters[k % 26], w.angle_deg, False,
                    f"{letters[k % 26]} FIT {mass_text(w.mass_g, units)}{what}\n"
                    f"  {m.plane_name(w.plane)} {where}at {w.angle_deg:.1f}{DEG}, r {radius_text(w.radius_mm, units)}\n"
                    f"  secure for {force_text(force, units)}")
        )
    return items
