"""A tiny braille-dot canvas: plots drawn with text characters, for any terminal (even over SSH).

Each character cell holds a 2 x 4 grid of dots (Unicode block "Braille Patterns", U+2800-U+28FF,
dot numbering as in the Unicode standard, chapter 22.6).  A terminal cell is about twice as tall
as it is wide, so the dots come out roughly square and circles look round.

Pure drawing code: no Textual, no I/O.  Widgets turn the lines into Rich text.
"""

from __future__ import annotations

import math

_BRAILLE_BASE = 0x2800
# bit for dot (column x 0..1, row y 0..3) inside one cell
_DOT_BITS = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))


class BrailleCanvas:
    """A grid of ``width_chars`` x ``height_chars`` cells, i.e. (2w) x (4h) dots.

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
        out: list[list[tuple[str, str]]] = []
        for r in range(self.height_chars):
            row: list[tuple[str, str]] = []
            for c in range(self.width_chars):
                if (c, r) in self._labels:
                    row.append(self._labels[(c, r)])
                    continue
                bits = self._cells[r][c]
                ch = chr(_BRAILLE_BASE + bits) if bits else " "
                row.append((ch, self._styles.get((c, r), "")))
            out.append(row)
        return out

    def lines(self) -> list[str]:
        """Plain text lines (no styles): handy for tests."""
        return ["".join(ch for ch, _ in row) for row in self.rows()]


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
