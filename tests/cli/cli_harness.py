"""Running ``runtrue`` in-process as a user would: any argv, any standard input, the outcome
checked against the command-line contract (exit 0, or one line on standard error with exit 2;
never a traceback)."""

from __future__ import annotations

import io
import sys
import time
import types
from dataclasses import dataclass
from typing import Any

import pytest

from runtrue.cli import main


@dataclass
class Outcome:
    code: int
    out: str
    err: str
    seconds: float


class FakeApp:
    """Stands in for the terminal application: the commands that open it must not block a test."""

    failure = ""
    return_code = 0

    def run(self) -> None:
        return None


def no_application(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "runtrue.tui", types.SimpleNamespace(make_app=lambda *a, **k: FakeApp()))


def run_cli(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str], argv: list[str],
            stdin: str | bytes = "") -> Outcome:
    if isinstance(stdin, bytes):
        stream: Any = io.TextIOWrapper(io.BytesIO(stdin), encoding="utf-8")
    else:
        stream = io.StringIO(stdin)
    monkeypatch.setattr(sys, "stdin", stream)
    capsys.readouterr()
    t0 = time.monotonic()
    try:
        code = main(argv)
    except SystemExit as exc:  # only --help and --version end this way
        code = int(exc.code or 0)
    seconds = time.monotonic() - t0
    out, err = capsys.readouterr()
    return Outcome(code, out, err, seconds)


def assert_contract(o: Outcome, argv: list[str]) -> None:
    """Exit 0, or exactly one line on standard error and exit 2; no traceback, no bug."""
    assert "Traceback" not in o.err and "Traceback" not in o.out, (argv, o.err)
    assert o.code in (0, 2), (argv, o.code, o.err)
    if o.code == 2:
        assert o.err.count("\n") == 1 and o.err.endswith("\n"), (argv, o.err)
        assert o.err.startswith("runtrue"), (argv, o.err)
    assert "unexpected error" not in o.err, (argv, o.err)
