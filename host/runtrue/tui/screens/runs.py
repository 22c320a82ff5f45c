"""Balancing runs: reference -> trial (per plane) -> correction -> trims, one step at a time.

Every step says what to do physically (from ``BalanceJob.instructions()``, which carries the
angle convention and the cautions), shows the runs taken so far, and takes the next reading
(live from the meter, or typed in from another instrument).  On the simulator the weights the
user is told to fit are put on the virtual rotor, by their geometry, before each reading.
"""

from __future__ import annotations

import re
import time
from collections.abc import Iterable
from typing import Any

from rich.text import Text
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widget import Widget
from textual.widgets import Static

from runtrue.jobs import RunReading
from runtrue.jobs.limits import ForceLimitExceeded, OverSpeed, force_limit_basis
from runtrue.jobs.results import ForceCheck
from runtrue.readings.numbers import DEG, phase_text, vib_number, vib_text
from runtrue.tui.fitting_list import imperial_lines
from runtrue.tui.format import SAFETY_FIT, SAFETY_START, vib_unit_of
from runtrue.tui.method import is_four_run
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.screens.dialogs import ConfirmDialog, ManualReadingForm, TrialWeightForm, force_confirm_lines
from runtrue.tui.screens.fitting import FittingScreen
from runtrue.tui.screens.live import LiveScreen
from runtrue.tui.unbalance_split import static_couple_lines

RUN_LETTER = {"reference": "R", "trial": "T", "correction": "C", "trim": "t"}


def step_names(n_planes: int, four_run: bool = False) -> list[str]:
    """The steps of a job; the four-run method moves one trial weight to three angles."""
    if four_run:
        trials = ["trial 1", "trial 2", "trial 3"]
    else:
        trials = ["trial"] if n_planes == 1 else [f"trial {p}" for p in range(1, n_planes + 1)]
    return ["reference", *trials, "correction", "trim", "done"]


def current_step_name(job: Any) -> str:
    s = job.state
    if s.step == "trial" and is_four_run(job):
        return f"trial {s.trial_number or 1}"
    if s.step == "trial" and job.machine.n_planes > 1:
        return f"trial {s.plane}"
    return str(s.step)


def step_bar(job: Any) -> Text:
    four_run = is_four_run(job)
    names = step_names(job.machine.n_planes, four_run)
    now = current_step_name(job)
    idx = names.index(now) if now in names else 0
    text = Text(" ")
    for i, name in enumerate(names):
        if i:
            text.append(" > ", "dim")
        if i < idx:
            text.append(name, "green")
        elif i == idx:
            text.append(f" {name} ", "bold reverse")
        else:
            text.append(name, "dim")
    if four_run:
        text.append(f"  cycle {job.state.cycle or 1}", "dim")
    return text


def _trial_angle(run: Any) -> float | None:
    return next((w.angle_deg for w in run.weights if w.label.startswith("trial")), None)


def runs_lines(job: Any, unit: str = "mm/s rms") -> list[str]:
    """The runs so far: number, kind, and each pickup's 1x in the display unit (named in the pane
    title) and phase; for the four-run method the amplitude only, and for a trial run the trial
    weight's angle from the chalk mark."""
    four_run = is_four_run(job)
    lines = []
    m = job.machine
    several = m.n_pickups > 1
    for r in job.runs:
        head = f"{r.seq:>2} {r.kind[:5]:<5}"
        speed = r.reading.speed_rpm
        if several:  # a line per run, then each pickup by name
            lines.append(head)
        for i, ch in enumerate(r.reading.channels):
            prefix = f"  {m.pickup_name(i)[:6]:<6}" if several else head
            if not four_run:
                lines.append(f"{prefix} {vib_number(ch.amp_g, speed, unit):>6} {phase_text(ch.phase_deg):>4}")
                continue
            angle = _trial_angle(r) if r.kind == "trial" and i == 0 else None
            at = f" T@{angle:.0f}{DEG}" if angle is not None else ""
            lines.append(f"{prefix} {vib_number(ch.amp_g, speed, unit):>6}{at}")
    return lines or ["(no runs yet)"]


def polar_marks(job: Any) -> list[list[tuple[str, complex]]]:
    """Earlier runs as letters on each channel's polar plot (R reference, T trial, C correction, t trim)."""
    out: list[list[tuple[str, complex]]] = [[] for _ in range(job.machine.n_pickups)]
    for r in job.runs:
        for i, ch in enumerate(r.reading.channels[: len(out)]):
            out[i].append((RUN_LETTER.get(r.kind, "?"), ch.mean))
    return out


def amplitude_marks(job: Any) -> list[tuple[str, list[float]]]:
    """Earlier runs' 1x amplitudes per pickup, labelled R, T1-T3, C, t (four-run live view)."""
    out: list[tuple[str, list[float]]] = []
    k = 0
    for r in job.runs:
        if r.kind == "trial":
            k = k % 3 + 1
            label = f"T{k}"
        else:
            label = RUN_LETTER.get(r.kind, "?")
        out.append((label, [ch.amp_g for ch in r.reading.channels]))
    return out


def expected_after_fitting(job: Any) -> list[complex]:
    """The 1x each pickup should read once the listed pieces are fitted: the engine's prediction
    for the exact correction plus the effect of what the pieces leave unfitted (through the
    influence coefficients)."""
    plan = job.state.plan
    influence = job.influence
    out = [complex(v) for v in plan.predicted]
    if influence is None:
        return out
    for pc in plan.planes:
        fitted = sum((w.unbalance_gmm for w in pc.fit), 0j)
        delta = fitted - pc.correction.unbalance_gmm
        for i in range(len(out)):
            out[i] += influence[i][pc.plane - 1] * delta
    return out


_LOCK_OUT = re.compile(r"(?:^|:\s*)stop the machine and lock it out(?: first)?\.\s*$", re.IGNORECASE)


def without_lock_out(steps: list[str]) -> list[str]:
    """The job's instructions without their lock-out sentence, for a screen whose bottom line
    already says STOP and LOCK OUT: a step named before it keeps its name ("Four-run cycle 1,
    trial run 2 of 3."), a bare one ("Correction: stop ...") goes."""
    out = []
    for line in steps:
        m = _LOCK_OUT.search(line)
        if m is None:
            out.append(line)
            continue
        rest = line[:m.start()].strip()
        if len(rest.split()) > 3:
            out.append(rest + ".")
    return out


class RunsScreen(StepScreen):
    STEP = "3 Balancing runs"
    BINDINGS = [
        Binding("r", "reading", "Reading"),
        Binding("f", "fitting", "Fitting"),
        Binding("w", "trial", "Trial weight"),
        Binding("k", "accept", "Keep weak trial"),
        Binding("x", "stop", "Stop job"),
        Binding("v", "result", "Result"),
    ]

    todo_text = ""  # the instructions shown now (the pane scrolls; tests read them here)

    def _title_text(self) -> str:
        job = self.session.job
        return f" runtrue | {self.STEP}: {job.machine.name[:22]}" if job is not None else super()._title_text()

    def compose_body(self) -> Iterable[Widget]:
        yield Static("", id="stepbar")
        with Horizontal(id="runs-body"):
            with VerticalScroll(id="todo-pane"):
                yield Static("", id="todo", markup=False)
            with Vertical(id="runs-pane"):
                yield Static("Runs (1x)", id="runs-title", classes="pane-title")
                yield Static("", id="runs-list", markup=False)
                yield Static("", id="split", classes="note", markup=False)
        yield Static("", id="caution", classes="caution", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        self._stop_armed = 0.0
        self.redraw()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        job = self.session.job
        if job is None:
            return None
        step = job.state.step
        if action == "trial":
            if is_four_run(job) and job.state.trial_number not in (None, 1) and job.early_larger_trial is None:
                return False  # the three angles follow from the first: change it before trial run 1
            return True if step == "trial" else False
        if action == "accept":
            chk = job.state.last_trial_check
            return True if step == "trial" and chk is not None and not chk.ok and not chk.accepted_anyway else False
        if action in ("reading", "stop"):
            return True if step != "done" else False
        if action == "fitting":
            return True if step in ("trial", "correction", "trim") else False
        return True

    def redraw(self) -> None:
        job = self.session.job
        if job is None or not self.query("#todo"):  # no job, or not composed yet / going away
            return
        self.refresh_status()
        step = job.state.step
        self.query_one("#stepbar", Static).update(step_bar(job))
        unit = vib_unit_of(self.app)
        caution = SAFETY_FIT if step in ("trial", "correction", "trim") else SAFETY_START if step == "reference" else ""
        steps = job.instructions()
        if "LOCK OUT" in caution:  # the bottom line says it: once per screen
            steps = without_lock_out(steps)
        lines = [f"- {line}" for line in steps]
        lines += [f"- {line}" for line in imperial_lines(job, self.rt_app.units)]
        plan = job.state.plan
        if plan is not None and plan.predicted:
            expected = expected_after_fitting(job)
            speed = job.runs[-1].reading.speed_rpm if job.runs else job.machine.speed_rpm
            text = ", ".join(f"{job.machine.pickup_name(i)} {vib_text(abs(v), speed, unit)}" for i, v in enumerate(expected))
            lines.append(f"- Expected 1x after fitting these pieces: {text}.")
        if job.state.warnings:
            lines += ["", "Warnings:"] + [f"! {w}" for w in job.state.warnings]
        self.query_one("#todo", Static).update("\n".join(lines))
        self.todo_text = "\n".join(lines)
        self.query_one("#runs-title", Static).update(f"Runs, 1x {unit}")
        self.query_one("#runs-list", Static).update("\n".join(runs_lines(job, unit)))
        split = static_couple_lines(plan, self.rt_app.units) if step in ("correction", "trim") else []
        split_w = self.query_one("#split", Static)
        split_w.update("\n".join(split))
        split_w.display = bool(split)
        self.query_one("#caution", Static).update(caution)
        self.refresh_bindings()

    # -- actions ----------------------------------------------------------------------------------
    def action_reading(self) -> None:
        s = self.session
        job = s.job
        if job is None or job.state.step == "done":
            return
        if not job.forces_confirmed:
            self._confirm_forces(then=self.action_reading)
            return
        if s.manual:
            speed = job.runs[-1].reading.speed_rpm if job.runs else job.machine.speed_rpm
            form = ManualReadingForm([p.label for p in job.machine.pickups], speed, s.manual_unit,
                                     amplitude_only=is_four_run(job))

            def typed(reading: Any) -> None:
                s.manual_unit = form.chosen_unit
                self._record(reading)

            self.app.push_screen(form, typed)
            return
        if s.link is None or not s.link.connected:
            self.notify("The meter is not connected: wait for it (title bar) or pick it on the Connect screen.",
                        severity="warning")
            return
        if s.simulated:
            self._fit_on_simulator(job.planned_weights())
        # only revolutions measured after every change asked for so far (channels, weights)
        s.live.reset(s.link.latest_epoch)

        four_run = is_four_run(job)
        self.app.push_screen(
            LiveScreen(current_step_name(job) + " run", marks=polar_marks(job), auto=True,
                       amplitude_only=four_run, earlier=amplitude_marks(job) if four_run else None),
            self._record,
        )

    def _fit_on_simulator(self, wanted: list[Any]) -> int:
        epoch = self.rt_app.fit_on_simulator(wanted)
        if wanted:
            self.notify(
                f"Simulator: the virtual rotor carries the {len(wanted)} weight(s) listed for this run.",
                title="Simulated machine",
                timeout=3,
            )
        return epoch

    def _confirm_forces(self, then: Any) -> None:
        """Ask before a run whose weights pull harder than the force limit; ``then`` on yes."""
        job = self.session.job
        lines = force_confirm_lines(job.weights_over_limit(), force_limit_basis(job.machine), job.machine.speed_rpm)

        def answered(yes: bool | None) -> None:
            if yes:
                job.confirm_forces()
                then()

        self.app.push_screen(ConfirmDialog("Weight above the force limit", lines, yes="y: fitted and secured for it"),
                             answered)

    def _record(self, reading: Any, over_speed_confirmed: bool = False) -> None:
        if reading is None:
            return
        job = self.session.job
        if is_four_run(job):
            rr = RunReading.from_reading(reading)
            if rr.has_phase:  # the meter's phase is not part of this method: keep the amplitudes only
                reading = rr.amplitudes_only()

        try:
            run = job.record_run(reading, over_speed_confirmed=over_speed_confirmed)
        except OverSpeed as exc:
            lines = [f"Measured {exc.speed_rpm:.0f} rpm; the machine's rated speed is {exc.rated_rpm:g} rpm.",
                     "STOP the machine. Record this run only if the maker allows this speed."]

            def answered(yes: bool | None) -> None:
                if yes:
                    self._record(reading, over_speed_confirmed=True)

            self.app.push_screen(ConfirmDialog("Above the rated speed", lines, yes="y: record it anyway"), answered)
            return
        except Exception as exc:  # noqa: BLE001 - shown to the user, nothing recorded is lost
            self.notify(f"Reading not recorded: {exc}", severity="error", title="Not recorded", timeout=8)
            return
        self.rt_app.ticked.clear()
        self.notify(f"Run {run.seq} ({run.kind}) saved.", timeout=2)
        chk = job.state.last_trial_check
        if run.kind == "trial" and chk is not None and not chk.ok:
            self.notify("Fit the larger trial shown, or press k to keep this one and go on.",
                        title="Trial too small?", severity="warning", timeout=10)
        if job.state.step == "done":
            self.rt_app.show_result()
            return
        self.redraw()

    def action_fitting(self) -> None:
        def back(choice: str | None) -> None:
            if choice == "run":  # everything ticked off (or confirmed): take the reading
                self.action_reading()

        self.app.push_screen(FittingScreen(), back)

    def action_trial(self) -> None:
        job = self.session.job
        t = job.suggested_trial() if job is not None else None
        if t is None:
            return
        t = getattr(job, "early_larger_trial", None) or t  # four-run: the larger trial after a weak run 1

        def chosen(value: tuple[float, float] | None) -> None:
            if value is None:
                return

            try:
                job.set_trial(value[0], value[1])
            except ForceLimitExceeded as exc:
                check = ForceCheck(exc.weight, exc.force_n, exc.limit_n)
                lines = force_confirm_lines([check], force_limit_basis(job.machine), job.machine.speed_rpm)

                def answered(yes: bool | None) -> None:
                    if yes:
                        job.set_trial(value[0], value[1], confirm_over_limit=True)
                        self.redraw()

                self.app.push_screen(ConfirmDialog("Trial weight above the force limit", lines,
                                                   yes="y: use it, I will secure it"), answered)
                return
            except ValueError as exc:
                self.notify(str(exc), severity="error")
            self.redraw()

        self.app.push_screen(TrialWeightForm(t.mass_g, t.angle_deg, chalk=is_four_run(job)), chosen)

    def action_accept(self) -> None:
        job = self.session.job
        try:
            job.accept_trial_anyway()
        except ValueError as exc:
            self.notify(str(exc), severity="warning")
            return
        self.notify("Weak trial accepted; the warning stays with the job.", severity="warning")
        if job.state.step == "done":
            self.rt_app.show_result()
        else:
            self.redraw()

    def action_stop(self) -> None:
        now = time.monotonic()
        if now - self._stop_armed > 4.0:
            self._stop_armed = now
            self.notify("Press x again to stop the job here (the runs are kept).", severity="warning", timeout=4)
            return
        self.session.job.stop()
        self.rt_app.show_result()

    def action_result(self) -> None:
        self.rt_app.show_result()

    def meter_event(self, message: object) -> None:
        pass
