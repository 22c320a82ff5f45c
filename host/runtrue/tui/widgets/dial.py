"""The fitting dial: the rotor face with the reference mark, the direction of rotation, the
available positions and where each weight goes.

Convention: weight angles are measured from the reference mark AGAINST the direction of
rotation (DEVELOPERS.md).  The dial is drawn as the fitter sees the plane from the end they stand
at (``DialData.rotation`` is the rotation seen from there: the machine's rotation from the drive
end, reversed for the far end), so a weight at theta is drawn theta away from the mark in the
direction opposite to the arrow.  Positions are numbered on the dial (inside the ring).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from rich.text import Text
from textual.widget import Widget

from runtrue.readings.units import wrap_deg
from runtrue.tui.widgets.braille import BrailleCanvas, new_canvas
from runtrue.tui.widgets.polar import canvas_text

ARROW_CW = "\N{CLOCKWISE OPEN CIRCLE ARROW}"  # the rotor turns this way
ARROW_CCW = "\N{ANTICLOCKWISE OPEN CIRCLE ARROW}"


@dataclass
class DialData:
    rotation: str = "cw"  # as seen by the user: "cw" or "ccw"
    positions_deg: list[float] = field(default_factory=list)  # fixed holes/slots (may be empty)
    placements: list[tuple[str, float, bool]] = field(default_factory=list)  # (label, angle, fitted)
    mark_label: str = "MARK"  # "CHALK" for the amplitude-only method (a chalk mark is 0 deg)
    seen_from: str = "from drive end"  # where the fitter stands: "from drive end" or "from far end"


def screen_angle_deg(angle_deg: float, rotation: str) -> float:
    """Clockwise-from-top screen angle of a weight at ``angle_deg`` against rotation."""
    return wrap_deg(-angle_deg if rotation == "cw" else angle_deg)


def draw_dial(data: DialData, width_chars: int, height_chars: int) -> BrailleCanvas:
    cv = new_canvas(width_chars, height_chars)
    cx = (cv.width_dots - 1) / 2
    cy = (cv.height_dots - 1) / 2
    r = max(3.0, min(cx, cy) - 4)
    cv.circle(cx, cy, r, "grey62")
    cv.circle(cx, cy, 1.5, "grey50")

    def xy(angle_deg: float, rr: float) -> tuple[float, float]:
        a = math.radians(screen_angle_deg(angle_deg, data.rotation))
        return cx + rr * math.sin(a), cy - rr * math.cos(a)

    n_pos = len(data.positions_deg)
    every = max(1, math.ceil(n_pos / 12))  # number at most about 12 positions, so the digits stay apart
    for n, p in enumerate(data.positions_deg, start=1):
        x, y = xy(p, r)
        for dx in (-1, 0, 1):
            for dy in (-1, 0, 1):
                cv.set(x + dx, y + dy, "grey70")
        if (n - 1) % every == 0:
            nx, ny = xy(p, r - 7)
            text = str(n)
            cv.label(int(nx // 2) - (len(text) - 1) // 2, int(ny // 4), text, "cyan")
    for label, angle, fitted in data.placements:
        x, y = xy(angle, r * 0.8)
        cv.line(cx, cy, x, y, "green" if fitted else "bold yellow")
        lx, ly = xy(angle, r + 3)
        cv.label(int(lx // 2), int(ly // 4), label[:1], "bold green" if fitted else "bold yellow reverse")
    # reference mark at the top, outside the ring
    mid = int(cx // 2)
    cv.label(mid + 1 - len(data.mark_label) // 2, 0, data.mark_label, "bold red")
    cv.line(cx, 4, cx, cy - r + 1, "red")
    arrow = ARROW_CW if data.rotation == "cw" else ARROW_CCW
    cv.label(0, 0, f"{arrow} turns", "bold cyan")
    cv.label(0, cv.height_chars - 1, data.seen_from, "dim")
    return cv


class FittingDial(Widget):
    DEFAULT_CSS = """
    FittingDial { width: 1fr; height: 1fr; min-height: 8; }
    """

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self._data = DialData()

    def show(self, data: DialData) -> None:
        self._data = data
        self.refresh()

    def render(self) -> Text:
        w, h = self.size.width, self.size.height
        if w < 8 or h < 4:
            return Text("")
        return canvas_text(draw_dial(self._data, w, h))
