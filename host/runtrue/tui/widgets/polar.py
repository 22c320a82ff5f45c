"""Polar plot of 1x readings, drawn with braille dots (or plain characters, see braille.py).

Convention shown on the plot: phase lag in degrees after the reference mark, 0 deg at the top,
lag increasing clockwise; radius is the 1x amplitude.  Recent revolutions are faint dots, the
vector average is a line from the centre, and earlier readings (reference, trial) are letters.
On the plain canvas the revolutions are ``o`` and the tip of the average ``*``, so each kind of
mark has its own shape as well as its own colour.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, field

from rich.text import Text
from textual.widget import Widget

from runtrue.tui.widgets.braille import BrailleCanvas, new_canvas, nice_full_scale

CAPTION = "0\N{DEGREE SIGN} up, lag cw"


@dataclass
class PolarData:
    """What one polar plot shows (all vectors complex, amplitude in display units)."""

    scatter: list[complex] = field(default_factory=list)
    mean: complex | None = None
    marks: list[tuple[str, complex]] = field(default_factory=list)  # (letter, vector)
    unit: str = "mm/s rms"  # always with its detector: "mm/s rms", "mm/s pk", "g pk"
    label: str = ""  # the pickup's name


def _to_xy(v: complex, cx: float, cy: float, r_dots: float, full_scale: float) -> tuple[float, float]:
    amp, lag = abs(v), cmath.phase(v)  # lag in radians, from 0 at the top, clockwise
    rr = r_dots * min(amp / full_scale, 1.05)
    return cx + rr * math.sin(lag), cy - rr * math.cos(lag)


def draw_polar(data: PolarData, width_chars: int, height_chars: int) -> tuple[BrailleCanvas, float]:
    """Draw ``data`` on a new canvas; returns it and the full-scale amplitude of the outer ring."""
    cv = new_canvas(width_chars, height_chars)
    cx = (cv.width_dots - 1) / 2
    cy = (cv.height_dots - 1) / 2
    r = max(2.0, min(cx, cy) - 1)
    values = [abs(v) for v in data.scatter] + [abs(v) for _, v in data.marks]
    if data.mean is not None:
        values.append(abs(data.mean))
    fs = nice_full_scale(max(values, default=0.0) * 1.05)
    cv.circle(cx, cy, r, "grey50")
    cv.circle(cx, cy, r / 2, "grey37", dotted=True)
    for k in range(int(2 * r) + 1):  # dotted cross hairs
        if k % 3 == 0:
            cv.set(cx - r + k, cy, "grey37")
            cv.set(cx, cy - r + k, "grey37")
    for v in data.scatter:
        x, y = _to_xy(v, cx, cy, r, fs)
        cv.point(x, y, "cyan", "o")
    if data.mean is not None:
        x, y = _to_xy(data.mean, cx, cy, r, fs)
        cv.line(cx, cy, x, y, "bold yellow")
        cv.point(x, y, "bold yellow", "*")
    for letter, v in data.marks:
        x, y = _to_xy(v, cx, cy, r, fs)
        cv.label(int(x // 2), int(y // 4), letter[:1], "bold magenta")
    mid = cv.width_chars // 2
    cv.label(mid, 0, "0", "bold")
    cv.label(cv.width_chars - 3, cv.height_chars // 2, "90", "dim")
    cv.label(0, cv.height_chars // 2, "270", "dim")
    cv.label(mid - 1, cv.height_chars - 1, "180", "dim")
    if data.label:
        cv.label(0, 0, data.label[: max(0, mid - 1)], "bold")
    return cv, fs


def canvas_text(cv: BrailleCanvas) -> Text:
    text = Text(no_wrap=True, overflow="crop")
    for i, row in enumerate(cv.rows()):
        if i:
            text.append("\n")
        for ch, style in row:
            text.append(ch, style or None)
    return text


class PolarPlot(Widget):
    """A polar plot that redraws to whatever size it is given."""

    DEFAULT_CSS = """
    PolarPlot { width: 1fr; height: 1fr; min-height: 6; }
    """

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self._data = PolarData()

    def show(self, data: PolarData) -> None:
        self._data = data
        self.refresh()

    def render(self) -> Text:
        w, h = self.size.width, self.size.height
        if w < 6 or h < 3:
            return Text("")
        cv, fs = draw_polar(self._data, w, h - 1)
        text = canvas_text(cv)
        text.append(f"\n{CAPTION}, ring {fs:g} {self._data.unit}"[: w + 1], "dim")
        return text
