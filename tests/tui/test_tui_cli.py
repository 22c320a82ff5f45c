"""``runtrue app``: bad ports are refused in one line, and the command costs nothing to load."""

from __future__ import annotations

import subprocess
import sys

import pytest

from runtrue.cli import main


def test_unknown_simulated_machine_is_refused_with_the_choices(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["app", "--port", "sim:nope"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "unknown simulated machine 'nope'" in err and "fan" in err


def test_empty_port_is_refused(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["app", "--port", " "]) == 2
    assert "--port is empty" in capsys.readouterr().err


def test_loading_the_command_imports_no_textual_numpy_or_serial() -> None:
    code = (
        "import sys, runtrue.cli.app as a, argparse\n"
        "p = argparse.ArgumentParser(); a.register(p.add_subparsers())\n"
        "print(sorted(m for m in ('textual', 'numpy', 'serial', 'scipy') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
