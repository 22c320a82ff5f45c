"""Live readings: per pickup the 1x amplitude and phase lag, speed, steadiness, the scatter of
recent revolutions on a polar plot, 2x and overall values; and taking a reading - on a key, or
automatically once the readings have settled - with progress and time left.

The screen redraws from the session on a timer (four times a second at most: light over SSH);
revolutions arrive from the meter link's thread as messages handled by the App.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import Footer, Static

from runtrue.device.advice import FLAG_ADVICE, FLAGGED_LIMIT
from runtrue.readings.numbers import (
    DEFAULT_VIB_UNIT,
    VIB_G_PK,
    next_vib_unit,
    phase_text,
    sig3,
    vib_number,
    vib_text,
    vib_value,
)
from runtrue.tui.format import PHASE_NOTE, bar, time_left_text, vib_unit_of
from runtrue.tui.method import PHASE_NOT_USED_NOTE
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.settings import save_setting
from runtrue.tui.widgets.polar import PolarData, PolarPlot

NO_REVS_S = 3.0  # say so when no revolution came for this long
STEADY_LIMIT_S = 30.0  # waiting longer than this for steady readings: offer take anyway / average longer (our choice)
#: A reading is noisy when its 95 % radius exceeds this fraction of its 1x amplitude; a noisy
#: reading is taken twice and the two must agree within their scatter (our choice).
NOISY_FRACTION = 0.10
LONGER_FACTOR = 2  # "average longer" takes this many times the usual revolutions
NAME_COLUMN = 14  # pickup name column of the live table; a longer name gets a line of its own
REFRESH_S = 0.25  # redraw period: a few times a second is enough, and kind to a Pi over SSH


def channel_rows(reading: Any, amplitude_only: bool = False, unit: str = DEFAULT_VIB_UNIT,
                 labels: list[str] | None = None) -> list[str]:
    """One line per pickup: 1x in the display unit and its phase, 2x in the same unit, overall
    acceleration (g rms, all frequencies).  With ``amplitude_only`` (four-run method) the phase
    is not shown: it is not used."""
    rows = [f"1x and 2x in {unit}; overall in g rms",
            f"{'pickup':<{NAME_COLUMN}} {'1x':>7} {'phase':>5} {'2x':>7} {'overall':>7}"]
    if reading is None:
        rows.append("(no revolutions yet)")
        return rows
    for i, ch in enumerate(reading.channels):
        name = labels[i] if labels and i < len(labels) else f"pickup {i + 1}"
        if len(name) > NAME_COLUMN:  # a long name on its own line, its numbers under it: nothing cut
            rows.append(name)
            name = ""
        phase = f"{'-':>5}" if amplitude_only else f"{phase_text(ch.phase_deg):>5}"
        rows.append(
            f"{name:<{NAME_COLUMN}} {vib_number(ch.amp_g, reading.speed_rpm, unit):>7} {phase} "
            f"{vib_number(abs(ch.h2), reading.speed_rpm, unit, order=2):>7} {sig3(ch.rms_g):>7}"
        )
    return rows


def is_noisy(reading: Any) -> bool:
    """True when a reading's 95 % radius is more than NOISY_FRACTION of its 1x on any pickup."""
    for ch in getattr(reading, "channels", []):
        amp, conf = abs(ch.mean), float(getattr(ch, "confidence_g", 0.0) or 0.0)
        if amp > 0 and math.isfinite(conf) and conf > NOISY_FRACTION * amp:
            return True
    return False


def repeat_verdict(first: Any, second: Any) -> tuple[bool, str] | None:
    """Do two readings of the same state agree?  Each pickup's 1x vectors must lie within the
    combined 95 % radii of each other (independent readings: radii add in quadrature).  None when
    there is no first reading to compare with."""
    if first is None or second is None:
        return None
    for i, (a, b) in enumerate(zip(first.channels, second.channels), start=1):
        ca = float(getattr(a, "confidence_g", 0.0) or 0.0)
        cb = float(getattr(b, "confidence_g", 0.0) or 0.0)
        allowed = math.hypot(ca, cb)
        if abs(a.mean - b.mean) > allowed:
            return False, (f"Pickup {i}: the repeat differs by {abs(a.mean - b.mean) / max(abs(a.mean), 1e-12):.0%} "
                           "of the 1x, more than the readings' scatter: the machine is not repeating.")
    return True, "The repeat agrees with the first reading."


def amplitude_lines(earlier: list[tuple[str, list[float]]], now: float | None, channel: int,
                    speed_rpm: float = math.nan, unit: str = DEFAULT_VIB_UNIT, name: str = "") -> list[str]:
    """The four-run view in place of the polar plot: each earlier run's 1x amplitude on one
    pickup as a bar, and the reading now, all on one scale."""
    amps = [(label, a[channel]) for label, a in earlier if channel < len(a)]
    if now is not None and math.isfinite(now):
        amps.append(("now", now))
    top = max((a for _, a in amps), default=0.0)
    lines = [f"1x, {name or f'pickup {channel + 1}'}", f"({unit}; phase not used)"]
    for label, a in amps:
        frac = a / top if top > 0 else 0.0
        lines.append(f"{label:<3} {bar(frac, 12)} {vib_number(a, speed_rpm, unit)}")
    if not amps:
        lines.append("(no runs yet)")
    return lines


class LiveScreen(StepScreen):
    """Shows the meter live; dismisses with the taken ``Reading`` (or None when backed out)."""

    STEP = "5 Reading"
    BINDINGS = [
        # short labels so every key fits the bottom line at 80 columns; the line above the
        # bottom line says them in full (r: a reading when steady; Space: now)
        Binding("r", "auto", "Reading"),
        Binding("space", "take", "Now"),
        Binding("l", "longer", "Longer"),
        Binding("c", "channel", "Pickup"),
        Binding("u", "vib_unit", "Unit"),
        Binding("d", "app.push_screen('diagnosis')", "Diagnose"),
        Binding("escape", "back", "Back"),
        Binding("f1", "app.help", "Help"),
    ]

    def __init__(self, purpose: str = "", *, marks: list[list[tuple[str, complex]]] | None = None,
                 auto: bool = False, can_take: bool = True, amplitude_only: bool = False,
                 earlier: list[tuple[str, list[float]]] | None = None) -> None:
        super().__init__()
        self.amplitude_only = amplitude_only  # four-run method: amplitudes only, phase not used
        self.earlier = earlier or []  # four-run: earlier runs' amplitudes, (label, per pickup)
        self.purpose = purpose
        self.can_take = can_take  # False: just looking (checking the sensors before a job)
        self.marks = marks or []
        self.channel = 0
        self._auto = auto
        self._first: Any = None  # a noisy reading, kept while its repeat is taken
        self._repeat_note = ""

    def _title_text(self) -> str:
        return f" runtrue | {self.STEP}" + (f": {self.purpose}" if self.purpose else "")

    def compose_body(self) -> Iterable[Widget]:
        yield Static("", id="live-status", markup=False)
        with Horizontal(id="live-body"):
            with Vertical(id="live-left"):
                yield Static("", id="live-table", markup=False)
                yield Static("", id="live-notes", classes="note", markup=False)
            yield PolarPlot(id="live-polar")
            yield Static("", id="live-amps", markup=False)
        yield Static("", id="live-progress", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        s = self.session
        self._shown_at = s.live.clock()
        if s.link is not None:
            s.link.stream(True)
        self.query_one(PolarPlot).display = not self.amplitude_only
        self.query_one(Footer).compact = True  # nine keys: fits 80 columns with single spacing
        self.query_one("#live-amps", Static).display = self.amplitude_only
        if self._auto:
            self.action_auto()
        self._redraw()
        self.set_interval(REFRESH_S, self._tick)

    def on_unmount(self) -> None:
        s = self.session
        s.live.cancel()
        if s.link is not None:
            s.link.stream(False)

    def _tick(self) -> None:
        live = self.session.live
        if live.done is not None:
            reading, live.done = live.done, None
            verdict = repeat_verdict(self._first, reading)
            if verdict is None and is_noisy(reading):  # noisy: take it once more and compare
                self._first = reading
                self._repeat_note = "Noisy machine: taking the reading a second time to check it repeats."
                live.start_taking(self.session.revs_per_reading)
                self._redraw()
                return
            if verdict is not None and not verdict[0]:
                self._first = reading  # the latest becomes the one to compare with
                self._repeat_note = verdict[1] + " Taking it again; Esc to stop and check the machine."
                live.start_taking(self.session.revs_per_reading)
                self._redraw()
                return
            self.dismiss(reading)
            return
        self._redraw()

    def _labels(self) -> list[str]:
        m = self.session.machine
        return [m.pickup_name(i) for i in range(m.n_pickups)] if m is not None else []

    def _redraw(self) -> None:
        s = self.session
        live = s.live
        reading = live.window_reading()
        speed = live.speed_rpm()
        st = live.steadiness()
        quiet_since = max(live.last_rev_at, self._shown_at)
        silent = s.link is not None and live.clock() - quiet_since > NO_REVS_S
        if silent:  # never show old numbers as if they were live
            reading, speed = None, math.nan
        speed_txt = f"{speed:7.1f} rpm" if math.isfinite(speed) else "  --- rpm"
        steady_txt = "NO SIGNAL" if silent else "STEADY" if st.steady else "settling"
        self.query_one("#live-status", Static).update(
            f"{speed_txt}  steadiness {bar(st.score, 8)} {steady_txt:<8}  revs {live.total_revs}"
            f"  flagged {live.unusable_revs}  lost {live.lost_frames}"
        )
        unit = vib_unit_of(self.app)
        self.query_one("#live-table", Static).update(
            "\n".join(channel_rows(reading, self.amplitude_only, unit, self._labels()))
        )
        notes: list[str] = []
        m = s.machine
        rated = getattr(m, "rated_speed_rpm", None) if m is not None else None
        if rated is not None and math.isfinite(speed) and speed > rated:
            notes.insert(0, f"ABOVE THE RATED SPEED ({speed:.0f} > {rated:g} rpm): stop the machine now.")
        if reading is not None:
            conf = "  ".join(vib_text(ch.confidence_g, reading.speed_rpm, unit) for ch in reading.channels)
            notes.append(f"95 % radius ({reading.n_revs} revs): {conf}")
        if self.amplitude_only:
            notes.append(PHASE_NOT_USED_NOTE + ".")
        else:
            notes.append(PHASE_NOTE + ". u: vibration unit.")
        if self._repeat_note:
            notes.append(self._repeat_note)
        if not st.steady and not silent:
            notes.append(f"Not steady yet: {st.reason}.")
        hum = getattr(reading, "warnings", ()) if reading is not None else ()
        if hum:  # the first one, without the revolution count; the others are alike
            first = hum[0].split(" (")[0]
            notes.append(f"Hum: {first}" + (f" (+{len(hum) - 1} more)." if len(hum) > 1 else "."))
        if live.waiting_for_steady and live.clock() - live.started_at > STEADY_LIMIT_S:
            notes.insert(0, f"Not steady after {STEADY_LIMIT_S:.0f} s: Space takes it anyway, l averages longer "
                            f"({LONGER_FACTOR * self.session.revs_per_reading} revolutions).")
        if s.link is not None and s.link.connected and silent:
            notes.append(
                "No revolutions: is the machine running, and does the reference sensor see its mark "
                "once per revolution (sensor LED, gap, mark contrast)?"
            )

        if live.busy and live.refused_while_taking >= FLAGGED_LIMIT:
            names = [f.replace("_", " ").lower() for f in live.last_flags]
            advice = "; ".join(f"{n}: {FLAG_ADVICE[n]}" for n in names if n in FLAG_ADVICE)
            notes.append(
                f"{live.refused_while_taking} revolutions refused while taking this reading. Esc, stop the "
                "machine and check: "
                + (advice or "a weight that makes the sensor clip, a loose reference sensor or mark") + "."
            )
        elif live.last_flags:
            names = [f.replace("_", " ").lower() for f in live.last_flags]
            notes.append(f"Last revolution left out: {', '.join(names)}.")
            notes += [f"  {n}: {FLAG_ADVICE[n]}." for n in names if n in FLAG_ADVICE][:2]
        if "LOST" in s.meter_state:
            notes.append("METER LOST: check the USB cable. The job is kept; it reconnects by itself.")
        self.query_one("#live-notes", Static).update("\n".join(notes))
        n_ch = live.n_channels()
        if n_ch and self.amplitude_only:
            self.channel %= n_ch
            now = reading.channels[self.channel].amp_g if reading is not None else None
            names = self._labels()
            self.query_one("#live-amps", Static).update("\n".join(amplitude_lines(
                self.earlier, now, self.channel, live.speed_rpm(), unit,
                names[self.channel] if self.channel < len(names) else "")))
        elif n_ch:
            self.channel %= n_ch
            ch_marks = self.marks[self.channel] if self.channel < len(self.marks) else []
            mean = reading.channels[self.channel].mean if reading is not None else None
            k = vib_value(1.0, speed, unit) if math.isfinite(speed) else math.nan  # g pk -> display unit
            if not math.isfinite(k):
                k, shown = 1.0, VIB_G_PK
            else:
                shown = unit
            names = self._labels()
            self.query_one(PolarPlot).show(
                PolarData([v * k for v in live.scatter(self.channel)], mean * k if mean is not None else None,
                          [(letter, v * k) for letter, v in ch_marks], unit=shown,
                          label=names[self.channel] if self.channel < len(names) else f"pickup {self.channel + 1}")
            )
        self.query_one("#live-progress", Static).update(self._progress_text())

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action in ("take", "auto"):
            return self.can_take
        return True

    def _progress_text(self) -> str:
        live = self.session.live
        if not self.can_take:
            return "Looking only: readings are taken from the balancing runs screen. Esc: back."
        if live.waiting_for_steady:
            return "Waiting for steady readings, then the reading is taken by itself (Esc: back)."
        if live.collecting:
            n, target, left = live.progress()
            return f"Taking reading {bar(n / target, 20)} {n}/{target} revs  time left {time_left_text(left)}"
        return f"r: take a reading of {self.session.revs_per_reading} revolutions when steady; Space: now."

    def action_take(self) -> None:
        if not self._can_take():
            return
        self.session.live.start_taking(self.session.revs_per_reading)
        self._redraw()

    def action_longer(self) -> None:
        """Average more revolutions (a slow or unsteady machine), without waiting for steady."""
        if not self._can_take():
            return
        self.session.live.start_taking(LONGER_FACTOR * self.session.revs_per_reading)
        self._redraw()

    def action_auto(self) -> None:
        if not self._can_take():
            return
        self.session.live.start_taking(self.session.revs_per_reading, when_steady=True)
        self._redraw()

    def _can_take(self) -> bool:
        s = self.session
        if s.link is None or not s.link.connected:
            self.notify("No meter: wait for it to reconnect (see the title bar).", severity="warning")
            return False
        return True

    def action_vib_unit(self) -> None:
        """Show vibration as mm/s rms, mm/s pk or g pk (display only: the job stores g pk)."""
        unit = next_vib_unit(vib_unit_of(self.app))
        self.app.vib_unit = unit  # type: ignore[attr-defined]
        problem = save_setting(getattr(self.app, "settings_path", None), "vib_unit", unit)
        if problem:
            self.notify(f"Shown in {unit} now, but not kept for next time: {problem}", title="Unit",
                        severity="warning")
        self._redraw()

    def action_channel(self) -> None:
        self.channel += 1
        self._redraw()

    def action_back(self) -> None:
        self.dismiss(None)

    def meter_event(self, message: object) -> None:
        pass  # redrawn by the timer
