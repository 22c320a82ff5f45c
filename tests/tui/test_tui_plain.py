"""Plain characters for terminals without braille (the Linux console of a Raspberry Pi at its own
screen: TERM=linux, 8/16 colours, a font with no braille): the plots and the dial switch by one
setting, the whole application stays within the console font's characters, and a simulated job
can be completed there with NO_COLOR set.  Snapshots of the plain screens at 80x24."""

from __future__ import annotations

import cmath
import math
import random
from typing import Any

import pytest
from linux_console import missing, unreadable_in_16_colours
from tui_helpers import FAN_FIELDS, fill, key, screen_name, screen_text, wait_until

from runtrue.cli import build_parser
from runtrue.protocol.messages import Revolution
from runtrue.tui import make_app
from runtrue.tui.widgets import braille
from runtrue.tui.widgets.dial import DialData, draw_dial
from runtrue.tui.widgets.polar import PolarData, draw_polar

SIZE = (80, 24)
BRAILLE = range(0x2800, 0x2900)


def _has_braille(text: str) -> bool:
    return any(ord(ch) in BRAILLE for ch in text)


def test_plain_mode_is_chosen_on_the_linux_console_and_by_a_setting() -> None:
    assert braille.plain_wanted({"TERM": "linux"}) is True
    assert braille.plain_wanted({"TERM": "xterm-256color"}) is False
    assert braille.plain_wanted({"TERM": "xterm-256color", "RUNTRUE_PLAIN": "1"}) is True
    assert braille.plain_wanted({"TERM": "linux", "RUNTRUE_PLAIN": "0"}) is False
    assert make_app("manual", plain=True).plain and not make_app("manual", plain=False).plain


def test_plain_option_on_the_command_line() -> None:
    parser, _ = build_parser()
    assert parser.parse_args(["app", "--plain"]).plain is True
    assert parser.parse_args(["demo", "--plain"]).plain is True
    assert parser.parse_args(["app"]).plain is None, "no option: decided by the terminal (TERM=linux)"


def test_every_plot_switches_canvas_by_one_setting() -> None:
    data = PolarData([0.4 + 0.1j], 0.4 + 0.1j, [("R", 0.2j)])
    braille.use_plain(True)
    assert isinstance(draw_polar(data, 30, 12)[0], braille.PlainCanvas)
    assert isinstance(draw_dial(DialData(), 30, 12), braille.PlainCanvas)
    braille.use_plain(False)
    assert not isinstance(draw_polar(data, 30, 12)[0], braille.PlainCanvas)
    assert not isinstance(draw_dial(DialData(), 30, 12), braille.PlainCanvas)


@pytest.mark.parametrize("seed", range(6))
def test_plain_plots_use_only_characters_the_linux_console_shows(seed: int) -> None:
    rng = random.Random(seed)
    braille.use_plain(True)
    centre = cmath.rect(rng.uniform(0.05, 2), rng.uniform(0, 2 * math.pi))
    scatter = [centre + cmath.rect(rng.uniform(0, 0.3), rng.uniform(0, 2 * math.pi)) for _ in range(40)]
    w, h = rng.randint(12, 60), rng.randint(6, 22)
    polar, _ = draw_polar(PolarData(scatter, centre, [("R", centre * 0.5), ("T", centre * 1j)]), w, h)
    dial = draw_dial(DialData(rng.choice(["cw", "ccw"]), [i * 360 / 7 for i in range(7)],
                              [("A", rng.uniform(0, 360), False), ("B", rng.uniform(0, 360), True)]), w, h)
    for cv in (polar, dial):
        text = "\n".join(cv.lines())
        assert not _has_braille(text)
        assert not missing(text), text
        assert all(ord(ch) < 0x100 for ch in text), "plain plots are Latin-1 only"


def test_plain_polar_points_the_average_the_same_way_as_braille() -> None:
    braille.use_plain(True)
    for lag_deg, where in ((90, "right"), (0, "above"), (180, "below"), (270, "left")):
        cv, _ = draw_polar(PolarData([], cmath.rect(1.0, math.radians(lag_deg))), 31, 15)
        lines = cv.lines()
        row = next(i for i, ln in enumerate(lines) if "*" in ln)
        col = lines[row].index("*")
        mid_col, mid_row = 31 // 2, 15 // 2
        assert {"right": col > mid_col + 5, "left": col < mid_col - 5, "above": row < mid_row - 3,
                "below": row > mid_row + 3}[where], (lag_deg, "\n".join(lines))


def test_plain_polar_tells_revolutions_from_the_ring_by_shape_not_colour() -> None:
    braille.use_plain(True)
    scatter = [cmath.rect(0.5, math.radians(a)) for a in range(0, 360, 30)]
    cv, _ = draw_polar(PolarData(scatter, None), 40, 18)
    assert sum(ln.count("o") for ln in cv.lines()) >= 6, "\n".join(cv.lines())


def test_plain_dial_spells_the_direction_of_rotation() -> None:
    braille.use_plain(True)
    assert "(cw) turns" in "\n".join(draw_dial(DialData("cw"), 40, 12).lines())
    assert "(ccw) turns" in "\n".join(draw_dial(DialData("ccw"), 40, 12).lines())
    braille.use_plain(False)
    assert "\N{CLOCKWISE OPEN CIRCLE ARROW} turns" in "\n".join(draw_dial(DialData("cw"), 40, 12).lines())


# -- the whole application on the Linux console, without colour -----------------------------------

async def _confirm_if_asked(pilot: Any) -> None:
    """Answer yes to a safety question (force limit, pieces not ticked off) if one is asked."""
    await pilot.pause()
    if type(pilot.app.screen).__name__ == "ConfirmDialog":
        await pilot.press("y")
        await pilot.pause()


async def test_plain_screens_stay_legible_in_16_colours() -> None:
    app = make_app("manual", plain=True)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause(0.2)
        assert not unreadable_in_16_colours(app), "connect screen"
        await _to_trial(pilot)
        await _settle(pilot)
        assert not unreadable_in_16_colours(app), "runs screen"
        await pilot.press("f", "enter")
        await _settle(pilot)
        assert not unreadable_in_16_colours(app), "fitting screen"
        await pilot.press("escape", "r")
        await _confirm_if_asked(pilot)
        fill(app.screen, {"speed": "1470", "amp0": "0.371", "phase0": "238"}, prefix="#")
        await pilot.press("enter", "r")
        await _confirm_if_asked(pilot)
        fill(app.screen, {"speed": "1470", "amp0": "0.0061", "phase0": "331"}, prefix="#")
        await pilot.press("enter")
        await _settle(pilot)
        assert app.session.job.state.step == "done"
        assert not unreadable_in_16_colours(app), "result screen"
        app.session.live.add(_steady_revs(0.41, 208))
        from runtrue.tui.screens.live import LiveScreen

        app.push_screen(LiveScreen("look", can_take=False))
        await _settle(pilot)
        assert not unreadable_in_16_colours(app), "live screen"


async def test_simulated_job_on_the_linux_console_without_colour_shows_only_what_the_console_can(
        monkeypatch: pytest.MonkeyPatch, tmp_path: Any) -> None:
    monkeypatch.setenv("TERM", "linux")
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app("sim:fan", seed=7, realtime=False, revs_per_reading=24, post_interval_s=0.05,
                   report_dir=str(tmp_path), max_revs_per_s=400)
    assert app.plain, "TERM=linux chooses plain characters by itself"
    assert app.no_color, "NO_COLOR is honoured"
    seen: dict[str, str] = {}

    def look() -> None:
        text = screen_text(app)
        name = screen_name(app)
        assert not _has_braille(text), f"braille on {name}:\n{text}"
        assert not missing(text), f"{name} shows {sorted(missing(text))} which the Linux console font lacks:\n{text}"
        seen[name] = text

    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="simulator connected")
        await pilot.pause(0.2)
        look()
        await key(pilot, "n")
        await wait_until(pilot, lambda: screen_name(app) == "MachineScreen", what="machine screen")
        look()
        await key(pilot, "f2")
        await wait_until(pilot, lambda: screen_name(app) == "RunsScreen", what="job started")
        job = app.session.job
        for _ in range(8):
            if screen_name(app) != "RunsScreen":
                break
            look()
            if job.runs:  # something to fit: the dial
                await key(pilot, "f")
                await wait_until(pilot, lambda: screen_name(app) == "FittingScreen", what="fitting")
                await pilot.pause(0.1)
                look()
                await key(pilot, "escape")
                await wait_until(pilot, lambda: screen_name(app) == "RunsScreen", what="back to runs")
            n_runs = len(job.runs)
            await key(pilot, "r")
            await wait_until(pilot, lambda: screen_name(app) == "LiveScreen", what="live readings")
            await wait_until(pilot, lambda: app.session.live.total_revs > 10, what="revolutions")
            await pilot.pause(0.3)
            look()
            await key(pilot, "a")
            await wait_until(pilot, lambda n_runs=n_runs: len(job.runs) > n_runs, timeout_s=30, what="reading taken")
            await wait_until(pilot, lambda: screen_name(app) != "LiveScreen", what="back from live")
        await wait_until(pilot, lambda: screen_name(app) == "ResultScreen", what="result")
        await wait_until(pilot, lambda: "PASS" in screen_text(app), what="PASS shown")
        look()
        await key(pilot, "f1")
        await wait_until(pilot, lambda: screen_name(app) == "HelpScreen", what="help")
        look()
    assert {"ConnectScreen", "MachineScreen", "RunsScreen", "FittingScreen", "LiveScreen", "ResultScreen",
            "HelpScreen"} <= set(seen)
    assert "*" in seen["LiveScreen"] and "ring" in seen["LiveScreen"], "the polar plot is drawn, in plain characters"
    assert "(cw) turns" in seen["FittingScreen"] or "(ccw) turns" in seen["FittingScreen"]
    assert "Enter" in seen["ConnectScreen"], "the footer names the Enter key in words"


# -- snapshots of the plain screens ---------------------------------------------------------------

async def _settle(pilot: Any) -> None:
    await pilot.pause()
    pilot.app.clear_notifications()
    await pilot.pause()


def _steady_revs(amp_g: float, lag_deg: float) -> list[Revolution]:
    revs = []
    for n in range(40):
        wobble = 0.02 * cmath.exp(1j * math.radians(137.5 * n))
        h1 = cmath.rect(amp_g, math.radians(lag_deg)) + wobble
        revs.append(Revolution(n, 60e6 / 1470, 163, 0, 1, [h1], [0.02 + 0.01j], [0.33]))
    return revs


async def _to_trial(pilot: Any) -> None:
    await pilot.press("n")
    fill(pilot.app.screen, FAN_FIELDS)
    await pilot.press("f2", "r")
    fill(pilot.app.screen, {"speed": "1470", "amp0": "0.412", "phase0": "208"}, prefix="#")
    await pilot.press("enter")


def test_plain_live_screen(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        app = pilot.app
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2")
        app.session.meter_state = "connected"
        app.session.live.add(_steady_revs(0.41, 208))
        from runtrue.tui.screens.live import LiveScreen

        app.push_screen(LiveScreen("reference run"))
        await _settle(pilot)

    assert snap_compare(make_app("manual", plain=True), terminal_size=SIZE, run_before=run_before)


def test_plain_fitting_screen_for_the_trial_weight(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await _to_trial(pilot)
        await pilot.press("f")
        await _settle(pilot)

    assert snap_compare(make_app("manual", plain=True), terminal_size=SIZE, run_before=run_before)


def test_plain_connect_screen(snap_compare: Any) -> None:
    from textual.widgets import OptionList

    async def run_before(pilot: Any) -> None:
        ol = pilot.app.screen.query_one("#sources", OptionList)
        while ol.option_count < 4:
            await pilot.pause(0.05)
        await _settle(pilot)

    assert snap_compare(make_app("manual", plain=True), terminal_size=SIZE, run_before=run_before)


def test_plain_fitting_screen_without_colour(snap_compare: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("NO_COLOR", "1")

    async def run_before(pilot: Any) -> None:
        await _to_trial(pilot)
        await pilot.press("f", "enter")  # tick the first item off: fitted and not fitted side by side
        await _settle(pilot)

    app = make_app("manual", plain=True)
    assert app.no_color
    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


async def test_f9_switches_the_plots_between_braille_and_plain_characters() -> None:
    app = make_app("manual", plain=False)
    async with app.run_test(size=SIZE) as pilot:
        app.session.meter_state = "connected"
        app.session.live.add(_steady_revs(0.41, 208))
        from runtrue.tui.screens.live import LiveScreen

        app.push_screen(LiveScreen("look", can_take=False))
        await _settle(pilot)
        assert _has_braille(screen_text(app))
        await pilot.press("f9")
        await _settle(pilot)
        text = screen_text(app)
        assert app.plain and not _has_braille(text) and "*" in text
        await pilot.press("f9")
        await _settle(pilot)
        assert not app.plain and _has_braille(screen_text(app))
