"""Help (F1): the conventions every number on screen follows, the steps of a job, the
cautions, and the keys.  Text only; Esc closes it."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from runtrue.jobs import ANGLE_CONVENTION, CAUTIONS

STEPS = (
    "1 Connect: the meter, a simulated machine, or manual entry of readings from another instrument.",
    "2 Machine: describe it once (mass, speed, rotation, planes, positions, stock, grade, pickups).",
    "3 Balancing runs: reference run as found; a trial weight per plane; the correction; trim runs "
    "until the residual unbalance is within the grade. A saved machine with coefficients skips the "
    "trials; weights an earlier job left on are offered to keep, combine, move (the correction may "
    "refit them at another position) or mark as taken off.",
    "No reference mark (F7 on the machine screen, one plane only): the amplitude-only four-run "
    "method - chalk a 0 deg mark, a reference run, the trial weight moved to three angles, the "
    "correction; only the 1x amplitude is used and the residual is an estimate without phase.",
    "Two planes: the runs screen splits the correction into its static part (the resultant, half "
    "in each plane) and its couple (+ in plane 1, - in plane 2): mostly static, mostly couple, or both.",
    "4 Fitting: the dial shows where each weight goes, positions numbered, drawn from the end you "
    "stand at for that plane; Space ticks an item off and moves down; r starts the run.",
    "Diagnosis (d on the reading screen, F10 on the machine screen): before weights go on, is it "
    "unbalance? Severity zone per pickup, spectrum, the verdict with what to check; c records a "
    "coast-down for resonances. The job keeps each diagnosis: the report shows before and after.",
    "5 Reading: the 1x live; r takes the reading once steady (Space: now); u changes the vibration unit (kept for next time); "
    "d diagnoses.",
    "6 Result: before and after, residual against permissible, the report and the export.",
)


#: Help for the screen F1 was pressed on, shown first.  Mounting advice is common practice (see
#: hardware/MOUNTING.md for the reasons).
STEP_HELP: dict[str, tuple[str, ...]] = {
    "ConnectScreen": (
        "MOUNTING THE PICKUP (before the self-test)",
        "- On the bearing housing, as close to the bearing as you can; radial (at right angles to the shaft), "
        "usually horizontal. Two planes: one pickup at each bearing, same direction.",
        "- Magnet on a flat, clean, bare steel spot (rock it: it must not move), or a stud. Never on a guard or cover.",
        "- Mark the spot: the same spot and direction for every run and every later job on this machine.",
        "- Tie the cable down a short way from the pickup so it cannot whip.",
        "",
        "THE REFERENCE TAPE AND SENSOR",
        "- One piece of reflective tape on a clean, dull part of the shaft, hub or coupling that you can see "
        "with the machine guarded; nothing else shiny on that track (mask bolt heads, paint).",
        "- Aim the sensor at the tape from the distance its maker gives, a few degrees off square to avoid glare; "
        "clamp its stand to something that does not vibrate with the rotor.",
        "- Turn the rotor by hand (locked out): the sensor's light comes on at the tape and only there.",
        "- Then run the machine and press t: the check says whether the tape is seen cleanly and each pickup's "
        "signal is usable, and what to change if not.",
    ),
    "MachineScreen": (
        "DESCRIBING THE MACHINE",
        "- Running speed: the speed you balance at; rated speed: the maker's maximum (each run is checked "
        "against it). Rotation cw/ccw as seen from the drive end.",
        "- Each plane: its name, the end you stand at to fit weights there (drive or far: the dial is drawn "
        "from there), the radius where weights sit and the positions (a count, 'any', or a list of angles; "
        "position 1 is at the 'first' angle from the mark, numbered on against rotation).",
        "- Stock: the weights you have (g x count) or strip (g per mm). F7: no reference tape (four-run method).",
        "- F10 Diagnose, before weights go on: is it unbalance? A loose foot, misalignment, a bearing or a "
        "resonance is not cured by balancing weights.",
    ),
    "RunsScreen": (
        "BALANCING RUNS",
        "- The first line says what to do now. f shows where on the dial; r takes the reading.",
        "- After each trial run the change is judged at once (percent and degrees); TOO SMALL says what to fit instead.",
        "- A weight pulling more than the force limit is shown with its force and must be confirmed.",
    ),
    "FittingScreen": (
        "FITTING WEIGHTS",
        "- Lock out first. Angles are counted from the mark against rotation; the dial is drawn as seen from the "
        "end you stand at (named at the bottom), positions numbered.",
        "- Space ticks an item off and moves down; r starts the run when all are ticked (it asks if not).",
        "- Secure each weight for the force shown: a loose weight is a projectile.",
    ),
    "LiveScreen": (
        "TAKING A READING",
        "- r takes the reading once it is steady; Space takes it now; l averages twice as long (a slow or "
        "unsteady machine). After 30 s without steady readings the screen offers both.",
        "- A noisy reading is taken twice: the two must agree within their scatter.",
        "- Flagged revolutions are left out; each flag shows what to check (tape, sensor distance, belts).",
        "- NO SIGNAL: no revolutions are arriving - the numbers are blanked, not frozen.",
        "- d Diagnose, before weights go on: is it unbalance? Zones, spectrum and verdict; kept with the job.",
    ),
    "ResultScreen": (
        "RESULT AND REPORT",
        "- h writes the report (HTML) beside the job database; open it in a web browser to read or print it "
        "(Ctrl+P, or save as PDF to send). e writes the runs as CSV and JSON for a spreadsheet.",
        "- The report lists what is on the rotor at the end, with a sketch per plane: keep it with the machine.",
        "- i: technician, site and notes for the report. The report shows the job's diagnoses (first = before, "
        "last = after).",
    ),
}


def help_text(topic: str = "") -> str:
    lines = list(STEP_HELP.get(topic, ()))
    if lines:
        lines.append("")
    lines += ["CONVENTIONS", f"- {ANGLE_CONVENTION}",
             "- Rotation (cw/ccw) is as seen from the drive end; each plane's dial is drawn from the end "
             "you stand at for it (drive or far, on the machine form).",
             "- Vibration is the 1x in mm/s rms (u in the reading screen: mm/s pk, g pk); acceleration is "
             "always written g pk or g rms (standard gravity), grams are only ever a mass.",
             "- Polar plots: 0 deg at the top, lag increasing clockwise.",
             "- Plots and the dial are drawn with braille dots, or with plain characters on the Linux "
             "console (and with --plain or RUNTRUE_PLAIN=1); F9 switches at any time, e.g. when the "
             "plots show as boxes.",
             "- Masses, radii and unbalance show in g, mm, g·mm, or with F8 on the machine screen in "
             "oz, in, oz·in (display only: the machine form, the job and the report stay metric). "
             "Forces are in N (with lbf in imperial).",
             "", "STEPS"]
    lines += [f"- {s}" for s in STEPS]
    lines += ["", "SAFETY"] + [f"- {c}" for c in CAUTIONS]
    lines += ["", "KEYS", "- Each screen lists its keys in the bottom line; Esc or F1 closes this help.",
              "- Ctrl+Q quits at any time: every reading is saved when taken, and an unfinished job "
              "is offered for resuming on the machine screen."]
    return "\n".join(lines)


class HelpScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "dismiss(None)", "Close"), Binding("f1", "dismiss(None)", "Close")]

    def compose(self) -> ComposeResult:
        stack = self.app.screen_stack
        below = stack[-1] if stack and stack[-1] is not self else (stack[-2] if len(stack) > 1 else None)
        with VerticalScroll(id="help-box"):
            yield Static(help_text(type(below).__name__ if below is not None else ""), markup=False)
