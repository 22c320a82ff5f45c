"""Machine: pick a saved machine (or an unfinished job to resume), or describe a new one.

Saved machines keep their influence coefficients, so the next job can go straight to the
correction.  The grade table (F3) lists typical balance quality grades by rotor type.
"""

from __future__ import annotations

import math
import sqlite3
from collections.abc import Iterable
from typing import Any

from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widget import Widget
from textual.widgets import Footer, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from runtrue.balancing import permissible_unbalance
from runtrue.balancing.grades import parse_grade
from runtrue.jobs import BalanceJob
from runtrue.jobs.demo_machine import machine_for_scenario
from runtrue.jobs.weights import weights_left_on
from runtrue.readings.numbers import local_time_text, vib_number, vib_text
from runtrue.tui.machine_form import FIELDS, FormError, fields_from_machine, machine_from_fields
from runtrue.tui.method import TWO_PLANES_REFUSED, is_four_run, method_hint
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.screens.dialogs import WeightsLeftDialog, weights_left_lines
from runtrue.tui.screens.grades import GradeTable
from runtrue.tui.screens.history import HistoryScreen, history_lines
from runtrue.tui.units_text import IMPERIAL, METRIC, UNITS_WORDS, other_units, unbalance_text

NEW = "new"


def tolerance_text(values: dict[str, str], units: str = METRIC) -> str:
    """The permissible residual unbalance for what is typed so far (or what is missing)."""
    try:
        grade = parse_grade(values.get("grade", "") or "G6.3")
        mass = float(values.get("mass", "").replace(",", "."))
        speed = float(values.get("speed", "").replace(",", "."))
        planes = 2 if values.get("planes", "").strip() == "2" else 1
        tol = permissible_unbalance(grade, mass, speed, planes=planes)
    except Exception:  # noqa: BLE001 - incomplete form: say what the number needs
        return "Permissible residual unbalance: give mass, speed and grade."
    if units != METRIC:
        per = " + ".join(unbalance_text(u, units) for u in tol.per_plane_gmm)
        return (
            f"Permissible residual unbalance (ISO 21940-11): {unbalance_text(tol.permissible_unbalance_gmm, units)} "
            f"(per plane {per}), {tol.permissible_eccentricity_um:.2f} um."
        )
    per = " + ".join(unbalance_text(u) for u in tol.per_plane_gmm)
    return (
        f"Permissible residual unbalance (ISO 21940-11): {unbalance_text(tol.permissible_unbalance_gmm)} "
        f"(per plane {per}), {tol.permissible_eccentricity_um:.2f} \N{MICRO SIGN}m."
    )


def resume_prompt(store: Any, summary: Any) -> str:
    """Two lines for an unfinished job in the resume list: which job and machine, then when it
    started (local time), how many runs and how many weights are on the rotor now."""
    rec = store.get_job(summary.id)
    four_run = rec is not None and bool(rec.options.get("amplitude_only"))
    tag = " 4-run" if four_run else ""  # amplitude-only jobs say so
    runs = store.runs(summary.id)
    on = len(runs[-1].weights) if runs else len((rec.options if rec else {}).get("weights_at_start", []))
    when = local_time_text(summary.started_at)[5:16]
    return f"job {summary.id}{tag} {summary.machine_name}"[:23] + f"\n {when} {len(runs)}r {on}w on"[:24]


def history_text(store: Any, machine_id: int) -> str:
    """One line of a saved machine's history: jobs so far and how the last one ended."""
    jobs = store.machine_history(machine_id)
    if not jobs:
        return "No jobs yet."
    trend = store.trend(machine_id)
    text = f"{len(jobs)} job(s) before."
    if trend:
        last = trend[-1]
        verdict = "passed" if last.passed else "not passed"
        if last.initial_amp_g and last.final_amp_g and last.final_amp_g[0] is not None:
            m = store.get_machine(machine_id)
            speed = m.speed_rpm if m is not None else math.nan
            text += (f" Last ({local_time_text(last.date)[:10]}): {vib_number(last.initial_amp_g[0], speed)} -> "
                     f"{vib_text(last.final_amp_g[0], speed)}, {verdict}.")
        else:
            text += f" Last ({last.date[:10]}): {verdict}."
    return text


class MachineScreen(StepScreen):
    STEP = "2 Machine"
    BINDINGS = [
        Binding("f2", "start_job", "Start"),
        Binding("f3", "grades", "Grade"),
        Binding("f4", "back", "Back"),
        Binding("f5", "trial_mode", "Trial"),
        Binding("f6", "history", "Jobs"),
        Binding("f7", "amplitude_mode", "No mark"),
        Binding("f8", "units", "Units"),
        # not in the bottom bar (it would pass 80 columns): the hint below the form names it
        Binding("f10", "app.push_screen('diagnosis')", "Diagnose", show=False),
        Binding("f1", "app.help", "Help"),
    ]

    def compose_body(self) -> Iterable[Widget]:
        with Horizontal(id="machine-body"):
            with Vertical(id="machines-pane"):
                yield Static("Saved (*: coefficients)", classes="pane-title")
                yield OptionList(id="machines")
            with VerticalScroll(id="form"):
                for key, label, placeholder in FIELDS:
                    with Horizontal(classes="field"):
                        yield Label(label, classes="field-label")
                        yield Input(placeholder=placeholder, id=f"f_{key}", compact=True)
        yield Static("", id="hint", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        self._machines: dict[str, Any] = {}
        self._editing_id: int | None = None
        self._base: Any = None  # the machine the form was filled from
        self._fill_list()
        # a simulated machine: start from its description
        port = self.session.port or ""
        if self.session.machine is not None:
            self._load(self.session.machine)
        elif port.startswith("sim:"):
            try:
                m = machine_for_scenario(port[4:])
                saved = self.session.store.get_machine(m.name)
                self._load(saved or m)
            except Exception as exc:  # noqa: BLE001
                self.notify(f"Could not describe the simulated machine: {exc}", severity="warning")
        self.query_one("#f_name", Input).focus()
        self._update_hint()
        self.query_one(Footer).compact = True  # nine keys: fits 80 columns with single spacing

    def _fill_list(self) -> None:
        ol = self.query_one("#machines", OptionList)
        ol.clear_options()
        ol.add_option(Option("+ new machine", id=NEW))
        store = self.session.store
        for m in store.list_machines():
            self._machines[f"m{m.id}"] = m
            mark = " *" if m.influence is not None else ""
            ol.add_option(Option(f"{m.name}{mark}"[:24], id=f"m{m.id}"))
        self._unreadable: dict[str, str] = {}  # option id -> "unreadable record #N (...): reason"
        for problem in store.unreadable_machines():
            self._unreadable[f"u{problem.row_id}"] = str(problem)
            ol.add_option(Option(f"! #{problem.row_id} unreadable"[:24], id=f"u{problem.row_id}"))
        unfinished = store.unfinished_jobs()
        if unfinished:
            ol.add_option(Option("-- resume a job --", disabled=True))
            for j in sorted(unfinished, key=lambda j: j.id, reverse=True)[:8]:
                if j.problem:  # shown, never opened: Enter says why and offers to set it aside
                    self._unreadable[f"x{j.id}"] = j.problem
                    ol.add_option(Option(f"! job {j.id} unreadable"[:24], id=f"x{j.id}"))
                    continue
                ol.add_option(Option(resume_prompt(store, j), id=f"j{j.id}"))

    def _values(self) -> dict[str, str]:
        return {key: self.query_one(f"#f_{key}", Input).value for key, _, _ in FIELDS}

    def _load(self, machine: Any) -> None:
        self._editing_id = machine.id
        self._base = machine
        if machine.id is not None:  # the method is remembered with the machine
            self.rt_app.amplitude_only = machine.method == "no mark" and machine.n_planes == 1
        for key, value in fields_from_machine(machine).items():
            self.query_one(f"#f_{key}", Input).value = value

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        oid = event.option.id or ""
        if oid == NEW:
            self._editing_id = None
            self._base = None
            for key, _, _ in FIELDS:
                self.query_one(f"#f_{key}", Input).value = ""
            self.query_one("#f_name", Input).focus()
        elif oid.startswith("m"):
            self._load(self._machines[oid])
            self.query_one("#f_name", Input).focus()
        elif oid.startswith("j"):
            self._resume(int(oid[1:]))
        elif oid in getattr(self, "_unreadable", {}):
            self._unreadable_selected(oid)

    def _unreadable_selected(self, oid: str) -> None:
        """A stored record the program cannot use: say why; a job chosen twice is set aside
        (closed, its records left in the file untouched) so it no longer waits to be resumed."""
        problem = self._unreadable[oid]
        if oid.startswith("x") and getattr(self, "_set_aside_armed", "") == oid:
            self.session.store.set_aside(int(oid[1:]), problem)
            self._set_aside_armed = ""
            self.notify(f"Job {oid[1:]} set aside; its records stay in the job database.", timeout=5)
            self._fill_list()
            return
        more = " Enter again sets the job aside (its records stay in the file)." if oid.startswith("x") else ""
        self._set_aside_armed = oid
        self.query_one("#hint", Static).update(f"{problem}.{more}")

    def on_input_changed(self, event: Input.Changed) -> None:
        self._update_hint()

    def _update_hint(self) -> None:
        values = self._values()
        amplitude_only = self.rt_app.amplitude_only
        if amplitude_only:
            mode = "moved to three angles from a chalk mark, then taken off"
        elif self.rt_app.trial_removed:
            mode = "taken off before the next run (F5)"
        else:
            mode = "left on, correction net of them (F5)"
        trial = f"Trial weights: {mode}."
        diagnose = "F10 Diagnose: is it unbalance?"
        lines = [tolerance_text(values, self.rt_app.units), method_hint(amplitude_only)]
        lines += [f"{trial} {diagnose}"] if len(trial) + len(diagnose) < 78 else [trial, diagnose]
        if self._editing_id is not None:
            m = next((m for m in self._machines.values() if m.id == self._editing_id), None)
            if m is not None and m.influence is not None:
                if amplitude_only:
                    lines.append("Stored influence coefficients hold phase: not used by the amplitude-only method.")
                else:
                    lines.append(
                        f"Stored influence coefficients ({m.influence.speed_rpm:.0f} rpm): straight to the correction."
                    )
            lines.append(history_text(self.session.store, self._editing_id))
        self.query_one("#hint", Static).update("\n".join(lines))

    def action_grades(self) -> None:
        def chosen(grade: str | None) -> None:
            if grade:
                self.query_one("#f_grade", Input).value = grade

        self.app.push_screen(GradeTable(), chosen)

    def action_history(self) -> None:
        if self._editing_id is None:
            self.notify("Pick a saved machine first (list on the left).", severity="warning")
            return
        try:
            machine = self.session.store.get_machine(self._editing_id)
        except ValueError as exc:  # a record the program cannot use
            self.notify(str(exc), severity="error", timeout=8)
            return
        if machine is None:
            return

        self.app.push_screen(HistoryScreen("\n".join(history_lines(self.session.store, machine))))

    def action_trial_mode(self) -> None:
        if self.rt_app.amplitude_only:
            self.notify("In the four-run method the trial weight is moved and then taken off; it is never left on.",
                        severity="warning", timeout=5)
            return
        self.rt_app.trial_removed = not self.rt_app.trial_removed
        self._update_hint()

    def _two_planes(self) -> bool:
        return self.query_one("#f_planes", Input).value.strip() == "2"

    def action_amplitude_mode(self) -> None:
        """No reference mark: the amplitude-only (four-run) method, single plane only."""
        app = self.rt_app
        if not app.amplitude_only and self._two_planes():
            self.notify(TWO_PLANES_REFUSED, title="One plane only", severity="error", timeout=8)
            return
        app.amplitude_only = not app.amplitude_only
        if app.amplitude_only:
            self.notify("No reference mark: the job uses the amplitude-only (four-run) method; you will chalk a 0\N{DEGREE SIGN} "
                        "mark on the rotor. F7 again to use the reference mark.", title="Amplitude-only", timeout=5)
        self._update_hint()

    def action_units(self) -> None:
        """Show masses, radii and unbalance in metric or imperial units (display only)."""
        app = self.rt_app
        app.units = other_units(app.units)
        form = " The machine form and the job stay metric (units in each label)." if app.units == IMPERIAL else ""
        self.notify(f"Units shown: {app.units} ({UNITS_WORDS[app.units]}); forces in N.{form} F8 to switch.",
                    title="Display units", timeout=5)
        self._update_hint()

    def action_back(self) -> None:
        self.rt_app.show_connect()

    def action_start_job(self) -> None:
        try:
            machine = machine_from_fields(self._values(), self._editing_id, self._base)
        except FormError as exc:
            self.notify(str(exc), title="Check the machine", severity="error", timeout=6)
            self.query_one(f"#f_{exc.field}", Input).focus()
            return
        store = self.session.store
        try:
            saved = store.get_machine(machine.id if machine.id is not None else machine.name)
        except ValueError as exc:  # a stored record of that name the program cannot use
            self.notify(f"{exc}; give this machine another name.", title="Check the machine", severity="error",
                        timeout=8)
            self.query_one("#f_name", Input).focus()
            return
        if machine.id is not None:  # a saved machine: it keeps its influence coefficients
            if saved is not None:
                machine.influence = saved.influence
        else:
            if saved is not None:  # the same name is the same machine: update it, keep its coefficients
                machine.id = saved.id
                machine.influence = saved.influence
                self.notify(f"Updated the saved machine {machine.name!r}.", timeout=3)
        amplitude_only = self.rt_app.amplitude_only
        if amplitude_only and machine.n_planes != 1:
            self.notify(TWO_PLANES_REFUSED, title="One plane only", severity="error", timeout=8)
            self.query_one("#f_planes", Input).focus()
            return
        try:
            store.save_machine(machine)
        except ValueError as exc:
            self.notify(str(exc), title="Check the machine", severity="error", timeout=6)
            self.query_one("#f_name", Input).focus()
            return
        if not self.rt_app.use_channels(machine.n_pickups):
            self.query_one("#f_pickups", Input).focus()
            return
        method = "no mark" if amplitude_only else "mark"
        if machine.method != method:  # remembered for the next job on this machine
            machine.method = method
            store.save_machine(machine)

        left = weights_left_on(store, machine)
        if left is None:
            self._start(machine, [], False)
            return

        job_id, when, weights = left

        def answered(choice: str | None) -> None:
            if choice is None:
                return
            self._start(machine, weights if choice in ("keep", "combine", "move") else [], choice == "combine",
                        move=choice == "move")

        self.app.push_screen(WeightsLeftDialog(weights_left_lines(machine, job_id, when, weights),
                                               can_combine=not amplitude_only), answered)

    def _start(self, machine: Any, weights_at_start: list[Any], combine: bool, move: bool = False) -> None:
        store = self.session.store
        self.session.machine = machine
        try:
            if self.rt_app.amplitude_only:
                job = BalanceJob.start(store, machine, amplitude_only=True, weights_at_start=weights_at_start)
            else:
                job = BalanceJob.start(store, machine, trial_removed=self.rt_app.trial_removed,
                                       weights_at_start=weights_at_start, combine_at_start=combine,
                                       move_at_start=move)
        except ValueError as exc:
            self.notify(str(exc), title="Job not started", severity="error", timeout=8)
            return
        self.session.job = job
        self._keep_diagnoses()
        self.rt_app.show_runs()

    def _keep_diagnoses(self) -> None:
        """Diagnoses taken before the job started are its "before" (job events, for the report)."""
        try:
            self.session.record_diagnoses()
        except (OSError, ValueError, sqlite3.Error) as exc:
            self.notify(f"The diagnosis is not kept with the job: {exc}", title="Diagnosis", severity="warning")

    def _resume(self, job_id: int) -> None:
        try:
            job = BalanceJob.resume(self.session.store, job_id)
        except ValueError as exc:
            self.notify(str(exc), severity="error")
            return
        if not self.rt_app.use_channels(job.machine.n_pickups):
            return
        self.session.machine = job.machine
        self.session.job = job
        method = " (amplitude-only, four-run)" if is_four_run(job) else ""
        self.notify(f"Job {job_id}{method} resumed with {len(job.runs)} run(s) kept.", title="Resumed")
        self.rt_app.show_runs()
