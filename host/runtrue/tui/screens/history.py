"""A saved machine's history: every job, how bad it was and how good it ended, and the
influence coefficients kept for the next job.  Esc closes it."""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from runtrue.readings.numbers import local_time_text, phase_text, vib_number, vib_text
from runtrue.readings.units import lag_deg


def history_lines(store: Any, machine: Any) -> list[str]:
    lines = [f"{machine.name}: history", ""]
    jobs = store.machine_history(machine.id)
    if not jobs:
        lines.append("No jobs yet.")
    trend = {p.job_id: p for p in store.trend(machine.id)}
    lines.append(f"{'job':>4} {'started':<17} {'status':<8} {'runs':>4}  1x {machine.pickup_name(0)} before -> after")
    for j in jobs:
        p = trend.get(j.id)
        detail = j.problem  # "unreadable record #N (...): reason", or ""
        if p is not None and p.initial_amp_g and p.final_amp_g and p.final_amp_g[0] is not None:
            detail = (f"{vib_number(p.initial_amp_g[0], machine.speed_rpm)} -> "
                      f"{vib_text(p.final_amp_g[0], machine.speed_rpm)}")
            if p.residual_unbalance_gmm and p.permissible_unbalance_gmm:
                ratio = max(r / a for r, a in zip(p.residual_unbalance_gmm, p.permissible_unbalance_gmm))
                detail += f", {ratio:.2f}x allowed"
        lines.append(f"{j.id:>4} {local_time_text(j.started_at)[:16]:<17} {j.status:<8} {j.n_runs:>4}  {detail}")
    inf = machine.influence
    lines.append("")
    if inf is None:
        lines.append("No influence coefficients kept yet (a passed job keeps them).")
    else:
        when = local_time_text(inf.measured_at)[:10] or "an earlier date"
        lines.append(f"Kept from job {inf.job_id} ({when}, {inf.speed_rpm:.0f} rpm): the next job can go straight")
        lines.append("to the correction. What 100 g\N{MIDDLE DOT}mm at 0\N{DEGREE SIGN} in each plane does to each pickup:")
        for i, row in enumerate(inf.coefficients):
            cells = "  ".join(
                f"{machine.plane_name(p)}: {vib_text(abs(z) * 100.0, inf.speed_rpm)} "
                f"{phase_text(lag_deg(z))}"
                for p, z in enumerate(row, start=1)
            )
            lines.append(f"  {machine.pickup_name(i)}: {cells}")
    return lines


class HistoryScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "dismiss(None)", "Close")]

    def __init__(self, text: str) -> None:
        super().__init__()
        self.text = text

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static(self.text, markup=False)
