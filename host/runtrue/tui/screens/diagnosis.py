"""Diagnosis: is it unbalance, how severe is it, is the speed near a resonance?

Reached from the live/machine flow with one key (the lead binds it there: see DEVELOPERS.md,
"Diagnosis").  Shows the waveform and the velocity spectrum (Hann window, running-speed orders
marked) of a raw capture, the severity zone per pickup, the verdict with what to check, and after
``o`` the 1x against speed (amplitude, phase, polar locus) of a coast-down with resonances and
the near-resonance warning.  The verdict is advice: Esc goes back to balancing whatever it says.

The meter work runs in the link's worker thread (``MeterLink.call``); results come back with
``App.call_from_thread``.  Each diagnosis is appended to ``session.diagnoses`` (the first is the
"before" of the report's diagnosis section, the last the "after") and a speed run is kept in
``session.speed_analysis``: ``runtrue.jobs.diagnosis_section.diagnosis_section_html`` takes them.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Iterable
from typing import Any

from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.widget import Widget
from textual.widgets import Static

from runtrue.device.errors import MeterError
from runtrue.diagnosis.acquire import SpeedAnalysis, analyse_speed_run, record_speed_change, take_diagnosis
from runtrue.diagnosis.severity import assess
from runtrue.diagnosis.zones import ZONE_TABLES
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.widgets.speedplot import spectrum_text, speed_plot_text, waveform_text

CLASS_KEYS = list(ZONE_TABLES)


class DiagnosisScreen(StepScreen):
    STEP = "Diagnosis: is it unbalance?"
    BINDINGS = [
        Binding("d", "diagnose", "Diagnose"),
        Binding("o", "speed_run", "Coast-down"),
        Binding("s", "view", "Spectrum/speed"),
        Binding("c", "next_channel", "Pickup"),
        Binding("g", "machine_class", "Class"),
        Binding("escape", "back", "Go on"),
    ]

    def __init__(self, machine_class: str = "class-I", balancing_rpm: float | None = None) -> None:
        super().__init__()
        self.machine_class = machine_class
        self.balancing_rpm = balancing_rpm
        self.diagnosis: Any = None
        self.speed: Any = None          # runtrue.diagnosis.acquire.SpeedAnalysis
        self.view = "spectrum"
        self.channel_row = 0
        self.busy = ""
        self.error = ""

    def compose_body(self) -> Iterable[Widget]:
        with VerticalScroll(id="diag-scroll"):
            yield Static(self._status_text(), id="diag-status", markup=False)
            yield Static(self._body_text(), id="diag-body", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        if self.session.link is not None and not self.session.manual:
            self.action_diagnose()

    def on_screen_resume(self) -> None:
        """Opened again (the app keeps this screen installed): a fresh diagnosis of the rotor as
        it is now; the earlier ones stay with the session and the job."""
        if self.diagnosis is not None and self.session.link is not None and not self.session.manual:
            self.action_diagnose()

    # ---- text -------------------------------------------------------------------------------
    def _status_text(self) -> str:
        table = ZONE_TABLES[self.machine_class]
        head = f"zones: {table.title} (k changes)"
        if self.busy:
            return f"{self.busy} ...   {head}"
        if self.error:
            return f"could not: {self.error}"
        return head

    def _body_text(self) -> str:
        lines: list[str] = []
        d = self.diagnosis
        if self.view == "speed":
            if self.speed is None:
                return ("No run-up or coast-down recorded yet. Press o, then switch the drive off (the "
                        "simulator coasts down by itself). Keep clear of the machine.")
            sa = self.speed
            ch = sorted(sa.curves)[min(self.channel_row, len(sa.curves) - 1)]
            lines += speed_plot_text(sa.curves[ch], sa.resonances[ch], sa.balancing_rpm, width=78)
            found = sa.resonances[ch]
            lines.append(f"channel {ch}: " + (", ".join(f"resonance {r.speed_rpm:.0f} rpm" for r in found)
                                              if found else "no resonance in the recorded range"))
            lines += [f"WARNING: {w}" for w in sa.warnings] or [f"balancing speed {sa.balancing_rpm:.0f} rpm: "
                                                              "not within 15 % of a resonance found"]
            return "\n".join(lines)
        if d is None:
            return "Press d to diagnose (30 revolutions and a raw capture of about a second)."
        c = d.channels[min(self.channel_row, len(d.channels) - 1)]
        lines.append(d.verdict.headline)
        lines += [f"  check: {t}" for t in d.verdict.checks]
        for cd in d.channels:
            s = cd.severity
            mark = ">" if cd is c else " "
            lines.append(f"{mark}ch{cd.channel} {cd.name[:28]}: {s.velocity_rms_mm_s:.2f} mm/s rms, zone {s.zone}"
                         f" ({s.meaning.split(':')[0]})")
        if c.waveform_g is not None and c.spectrum is not None:
            lines += waveform_text(c.waveform_g, d.rate_hz, d.edges_samples if d.edges_samples is not None else [],
                                   width=78, rows=3, speed_rpm=d.speed_rpm)
            lines += spectrum_text(c.spectrum, d.speed_rpm, width=78, rows=7)
        if not d.verdict.unbalance:
            lines.append("Esc: go on balancing anyway (the verdict is advice).")
        lines += d.notes
        return "\n".join(lines)

    def _redraw(self) -> None:
        self.query_one("#diag-status", Static).update(self._status_text())
        self.query_one("#diag-body", Static).update(self._body_text())

    # ---- actions ----------------------------------------------------------------------------
    def _start(self, what: str, work: Any) -> None:
        link = self.session.link
        if link is None or self.session.manual:
            self.error = "no meter: connect one (or a simulated machine) first"
            self._redraw()
            return
        if self.busy:
            return
        self.busy, self.error = what, ""
        self._redraw()
        app = self.app

        def job(client: Any) -> None:
            was = client.streaming
            try:
                result = work(client)
            except (MeterError, ValueError) as exc:
                app.call_from_thread(self._failed, str(exc))
                return
            finally:
                if not was and client.streaming:
                    client.stop()
            app.call_from_thread(self._done, result)

        job.__name__ = what
        link.call(job)

    def _failed(self, text: str) -> None:
        self.busy, self.error = "", text
        self._redraw()

    def _done(self, result: Any) -> None:
        self.busy = ""
        if isinstance(result, SpeedAnalysis):
            self.speed, self.view = result, "speed"
            self.session.speed_analysis = result
        else:
            self.diagnosis, self.view = result, "spectrum"
            self.session.diagnoses.append(result)
        self._keep_with_job()
        self._redraw()

    def _keep_with_job(self) -> None:
        """The open job keeps each diagnosis and speed run for its report (job events)."""
        try:
            self.session.record_diagnoses()
        except (OSError, ValueError, sqlite3.Error) as exc:
            self.notify(f"Shown, but not kept with the job: {exc}", title="Diagnosis", severity="warning")

    def action_diagnose(self) -> None:
        cls = self.machine_class
        self._start("diagnosing", lambda client: take_diagnosis(client, revs=30, machine_class=cls))

    def action_speed_run(self) -> None:
        machine_record = getattr(self.session, "machine", None)
        wanted = self.balancing_rpm or getattr(machine_record, "speed_rpm", None)

        def work(client: Any) -> Any:
            machine = getattr(client.transport, "machine", None)
            if machine is not None:     # the simulator: from 30 % above running speed down to 60 %
                run_speed = machine.scenario.speed_rpm
                run = record_speed_change(client, from_rpm=1.3 * run_speed, to_rpm=0.6 * run_speed,
                                          rate_rpm_per_s=3.0 * machine.scenario.coast_down_rpm_per_s)
            else:
                run = record_speed_change(client)
                run_speed = run.speed_rpm[0] if run.speed_rpm else float("nan")
            return analyse_speed_run(run, wanted or run_speed)

        self._start("recording the coast-down (switch the drive off)", work)

    def action_view(self) -> None:
        self.view = "speed" if self.view == "spectrum" else "spectrum"
        self._redraw()

    def action_next_channel(self) -> None:
        n = len(self.diagnosis.channels) if self.diagnosis is not None else 1
        self.channel_row = (self.channel_row + 1) % max(1, n)
        self._redraw()

    def action_machine_class(self) -> None:
        i = CLASS_KEYS.index(self.machine_class)
        self.machine_class = CLASS_KEYS[(i + 1) % len(CLASS_KEYS)]
        if self.diagnosis is not None:       # the zones again for the new class (same measurement)
            for cd in self.diagnosis.channels:
                cd.severity = assess(cd.severity.velocity_rms_mm_s, self.machine_class)
            self.diagnosis.machine_class = self.machine_class
        self._redraw()

    def action_back(self) -> None:
        self.app.pop_screen()
