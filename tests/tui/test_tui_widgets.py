"""The polar plot and the fitting dial put things where the conventions say."""

from __future__ import annotations

import cmath
import math

from runtrue.tui.widgets.braille import BrailleCanvas, nice_full_scale
from runtrue.tui.widgets.dial import DialData, draw_dial, screen_angle_deg
from runtrue.tui.widgets.polar import PolarData, draw_polar


def _lit_cells(cv: BrailleCanvas) -> set[tuple[int, int]]:
    return {(c, r) for r, row in enumerate(cv.rows()) for c, (ch, _) in enumerate(row) if "\u2800" < ch <= "\u28ff"}


def test_braille_dot_sets_the_right_bit() -> None:
    cv = BrailleCanvas(2, 1)
    cv.set(0, 0)  # dot 1 of the first cell
    cv.set(3, 3)  # dot 8 of the second cell
    assert cv.lines() == ["\u2801\u2880"]


def test_points_off_the_canvas_are_ignored() -> None:
    cv = BrailleCanvas(2, 2)
    cv.set(-1, 0)
    cv.set(100, 100)
    assert cv.lines() == ["  ", "  "]


def test_full_scale_steps_cover_the_value() -> None:
    assert nice_full_scale(0.48) == 0.5
    assert nice_full_scale(0.51) == 0.75
    assert nice_full_scale(1.0) == 1.0
    assert nice_full_scale(0.0) == 1.0


def test_mean_vector_at_90_deg_lag_points_right_of_centre() -> None:
    # Convention shown on the plot: 0 deg at the top, lag clockwise -> 90 deg is to the right.
    data = PolarData(mean=cmath.rect(1.0, math.radians(90)))
    cv, fs = draw_polar(data, 31, 15)
    mean_cells = {(c, r) for (c, r), style in cv._styles.items() if "yellow" in style}
    assert mean_cells, "the mean vector is drawn"
    assert all(c >= 15 for c, _ in mean_cells)
    assert all(abs(r - 7) <= 1 for _, r in mean_cells)
    assert fs == 1.5  # 5 % headroom, then the next step of 1, 1.5, 2, 3, 4, 5, 7.5


def test_earlier_runs_are_marked_by_letter() -> None:
    data = PolarData(marks=[("R", cmath.rect(1.0, math.radians(180)))])
    cv, _ = draw_polar(data, 31, 15)
    lines = cv.lines()
    row = next(i for i, line in enumerate(lines) if "R" in line)
    assert row > 10  # 180 deg lag is at the bottom


def test_dial_counts_angles_against_rotation() -> None:
    # A rotor turning clockwise (seen from the drive end): 90 deg against rotation is on the left.
    assert screen_angle_deg(90, "cw") == 270
    assert screen_angle_deg(90, "ccw") == 90
    cv = draw_dial(DialData("cw", [], [("Q", 90.0, False)]), 31, 15)
    col = next(line.index("Q") for line in cv.lines() if "Q" in line)
    assert col < 10
    cv = draw_dial(DialData("ccw", [], [("Q", 90.0, False)]), 31, 15)
    col = next(line.index("Q") for line in cv.lines() if "Q" in line)
    assert col > 20


def test_dial_shows_the_mark_and_the_direction_of_rotation() -> None:
    text = "\n".join(draw_dial(DialData("cw", [0, 90, 180, 270], []), 31, 15).lines())
    assert "MARK" in text
    assert "\N{CLOCKWISE OPEN CIRCLE ARROW}" in text
    text = "\n".join(draw_dial(DialData("ccw", [], []), 31, 15).lines())
    assert "\N{ANTICLOCKWISE OPEN CIRCLE ARROW}" in text
