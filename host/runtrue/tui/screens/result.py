"""Result: before and after per pickup, residual unbalance against the permissible value per
plane with pass or fail, the weights left on the rotor; write the HTML report and the CSV/JSON
export of the runs (both from ``runtrue.jobs``).
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterable
from pathlib import Path

from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.widget import Widget
from textual.widgets import Static

from runtrue.jobs.export import job_json, runs_csv
from runtrue.jobs.report import render_html, report_details, save_report_details
from runtrue.tui.format import ANGLE_NOTE, PHASE_NOTE, vib_unit_of
from runtrue.tui.method import CHALK_ANGLE_NOTE, PHASE_NOT_USED_NOTE
from runtrue.tui.result_text import channel_lines, is_four_run_result, method_lines, plane_lines, verdict, weights_lines
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.screens.dialogs import ReportDetailsForm


def _slug(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", name).strip("-").lower() or "machine"


class ResultScreen(StepScreen):
    STEP = "6 Result"
    BINDINGS = [
        Binding("h", "report", "HTML report"),
        Binding("e", "export", "Export CSV+JSON"),
        Binding("i", "details", "Details"),
        Binding("b", "back", "Back to runs"),
        Binding("n", "new_job", "New job"),
        Binding("f1", "app.help", "Help"),
    ]

    def compose_body(self) -> Iterable[Widget]:
        yield Static("", id="verdict", markup=False)
        with VerticalScroll(id="result-body"):
            yield Static("", id="result-text", markup=False)
        yield Static("", id="hint", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        self.redraw()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        job = self.session.job
        if action == "back":
            return True if job is not None and job.state.step != "done" else False
        return True

    def redraw(self) -> None:
        job = self.session.job
        if job is None:
            self.query_one("#result-text", Static).update("No job yet.")
            return
        res = job.result()
        cls, sentence = verdict(res)
        v = self.query_one("#verdict", Static)
        v.update(f" {sentence}")
        v.set_classes(cls)
        lines = [f"{res.machine_name}, job {res.job_id}: {res.runs} run(s), {res.speed_rpm:g} rpm, status {res.status}"]
        units = self.rt_app.units
        m = job.machine
        names = [m.plane_name(p) for p in range(1, m.n_planes + 1)]
        lines += method_lines(res, units)
        lines += [""] + channel_lines(res, vib_unit_of(self.app))
        lines += ["", f"Residual unbalance vs permissible ({res.grade}, {res.standard}):"] + plane_lines(res, units, names)
        lines += ["", "Weights added (on the rotor now), with the force each must hold:"] + weights_lines(res, units, m)
        if res.warnings:
            lines += ["", "Notes:"] + [f"- {w}" for w in res.warnings]
        if is_four_run_result(res):
            lines += ["", f"{PHASE_NOT_USED_NOTE}; {CHALK_ANGLE_NOTE}."]
        else:
            lines += ["", f"{PHASE_NOTE}; {ANGLE_NOTE}."]
        self.query_one("#result-text", Static).update("\n".join(lines))
        self.query_one("#hint", Static).update(
            "h: HTML report   e: CSV + JSON of the runs   i: technician, site, notes\n"
            "Written beside the job database; the full path is shown here when written.")

    def _folder(self) -> Path:
        """Where reports go: the folder given to the application, else ``reports`` beside the
        job database in the user's data directory (not wherever the program was started)."""
        given = Path(self.rt_app.report_dir)
        store_path = Path(str(self.session.store.path))
        if given == Path.cwd() / "reports" and str(store_path) != ":memory:":
            return store_path.resolve().parent / "reports"
        return given.resolve()

    def _out_path(self, suffix: str) -> Path:
        job = self.session.job
        folder = self._folder()
        folder.mkdir(parents=True, exist_ok=True)
        return folder / f"job-{job.job_id}-{_slug(job.machine.name)}{suffix}"

    def action_report(self) -> None:
        job = self.session.job
        if job is None:
            return
        try:
            path = self._out_path(".html")
            path.write_text(render_html(self.session.store, job.job_id, vib_unit_of(self.app)), encoding="utf-8")
        except (OSError, ValueError) as exc:
            self.notify(f"Report not written: {exc}", severity="error", timeout=8)
            return
        self.query_one("#hint", Static).update(
            f"Report: {path}\nOpen it in a web browser to read or print it (Ctrl+P; save as PDF to send it).")
        self.notify(f"Report written: {path}", title="Report", timeout=6)

    def action_export(self) -> None:
        job = self.session.job
        if job is None:
            return
        try:
            csv_path = self._out_path("-runs.csv")
            csv_path.write_text(runs_csv(self.session.store, job.job_id), encoding="utf-8")
            json_path = self._out_path(".json")
            json_path.write_text(json.dumps(job_json(self.session.store, job.job_id), indent=2), encoding="utf-8")
        except (OSError, ValueError) as exc:
            self.notify(f"Export not written: {exc}", severity="error", timeout=8)
            return
        self.query_one("#hint", Static).update(f"Written: {csv_path.name}, {json_path.name}\nin {csv_path.parent}")
        self.notify(f"Exported to {csv_path.parent}", title="Export", timeout=6)

    def action_details(self) -> None:
        """Technician, site, asset tag, work order and notes for the report; technician and
        site start from the machine's previous job."""
        job = self.session.job
        if job is None:
            return
        store = self.session.store
        values = report_details(store, job.job_id)
        if not any(values.values()) and job.machine.id is not None:
            earlier = [j.id for j in store.machine_history(job.machine.id) if j.id != job.job_id]
            if earlier:
                last = report_details(store, max(earlier))
                values.update({k: last[k] for k in ("technician", "site", "asset")})

        def saved(details: dict[str, str] | None) -> None:
            if details is not None:
                save_report_details(store, job.job_id, details)
                self.notify("Saved with the job; h writes the report with them.", title="Report details", timeout=4)

        self.app.push_screen(ReportDetailsForm(values), saved)

    def action_back(self) -> None:
        self.rt_app.show_runs()

    def action_new_job(self) -> None:
        self.session.job = None
        self.rt_app.show_machine()
