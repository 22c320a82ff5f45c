"""Shared test set-up: a clean environment for every test, and the `slow` marks of whole tiers.

The quick loop is ``pytest -m "not slow"`` (about 20 s); ``bash tests/run`` runs everything.  A
test that takes more than about 0.2 s on a quiet machine carries ``@pytest.mark.slow`` (or its
module a ``pytestmark``); whole tiers whose every test is slow by its nature are marked here
instead, so a new test in them needs no mark of its own:

* tests/micropython, tests/unixport and every test marked ``micropython``: each starts a MicroPython
  interpreter (Node.js with the WebAssembly build, or the unix port) or the RP2040 emulator in a
  subprocess;
* tests/platforms: resolves the installs for every platform against the package index;
* tests/tui: a test that starts the application (a coroutine test driving Textual's pilot, or a
  snapshot taken with ``snap_compare``) takes a second or more; the pure text and widget tests
  there stay in the quick loop.
"""

from __future__ import annotations

import inspect
import os
import tempfile
from pathlib import Path

import pytest
from hypothesis import settings

from runtrue import plugins

# The tests are a program that puts runtrue together, like the command line: the simulator's
# sim:NAME ports are registered once for all of them.
plugins.load()

# Under CI the generated-input tests draw the same examples every run (derandomize), so a red CI
# is a regression in the code, not a new random draw; run by hand they explore new examples.
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")

TESTS = Path(__file__).resolve().parent
SLOW_TIERS = ("micropython", "unixport", "platforms")
APPLICATION_TIER = "tui"


def _starts_the_application(item: pytest.Item) -> bool:
    function = getattr(item, "function", None)
    return inspect.iscoroutinefunction(function) or "snap_compare" in getattr(item, "fixturenames", ())


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    for item in items:
        try:
            tier = Path(item.path).resolve().relative_to(TESTS).parts[0]
        except ValueError:
            continue
        if (tier in SLOW_TIERS or item.get_closest_marker("micropython") is not None
                or (tier == APPLICATION_TIER and _starts_the_application(item))):
            item.add_marker(pytest.mark.slow)


@pytest.fixture(scope="session")
def _data_dirs(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tmp_path_factory.mktemp("runtrue-data")


@pytest.fixture(autouse=True)
def _clean_environment(monkeypatch: pytest.MonkeyPatch, _data_dirs: Path) -> None:
    # NO_COLOR=1 makes Textual draw without colour, which changes every snapshot.
    monkeypatch.delenv("NO_COLOR", raising=False)
    # TERM=linux (a test run on the Linux console) or RUNTRUE_PLAIN would switch the plots to plain
    # characters and so change the snapshots; plain mode is tested by asking for it.
    monkeypatch.delenv("RUNTRUE_PLAIN", raising=False)
    monkeypatch.setenv("TERM", "xterm-256color")
    from runtrue.tui.widgets.braille import use_plain

    use_plain(False)
    # Never touch the user's real job database from a test: each test gets an empty data directory
    # of its own (made with mkdtemp: tmp_path_factory.mktemp scans all its siblings each time, which
    # costs seconds over a thousand tests).
    monkeypatch.setenv("RUNTRUE_DATA_DIR", tempfile.mkdtemp(prefix="test-", dir=_data_dirs))
