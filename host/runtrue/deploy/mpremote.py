"""Subprocess runner for the tools the deploy flows call (mpremote, mpy-cross).

Every external command goes through one :data:`Runner`, so a test can replace it with a fake
that records the command lines and answers like the tool would.
"""

from __future__ import annotations

import subprocess
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass


@dataclass(frozen=True)
class ToolResult:
    """What a tool run gave back."""

    returncode: int
    stdout: str = ""
    stderr: str = ""

    @property
    def ok(self) -> bool:
        return self.returncode == 0

    def last_line(self) -> str:
        """The most telling line of the output (the last non-empty one of stderr, else stdout)."""
        for text in (self.stderr, self.stdout):
            lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
            if lines:
                return lines[-1]
        return f"exit status {self.returncode}"


Runner = Callable[[Sequence[str], float], ToolResult]


def run_tool(cmd: Sequence[str], timeout_s: float) -> ToolResult:
    """Run ``cmd`` and capture its output; never raises for the tool's own failures."""
    try:
        done = subprocess.run(list(cmd), capture_output=True, text=True, timeout=timeout_s, check=False)
    except FileNotFoundError as exc:
        return ToolResult(127, "", f"{cmd[0]}: not found ({exc})")
    except subprocess.TimeoutExpired:
        return ToolResult(124, "", f"{' '.join(cmd[:4])} ...: no result within {timeout_s:g} s")
    return ToolResult(done.returncode, done.stdout or "", done.stderr or "")


def python_module_cmd(module: str, *args: str) -> list[str]:
    """``python -m MODULE ARGS``, with the Python running runtrue (so its venv's tools are used)."""
    return [sys.executable, "-m", module, *args]


def mpremote_cmd(port: str, *actions: Sequence[str]) -> list[str]:
    """One mpremote invocation on ``port`` chaining ``actions`` with ``+``."""
    cmd = python_module_cmd("mpremote", "connect", port)
    for i, action in enumerate(actions):
        if i:
            cmd.append("+")
        cmd.extend(action)
    return cmd
