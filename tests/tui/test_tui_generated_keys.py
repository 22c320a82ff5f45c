"""Generated key and text sequences on every screen (hypothesis and Textual's pilot), on a job
database holding stopped, empty and odd jobs: whatever is typed, the application never fails
(no exception, no "unexpected error" exit) and keeps its records."""

from __future__ import annotations

import asyncio
import os
import shutil
import sys
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from odd_jobs import make_odd_database  # noqa: E402

from runtrue.tui import make_app  # noqa: E402

KEYS = ["f1", "f2", "f3", "f4", "f5", "f6", "f7", "f8", "escape", "enter", "tab", "shift+tab", "up", "down",
        "left", "right", "backspace", "space", "delete", "home", "end", "pagedown", "r", "f", "w", "a", "x",
        "v", "h", "e", "m", "s", "t", "1", "2", "y", "n"]
TEXTS = ["1e9", "1e30", "-5", "nan", "inf", "0", "999999999999", "abc", "6.3", "x" * 60]
_CHAR_KEYS = {".": "full_stop", "-": "minus"}

STEP = st.one_of(st.sampled_from(KEYS), st.sampled_from(TEXTS).map(lambda t: "text:" + t))
SEQUENCES = st.lists(STEP, min_size=1, max_size=12)

_TEMPLATE: dict[str, Any] = {}


def _odd_db(tmp: Path) -> tuple[Path, dict[str, int]]:
    """A fresh copy of the odd database (built once per session: building it is the slow part)."""
    if "path" not in _TEMPLATE:
        src = Path(tmp.parent / "odd-template.sqlite")
        src.unlink(missing_ok=True)
        _TEMPLATE["ids"] = make_odd_database(src)
        _TEMPLATE["path"] = src
    dst = tmp / f"odd-{len(list(tmp.glob('odd-*.sqlite')))}.sqlite"
    shutil.copy(_TEMPLATE["path"], dst)
    return dst, _TEMPLATE["ids"]


async def _drive(start: str, steps: list[str], tmp: Path) -> None:
    from runtrue.jobs import BalanceJob

    db, ids = _odd_db(tmp)
    app = make_app("manual", store_path=str(db), realtime=False, report_dir=str(tmp / "reports"))
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        store = app.session.store
        if start == "machine":
            app.show_machine()
        elif start == "runs":
            machine = store.list_machines()[0]
            app.session.machine = machine
            app.session.job = BalanceJob.start(store, machine)
            app.show_runs()
        elif start == "result of a job stopped before any reading":
            app.session.job = BalanceJob.resume(store, ids["stopped_empty"])
            app.session.machine = app.session.job.machine
            app.show_result()
        elif start == "resumed empty job":
            app.session.job = BalanceJob.resume(store, ids["open_empty"])
            app.session.machine = app.session.job.machine
            app.show_runs()
        await pilot.pause()
        for step in steps:
            if step.startswith("text:"):
                keys = [_CHAR_KEYS.get(c, c) for c in step[5:]]
            else:
                keys = [step]
            for k in keys:
                app.simulate_key(k)
            await asyncio.sleep(0.02)  # let each step land (pilot.press waits for idle: slow here)
        for _ in range(250):  # every queued key handled before the application closes
            if app._message_queue.empty():
                break
            await asyncio.sleep(0.02)
        await pilot.pause(0.1)
        assert app.failure == ""
        runs_before = len(store.runs(ids["huge_trial"]))
    assert runs_before == 1  # the odd records are still there, untouched


@pytest.mark.slow  # about 2 s an example (the application starts each time); 15 examples in all
@pytest.mark.parametrize("start", ["connect", "machine", "runs", "result of a job stopped before any reading",
                                   "resumed empty job"])
@settings(max_examples=int(os.environ.get("RUNTRUE_FUZZ_EXAMPLES", "3")), deadline=None,
          derandomize="RUNTRUE_FUZZ_EXAMPLES" not in os.environ,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(steps=SEQUENCES)
def test_any_keys_on_any_screen_never_break_the_application(start: str, steps: list[str], tmp_path: Path) -> None:
    asyncio.run(_drive(start, steps, tmp_path))
