"""Helpers for driving the application in tests."""

from __future__ import annotations

import asyncio
import io
import time
from collections.abc import Callable
from typing import Any

from rich.console import Console


def screen_text(app: Any) -> str:
    """What the terminal shows now, as plain text."""
    w, h = app.size
    console = Console(width=w, height=h, file=io.StringIO(), force_terminal=True, color_system="truecolor",
                      record=True, legacy_windows=False)
    console.print(app.screen._compositor.render_update(full=True))
    return console.export_text()


async def wait_until(pilot: Any, pred: Callable[[], bool], timeout_s: float = 20.0, what: str = "") -> None:
    end = time.monotonic() + timeout_s
    while not pred():
        if time.monotonic() > end:
            raise AssertionError(f"timed out waiting for {what or pred}\n{screen_text(pilot.app)}")
        await pilot.pause(0.05)


async def key(pilot: Any, name: str) -> None:
    """Press a key without waiting for the whole process to go idle: ``pilot.press`` waits for
    the CPU to fall quiet, which never happens while the meter thread streams revolutions."""
    pilot.app.simulate_key(name)
    await asyncio.sleep(0.05)


def screen_name(app: Any) -> str:
    return type(app.screen).__name__


def fill(screen: Any, values: dict[str, str], prefix: str = "#f_") -> None:
    from textual.widgets import Input

    for key, value in values.items():
        screen.query_one(f"{prefix}{key}", Input).value = value


FAN_FIELDS = {
    "name": "Boiler-house fan 2", "mass": "14", "speed": "1470", "rotation": "cw", "grade": "G6.3",
    "planes": "1", "p1_radius": "160", "p1_pos": "8", "p1_first": "0", "stock": "1x12 2x12 5x8 10x4",
    "pickups": "fan-end bearing",
}
