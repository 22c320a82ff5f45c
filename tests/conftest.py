"""Shared test set-up: a clean environment for every test."""

from __future__ import annotations

import os

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


@pytest.fixture(autouse=True)
def _clean_environment(monkeypatch: pytest.MonkeyPatch, tmp_path_factory: pytest.TempPathFactory) -> None:
    # NO_COLOR changes Textual's output and so the snapshots (toolchain.md).
    monkeypatch.delenv("NO_COLOR", raising=False)
    # TERM=linux (a test run on the Linux console) or RUNTRUE_PLAIN would switch the plots to plain
    # characters and so change the snapshots; plain mode is tested by asking for it.
    monkeypatch.delenv("RUNTRUE_PLAIN", raising=False)
    monkeypatch.setenv("TERM", "xterm-256color")
    from runtrue.tui.widgets.braille import use_plain

    use_plain(False)
    # Never touch the user's real job database from a test.
    monkeypatch.setenv("RUNTRUE_DATA_DIR", str(tmp_path_factory.mktemp("runtrue-data")))
