"""Runs scripts under the real MicroPython interpreter (WebAssembly build, pinned in
package-lock.json) through our runner run.mjs, with the firmware and rtlib copied into its FS."""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
FW = ROOT / "firmware" / "runtrue_fw"
PKG = HERE / "node_modules" / "@micropython" / "micropython-webassembly-pyscript"

if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))          # rtlib, for the CPython side of the comparisons


class MicroPythonResult:
    def __init__(self, proc: subprocess.CompletedProcess) -> None:
        self.returncode = proc.returncode
        self.stdout: bytes = proc.stdout
        self.stderr = proc.stderr.decode(errors="replace")

    @property
    def text(self) -> str:
        return self.stdout.decode()


@pytest.fixture(scope="session")
def micropython() -> Callable[..., MicroPythonResult]:
    node = shutil.which("node")
    if node is None or not PKG.exists():
        pytest.fail("MicroPython (WebAssembly) is not installed for the tests: run `bash tests/run` "
                    "(it runs `npm ci` in tests/micropython; needs Node.js 18+)")

    def run(script: str, *args: str, stdin: bytes = b"", timeout: float = 120) -> MicroPythonResult:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "script.py"
            path.write_text(script)
            proc = subprocess.run([node, str(HERE / "run.mjs"), "--fw", str(FW), "--fw",
                                   str(HERE / "rtlib"), str(path), *args],
                                  input=stdin, capture_output=True, timeout=timeout, cwd=HERE)
        return MicroPythonResult(proc)

    return run
