"""Snapshots of the main screens at 80x24 (pytest-textual-snapshot).  Deterministic: manual
entry or synthetic revolutions, no clock, notifications cleared.  Update after a deliberate
change of layout with ``pytest tests/tui --snapshot-update`` and look at the new SVGs."""

from __future__ import annotations

import cmath
import math
from typing import Any

from textual.widgets import OptionList
from tui_helpers import FAN_FIELDS, fill

from runtrue.protocol.messages import Revolution
from runtrue.tui import make_app

SIZE = (80, 24)
REF = {"speed": "1470", "amp0": "0.412", "phase0": "208"}
TRIAL = {"speed": "1470", "amp0": "0.371", "phase0": "238"}


async def _settle(pilot: Any) -> None:
    await pilot.pause()
    pilot.app.clear_notifications()
    await pilot.pause()


async def _to_trial(pilot: Any) -> None:
    await pilot.press("n")
    fill(pilot.app.screen, FAN_FIELDS)
    await pilot.press("f2", "r")
    fill(pilot.app.screen, REF, prefix="#")
    await pilot.press("enter")


def test_connect_screen(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        ol = pilot.app.screen.query_one("#sources", OptionList)
        while ol.option_count < 4:
            await pilot.pause(0.05)
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_live_screen(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        app = pilot.app
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2")
        app.session.meter_state = "connected"
        # 40 revolutions of a steady machine: a fixed scatter around 0.41 g at 208 deg
        revs = []
        for n in range(40):
            wobble = 0.02 * cmath.exp(1j * math.radians(137.5 * n))
            h1 = cmath.rect(0.41, math.radians(208)) + wobble
            revs.append(Revolution(n, 60e6 / 1470, 163, 0, 1, [h1], [0.02 + 0.01j], [0.33]))
        app.session.live.add(revs)
        from runtrue.tui.screens.live import LiveScreen

        app.push_screen(LiveScreen("reference run"))
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_balancing_runs_screen_at_the_trial_step(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await _to_trial(pilot)
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_fitting_screen_for_the_trial_weight(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await _to_trial(pilot)
        await pilot.press("f")
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_result_screen(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        app = pilot.app
        await _to_trial(pilot)
        await pilot.press("r")
        fill(app.screen, TRIAL, prefix="#")
        await pilot.press("enter")
        job = app.session.job
        # the correction run: what the fitted weights leave (typed as read off an instrument)
        await pilot.press("r")
        if job.weights_over_limit():  # confirm a correction over the force limit
            await pilot.press("y")
        fill(app.screen, {"speed": "1470", "amp0": "0.0061", "phase0": "331"}, prefix="#")
        await pilot.press("enter")
        assert job.state.step == "done"
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_amplitude_only_runs_screen_at_the_second_trial_run(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await pilot.press("n")
        fill(pilot.app.screen, FAN_FIELDS)
        await pilot.press("f7", "f2", "r")
        fill(pilot.app.screen, {"speed": "1470", "amp0": "0.412"}, prefix="#")
        await pilot.press("enter", "r")
        fill(pilot.app.screen, {"speed": "1470", "amp0": "0.371"}, prefix="#")
        await pilot.press("enter")
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_live_screen_of_an_amplitude_only_job(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        app = pilot.app
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f7", "f2")
        app.session.meter_state = "connected"
        revs = []
        for n in range(40):
            wobble = 0.02 * cmath.exp(1j * math.radians(137.5 * n))
            h1 = cmath.rect(0.52, math.radians(208)) + wobble
            revs.append(Revolution(n, 60e6 / 1470, 163, 0, 1, [h1], [0.02 + 0.01j], [0.4]))
        app.session.live.add(revs)
        from runtrue.tui.screens.live import LiveScreen

        app.push_screen(LiveScreen("trial 2 run", amplitude_only=True, earlier=[("R", [0.412]), ("T1", [0.371])]))
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_machine_screen(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await pilot.press("n")
        fill(pilot.app.screen, FAN_FIELDS)
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_a_trial_above_the_force_limit_asks_for_confirmation(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await _to_trial(pilot)
        await pilot.press("w")
        fill(pilot.app.screen, {"mass": "30", "angle": "0"}, prefix="#")
        await pilot.press("enter")
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)


def test_help_on_the_connect_screen(snap_compare: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await pilot.press("f1")
        await _settle(pilot)

    assert snap_compare(make_app("manual"), terminal_size=SIZE, run_before=run_before)
