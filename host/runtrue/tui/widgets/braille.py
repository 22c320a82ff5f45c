"""Text canvases: plots drawn with characters, for any terminal (even over SSH).

Two canvases with one interface (:class:`Canvas`), chosen by one setting (:func:`use_plain`,
read by :func:`new_canvas`):

* :class:`BrailleCanvas` -- each character cell holds a 2 x 4 grid of dots (Unicode block
  "Braille Patterns", U+2800-U+28FF, dot numbering as in the Unicode standard, chapter 22.6).  A
  terminal cell is about twice as tall as it is wide, so the dots come out roughly square and
  circles look round.
* :class:`PlainCanvas` -- the same dot grid, shown with plain ASCII strokes (``- | / \\ . '``),
  for terminals whose font has no braille: the Linux console (TERM=linux, e.g. a Raspberry Pi
  at its own screen), old Windows consoles.  Points drawn with :meth:`Canvas.point` carry a
  symbol (``o``, ``*``) so they stay distinct from lines without colour; label characters the
  console font lacks are replaced (:data:`PLAIN_TEXT`).

Callers draw in dot coordinates either way, so a plot's geometry does not change with the
canvas.  Pure drawing code: no Textual, no I/O.  Widgets turn the rows into Rich text.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping

_BRAILLE_BASE = 0x2800
# bit for dot (column x 0..1, row y 0..3) inside one cell
_DOT_BITS = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))


class BrailleCanvas:
    """A grid of ``width_chars`` x ``height_chars`` cells, i.e. (2w) x (4h) dots, in braille.

    Dot coordinates: x to the right, y downwards, both from 0.  Text labels can be laid over
    cells; a label replaces the dots of the cells it covers.
    """

    def __init__(self, width_chars: int, height_chars: int) -> None:
        self.width_chars = max(1, int(width_chars))
        self.height_chars = max(1, int(height_chars))
        self._cells = [[0] * self.width_chars for _ in range(self.height_chars)]
        self._styles: dict[tuple[int, int], str] = {}
        self._labels: dict[tuple[int, int], tuple[str, str]] = {}

    @property
    def width_dots(self) -> int:
        return 2 * self.width_chars

    @property
    def height_dots(self) -> int:
        return 4 * self.height_chars

    def set(self, x: float, y: float, style: str = "") -> None:
        """Light the dot nearest to (x, y); points off the canvas are ignored."""
        xi = int(round(x))
        yi = int(round(y))
        if not (0 <= xi < self.width_dots and 0 <= yi < self.height_dots):
            return
        col, row = xi // 2, yi // 4
        self._cells[row][col] |= _DOT_BITS[xi % 2][yi % 4]
        if style:
            self._styles[(col, row)] = style

    def point(self, x: float, y: float, style: str = "", symbol: str = "") -> None:
        """A data point at (x, y); a braille dot here (``symbol`` is for the plain canvas)."""
        self.set(x, y, style)

    def line(self, x0: float, y0: float, x1: float, y1: float, style: str = "") -> None:
        steps = int(max(abs(x1 - x0), abs(y1 - y0))) + 1
        for i in range(steps + 1):
            t = i / steps
            self.set(x0 + (x1 - x0) * t, y0 + (y1 - y0) * t, style)

    def circle(self, cx: float, cy: float, r: float, style: str = "", dotted: bool = False) -> None:
        n = max(16, int(2 * math.pi * r * 1.5))
        for i in range(n):
            if dotted and i % 3:
                continue
            a = 2 * math.pi * i / n
            self.set(cx + r * math.cos(a), cy + r * math.sin(a), style)

    def label(self, col: int, row: int, text: str, style: str = "") -> None:
        """Lay ``text`` over the cells starting at (col, row), clipped to the canvas."""
        if not (0 <= row < self.height_chars):
            return
        for i, ch in enumerate(text):
            c = col + i
            if 0 <= c < self.width_chars:
                self._labels[(c, row)] = (ch, style)

    def rows(self) -> list[list[tuple[str, str]]]:
        """Each row as (character, style) pairs."""
        return [[self.cell(c, r) for c in range(self.width_chars)] for r in range(self.height_chars)]

    def cell(self, col: int, row: int) -> tuple[str, str]:
        """What cell (col, row) shows: a label's character, else its braille dots."""
        if (col, row) in self._labels:
            return self._labels[(col, row)]
        bits = self._cells[row][col]
        return (chr(_BRAILLE_BASE + bits) if bits else " ", self._styles.get((col, row), ""))

    def lines(self) -> list[str]:
        """Plain text lines (no styles): handy for tests."""
        return ["".join(ch for ch, _ in row) for row in self.rows()]


# Label characters the Linux console's fonts lack (checked against Debian's console-setup fonts),
# and what the plain canvas shows instead.
PLAIN_TEXT = {
    "\N{CLOCKWISE OPEN CIRCLE ARROW}": "(cw)",
    "\N{ANTICLOCKWISE OPEN CIRCLE ARROW}": "(ccw)",
    "\N{HORIZONTAL ELLIPSIS}": "...",
}


def plain_text(text: str) -> str:
    """``text`` with the characters of :data:`PLAIN_TEXT` replaced and any other non-Latin-1 one as ``?``."""
    out = []
    for ch in text:
        ch = PLAIN_TEXT.get(ch, ch)
        out.append(ch if all(ord(c) < 0x100 for c in ch) else "?")
    return "".join(out)


def _plain_stroke(bits: int, east_west: bool = False) -> str:
    """The ASCII character closest in shape to the lit dots of one cell (2 columns x 4 rows).

    ``east_west``: the cells left and right are lit too, so a one-row step inside this cell is
    part of a shallow curve (drawn ``-``), not a diagonal.
    """
    lit = [(c, r) for c in (0, 1) for r in range(4) if bits & _DOT_BITS[c][r]]
    if not lit:
        return " "
    rows = [r for _, r in lit]
    cols = {c for c, _ in lit}
    span = max(rows) - min(rows)
    if any((0, r) in lit and (1, r) in lit and (0, r + 1) in lit and (1, r + 1) in lit for r in range(3)):
        return "o"  # a 2 x 2 block of dots: a spot (a hole, a point), not a stroke
    if len(cols) == 1:
        if span >= 2:
            return "|"
        return "." if min(rows) >= 2 else "'"
    left = [r for c, r in lit if c == 0]
    right = [r for c, r in lit if c == 1]
    slope = sum(right) / len(right) - sum(left) / len(left)  # rows grow downwards
    if abs(slope) >= 1.0 and not (east_west and span <= 1):
        return "\\" if slope > 0 else "/"
    if span >= 3:
        return "|"
    return "_" if min(rows) >= 3 else "-"


class PlainCanvas(BrailleCanvas):
    """The same dot grid as :class:`BrailleCanvas`, shown with plain ASCII strokes.

    Each cell becomes the stroke its dots look most like (``-``, ``|``, ``/``, ``\\``, ``.``,
    ``'``, and ``o`` for a spot of 2 x 2 dots or more); a point drawn with a symbol shows that symbol; labels show as written, with the
    characters the console fonts lack replaced.
    """

    def __init__(self, width_chars: int, height_chars: int) -> None:
        super().__init__(width_chars, height_chars)
        self._symbols: dict[tuple[int, int], tuple[str, str]] = {}

    def point(self, x: float, y: float, style: str = "", symbol: str = "") -> None:
        if not symbol:
            self.set(x, y, style)
            return
        col, row = int(round(x)) // 2, int(round(y)) // 4
        if 0 <= col < self.width_chars and 0 <= row < self.height_chars and x > -0.5 and y > -0.5:
            self._symbols[(col, row)] = (symbol[:1], style)

    def label(self, col: int, row: int, text: str, style: str = "") -> None:
        super().label(col, row, plain_text(text), style)

    def cell(self, col: int, row: int) -> tuple[str, str]:
        """What cell (col, row) shows: a label's character, a point's symbol, else the stroke of its dots."""
        if (col, row) in self._labels:
            return self._labels[(col, row)]
        if (col, row) in self._symbols:
            return self._symbols[(col, row)]
        cells = self._cells[row]
        east_west = 0 < col < self.width_chars - 1 and bool(cells[col - 1]) and bool(cells[col + 1])
        return (_plain_stroke(cells[col], east_west), self._styles.get((col, row), ""))


Canvas = BrailleCanvas  # the interface both canvases offer

_plain = False


def plain_wanted(env: Mapping[str, str] = os.environ) -> bool:
    """The default: plain characters on the Linux console (TERM=linux), whose fonts have no
    braille; ``RUNTRUE_PLAIN=1`` / ``=0`` in the environment says so either way anywhere."""
    value = env.get("RUNTRUE_PLAIN", "").strip().lower()
    if value in ("1", "yes", "true", "on"):
        return True
    if value in ("0", "no", "false", "off"):
        return False
    return env.get("TERM", "") == "linux"


def use_plain(on: bool) -> None:
    """Draw every plot from now on with plain characters (True) or braille (False)."""
    global _plain
    _plain = bool(on)


def plain_in_use() -> bool:
    return _plain


def new_canvas(width_chars: int, height_chars: int) -> BrailleCanvas:
    """A canvas of the kind chosen by :func:`use_plain`."""
    return PlainCanvas(width_chars, height_chars) if _plain else BrailleCanvas(width_chars, height_chars)


def nice_full_scale(value: float) -> float:
    """The smallest step of 1, 1.5, 2, 3, 4, 5, 7.5 x 10^k >= ``value`` (scale for a plot's outer ring)."""
    if not value > 0 or math.isinf(value):
        return 1.0
    exp = math.floor(math.log10(value))
    for m in (1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 7.5, 10.0):
        v = m * 10**exp
        if v >= value * (1 - 1e-12):
            return v
    return 10.0 ** (exp + 1)
