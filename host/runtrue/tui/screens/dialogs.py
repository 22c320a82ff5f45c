"""Small pop-ups: a reading typed in from another instrument, and choosing the trial weight."""

from __future__ import annotations

import math
from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static

from runtrue.balancing import BalancingError, convert_1x
from runtrue.jobs.model import RunReading
from runtrue.jobs.report import REPORT_FIELDS, position_number
from runtrue.readings.numbers import angle_text, force_text, local_time_text, mass_text
from runtrue.readings.units import lag_deg, phasor, wrap_deg
from runtrue.tui.format import DEG


def parse_float(text: str, what: str, *, minimum: float | None = 0.0) -> float:
    t = text.strip().replace(",", ".")
    try:
        v = float(t)
    except ValueError:
        raise ValueError(f"{what}: write a number (got {t!r})") from None
    if v != v or v in (float("inf"), float("-inf")):
        raise ValueError(f"{what}: write a finite number")
    if minimum is not None and v < minimum:
        raise ValueError(f"{what} must be at least {minimum:g}")
    return v


def parse_vib_unit(text: str) -> tuple[str, float]:
    """``"mm/s rms"`` -> (``"mm/s"``, sqrt 2): the unit and the factor that turns the typed value
    into a peak value (sinusoid: peak = rms x sqrt 2 = pk-pk / 2).  No detector given: peak."""
    parts = text.strip().lower().split()
    if not parts:
        return "g", 1.0
    factors = {"pk": 1.0, "peak": 1.0, "rms": math.sqrt(2.0), "pk-pk": 0.5, "pp": 0.5, "p-p": 0.5}
    if len(parts) == 2 and parts[1] in factors:
        return parts[0], factors[parts[1]]
    if len(parts) == 1:
        return parts[0], 1.0
    raise ValueError(f"unit {text!r}: write it like mm/s rms, mm/s pk, g pk or um pk-pk")


class _Form(ModalScreen[Any]):
    """A titled column of labelled one-line inputs; Enter submits, Esc cancels."""

    BINDINGS = [Binding("escape", "dismiss(None)", "Cancel"), Binding("enter", "submit", "OK", priority=True)]
    TITLE_TEXT = ""
    NOTE = ""

    def fields(self) -> list[tuple[str, str, str]]:  # (id, label, initial value)
        return []

    def compose(self) -> ComposeResult:
        with Vertical(classes="form-box"):
            yield Static(self.TITLE_TEXT, classes="pane-title", markup=False)
            for fid, label, value in self.fields():
                with Horizontal(classes="field"):
                    yield Label(label, classes="field-label")
                    yield Input(value=value, id=fid, compact=True)
            yield Static(self.NOTE + "\nEnter: OK   Esc: cancel", classes="note", markup=False)

    def value(self, fid: str) -> str:
        return self.query_one(f"#{fid}", Input).value

    def action_submit(self) -> None:
        try:
            result = self.build()
        except ValueError as exc:
            self.notify(str(exc), severity="error", title="Check the numbers")
            return
        self.dismiss(result)

    def build(self) -> Any:
        raise NotImplementedError


class ManualReadingForm(_Form):
    """Readings read off another instrument: 1x amplitude and phase lag per pickup, and speed."""

    TITLE_TEXT = "Type the reading (from another instrument)"
    NOTE = (
        f"Amplitude: the 1x in the unit given, with its detector: mm/s rms, mm/s pk, g pk, "
        f"in/s pk, um pk-pk, mil pk-pk (no detector: peak). Phase: lag after the reference mark, "
        f"0-360{DEG}, as your instrument shows it with the same mark every run."
    )

    NOTE_AMPLITUDE_ONLY = (
        "Amplitude: the 1x in the unit given, with its detector: mm/s rms, mm/s pk, g pk, "
        "in/s pk, um pk-pk, mil pk-pk (no detector: peak). No phase: the amplitude-only (four-run) "
        "method does not use it."
    )

    def __init__(self, labels: list[str], speed_rpm: float, unit: str = "g", *, amplitude_only: bool = False) -> None:
        super().__init__()
        self.amplitude_only = amplitude_only  # four-run method: amplitudes only, no phase asked
        if amplitude_only:
            self.TITLE_TEXT = "Type the 1x amplitudes (from another instrument)"
            self.NOTE = self.NOTE_AMPLITUDE_ONLY
        self.labels = labels
        self.speed_rpm = speed_rpm
        self.unit = "g pk" if unit == "g" else unit  # an acceleration always shows its detector
        self.chosen_unit = self.unit

    def fields(self) -> list[tuple[str, str, str]]:
        out = [("speed", "Speed rpm", f"{self.speed_rpm:g}"), ("unit", "Unit", self.unit)]
        for i, label in enumerate(self.labels):
            out.append((f"amp{i}", f"{i + 1} {label[:10]} amp", ""))
            if not self.amplitude_only:
                out.append((f"phase{i}", f"{i + 1} {label[:10]} phase", ""))
        return out

    def build(self) -> Any:
        speed = parse_float(self.value("speed"), "speed (rpm)", minimum=1.0)
        amps = [parse_float(self.value(f"amp{i}"), f"pickup {i + 1} amplitude") for i in range(len(self.labels))]
        typed_unit = self.value("unit").strip() or "g pk"
        unit, to_peak = parse_vib_unit(typed_unit)
        amps = [a * to_peak for a in amps]

        if self.amplitude_only:
            self.chosen_unit = typed_unit
            try:
                amps_g = [abs(convert_1x(complex(a, 0.0), unit, "g", speed)) for a in amps]
            except BalancingError as exc:
                raise ValueError(str(exc)) from None
            return RunReading.manual(amps_g, None, speed)
        phases = [
            wrap_deg(parse_float(self.value(f"phase{i}"), f"pickup {i + 1} phase", minimum=None))
            for i in range(len(self.labels))
        ]
        self.chosen_unit = typed_unit
        try:
            in_g = [convert_1x(phasor(a, p), unit, "g", speed) for a, p in zip(amps, phases)]
        except BalancingError as exc:
            raise ValueError(str(exc)) from None
        return RunReading.manual(
            [abs(z) for z in in_g], [lag_deg(z) for z in in_g], speed
        )


class TrialWeightForm(_Form):
    """Choose the trial weight's mass and angle (instead of the suggestion)."""

    TITLE_TEXT = "Trial weight"
    NOTE = "Angle: degrees from the reference mark, against rotation."

    def __init__(self, mass_g: float, angle_deg: float, *, chalk: bool = False) -> None:
        super().__init__()
        if chalk:  # four-run: the first of the three angles, from the chalk mark
            self.NOTE = "Angle: the first trial angle, degrees from the chalk mark, against rotation."
        self.mass_g = mass_g
        self.angle_deg = angle_deg

    def fields(self) -> list[tuple[str, str, str]]:
        return [("mass", "Mass g", f"{self.mass_g:g}"), ("angle", f"Angle {DEG}", f"{self.angle_deg:g}")]

    def build(self) -> tuple[float, float]:
        mass = parse_float(self.value("mass"), "trial mass (g)")
        if mass <= 0:
            raise ValueError("trial mass must be more than 0 g")
        return mass, wrap_deg(parse_float(self.value("angle"), "angle", minimum=None))


class ConfirmDialog(ModalScreen[bool]):
    """A yes/no question that matters for safety: the facts, then y to go on or n/Esc to go back."""

    BINDINGS = [
        Binding("y", "answer(True)", "Yes, go on"),
        Binding("n", "answer(False)", "No"),
        Binding("escape", "answer(False)", "No"),
    ]

    def __init__(self, title: str, lines: list[str], yes: str = "y: yes, go on", no: str = "n / Esc: no, go back") -> None:
        super().__init__()
        self.title_text = title
        self.lines = lines
        self.yes = yes
        self.no = no

    def compose(self) -> ComposeResult:
        with Vertical(classes="form-box confirm-box"):
            yield Static(self.title_text, classes="pane-title caution", markup=False)
            yield Static("\n".join(self.lines), classes="confirm-text", markup=False)
            yield Static(f"{self.yes}    {self.no}", classes="note", markup=False)

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)


def force_confirm_lines(checks: list[Any], limit_text: str, speed_rpm: float) -> list[str]:
    """One line per weight over the force limit (force and multiple of the limit), then the basis."""
    out = []
    for c in checks:
        w = c.weight
        out.append(
            f"{mass_text(w.mass_g)} at r {w.radius_mm:g} mm pulls {force_text(c.force_n)} at {speed_rpm:g} rpm: "
            f"{c.multiple:.2f} x the limit."
        )
    out.append(limit_text)
    out.append("Go on only if the weight and its fixing are rated for this force.")
    return out


def weights_left_lines(machine: Any, job_id: int, when: str, weights: list[Any]) -> list[str]:
    """What the last job left on the rotor, one weight a line, with plane name and position."""
    out = [f"Job {job_id} ({local_time_text(when)[:16]}) left these on the rotor:"]
    for w in weights:
        pos = position_number(machine, w.plane, w.angle_deg) if 1 <= w.plane <= machine.n_planes else None
        where = f"position {pos} ({angle_text(w.angle_deg)})" if pos is not None else angle_text(w.angle_deg)
        name = machine.plane_name(w.plane) if 1 <= w.plane <= machine.n_planes else f"plane {w.plane}"
        out.append(f"  {name}: {mass_text(w.mass_g)} at {where}")
    out.append("Look at the rotor: are they still there?")
    return out


class WeightsLeftDialog(ModalScreen[str | None]):
    """At the start of a job: the weights the last job left on; still on, combine, may be moved,
    or taken off."""

    BINDINGS = [
        Binding("k", "answer('keep')", "Still on"),
        Binding("c", "answer('combine')", "Still on, combine"),
        Binding("m", "answer('move')", "Still on, may move"),
        Binding("t", "answer('off')", "Taken off"),
        Binding("escape", "answer(None)", "Back"),
    ]

    def __init__(self, lines: list[str], can_combine: bool = True) -> None:
        super().__init__()
        self.lines = lines
        self.can_combine = can_combine

    def compose(self) -> ComposeResult:
        keys = "k: still on, leave them    t: taken off (nothing on now)\n"
        if self.can_combine:
            keys += ("c: still on, replace them with the correction\n"
                     "m: still on, the correction may move them to another position\n")
        keys += "Esc: back"
        with Vertical(classes="form-box confirm-box"):
            yield Static("Weights already on the rotor?", classes="pane-title", markup=False)
            yield Static("\n".join(self.lines), classes="confirm-text", markup=False)
            yield Static(keys, classes="note", markup=False)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "answer" and parameters and parameters[0] in ("combine", "move") and not self.can_combine:
            return False
        return True

    def action_answer(self, choice: str | None) -> None:
        self.dismiss(choice)


class ReportDetailsForm(_Form):
    """Technician, site, asset tag, work order and notes for the report."""

    TITLE_TEXT = "Report details"
    NOTE = "Printed at the top of the report. Leave blank what does not apply."

    def __init__(self, values: dict[str, str]) -> None:
        super().__init__()
        self.values = values

    def fields(self) -> list[tuple[str, str, str]]:
        return [(key, label, self.values.get(key, "")) for key, label in REPORT_FIELDS]

    def build(self) -> dict[str, str]:
        return {key: self.value(key) for key, _ in REPORT_FIELDS}
