"""A saved machine's history: every job, how bad it was and how good it ended, and the
influence coefficients kept for the next job.  Esc closes it."""

from __future__ import annotations

import cmath
import math
from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from runtrue.tui.format import DEG


def history_lines(store: Any, machine: Any) -> list[str]:
    lines = [f"{machine.name}: history", ""]
    jobs = store.machine_history(machine.id)
    if not jobs:
        lines.append("No jobs yet.")
    trend = {p.job_id: p for p in store.trend(machine.id)}
    lines.append(f"{'job':>4} {'started':<17} {'status':<8} {'runs':>4}  1x ch1 before -> after, residual")
    for j in jobs:
        p = trend.get(j.id)
        detail = j.problem  # "unreadable record #N (...): reason", or ""
        if p is not None and p.initial_amp_g and p.final_amp_g and p.final_amp_g[0] is not None:
            detail = f"{p.initial_amp_g[0]:.3g} -> {p.final_amp_g[0]:.3g} g"
            if p.residual_unbalance_gmm and p.permissible_unbalance_gmm:
                ratio = max(r / a for r, a in zip(p.residual_unbalance_gmm, p.permissible_unbalance_gmm))
                detail += f", {ratio:.2f}x allowed"
        lines.append(f"{j.id:>4} {j.started_at[:16]:<17} {j.status:<8} {j.n_runs:>4}  {detail}")
    inf = machine.influence
    lines.append("")
    if inf is None:
        lines.append("No influence coefficients kept yet (a passed job keeps them).")
    else:
        lines.append(f"Influence coefficients kept from job {inf.job_id}, at {inf.speed_rpm:.0f} rpm "
                     f"(g per g.mm, lag after the mark):")
        for i, row in enumerate(inf.coefficients, start=1):
            cells = "  ".join(
                f"plane {p}: {abs(z):.3g} @ {math.degrees(cmath.phase(z)) % 360:.0f}{DEG}"
                for p, z in enumerate(row, start=1)
            )
            lines.append(f"  pickup {i}: {cells}")
    return lines


class HistoryScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "dismiss(None)", "Close")]

    def __init__(self, text: str) -> None:
        super().__init__()
        self.text = text

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static(self.text, markup=False)
