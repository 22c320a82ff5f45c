"""Help (F1): the conventions every number on screen follows, the steps of a job, the
cautions, and the keys.  Text only; Esc closes it."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

STEPS = (
    "1 Connect: the meter, a simulated machine, or manual entry of readings from another instrument.",
    "2 Machine: describe it once (mass, speed, rotation, planes, positions, stock, grade, pickups).",
    "3 Balancing runs: reference run as found; a trial weight per plane; the correction; trim runs "
    "until the residual unbalance is within the grade. A saved machine with coefficients skips the "
    "trials; weights an earlier job left on are offered to keep, combine or mark as taken off.",
    "No reference mark (F7 on the machine screen, one plane only): the amplitude-only four-run "
    "method - chalk a 0 deg mark, a reference run, the trial weight moved to three angles, the "
    "correction; only the 1x amplitude is used and the residual is an estimate without phase.",
    "Two planes: the runs screen splits the correction into its static part (the resultant, half "
    "in each plane) and its couple (+ in plane 1, - in plane 2): mostly static, mostly couple, or both.",
    "4 Fitting: the dial shows where each weight goes, positions numbered, drawn from the end you "
    "stand at for that plane; Space ticks an item off and moves down; r starts the run.",
    "5 Reading: the 1x live; r takes the reading once steady (Space: now); u changes the vibration unit.",
    "6 Result: before and after, residual against permissible, the report and the export.",
)


def help_text() -> str:
    from runtrue.jobs import ANGLE_CONVENTION, CAUTIONS

    lines = ["CONVENTIONS", f"- {ANGLE_CONVENTION}",
             "- Rotation (cw/ccw) is as seen from the drive end; each plane's dial is drawn from the end "
             "you stand at for it (drive or far, on the machine form).",
             "- Vibration is the 1x in mm/s rms (u in the reading screen: mm/s pk, g pk); acceleration is "
             "always written g pk or g rms (standard gravity), grams are only ever a mass.",
             "- Polar plots: 0 deg at the top, lag increasing clockwise.",
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
        with VerticalScroll(id="help-box"):
            yield Static(help_text(), markup=False)
