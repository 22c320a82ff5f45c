"""Benchmark: how quickly the application is ready to type into, and what each heavy
dependency costs to import.  Run: ``.venv/bin/python tests/bench/bench_startup.py [REPEATS]``.

Prints:

* time to first screen, in a fresh interpreter each time (subprocess, repeated): the wall time
  from starting the process to the App's ``Ready`` event (first frame drawn, headless), and the
  part of it spent inside Python after the interpreter came up; for the picker (no port) and
  for manual entry;
* which heavy modules are loaded at that moment (numpy, serial, scipy, sqlite3); scipy must
  never be loaded by the application (it is a test-only reference), numpy and serial should
  wait until a meter or the simulator is used;
* the import time of each heavy dependency on its own, fresh interpreter each time
  (median of the repeats), and its ratio to the interpreter's own start-up.

Numbers depend on the machine; on a Raspberry Pi expect several times these.
"""

from __future__ import annotations

import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

HEAVY = ("textual", "numpy", "serial", "scipy", "sqlite3", "platformdirs")

FIRST_SCREEN = r"""
import time
t0 = time.perf_counter()
import json, sys
from runtrue import plugins
from runtrue.tui import make_app
from runtrue.tui.app import RuntrueApp

plugins.load()  # the sim:NAME ports

PORT = sys.argv[1] or None

class Timed(RuntrueApp):
    def on_ready(self) -> None:
        mods = [m for m in ("numpy", "serial", "scipy", "sqlite3", "textual") if m in sys.modules]
        print(json.dumps({"in_python_s": time.perf_counter() - t0, "loaded": mods}), flush=True)
        self.exit()

app = make_app(PORT)
app.__class__ = Timed
app.run(headless=True)
"""

IMPORT_ONE = r"""
import sys, time
t0 = time.perf_counter()
__import__(sys.argv[1])
print(time.perf_counter() - t0)
"""


_DATA_DIR = tempfile.mkdtemp(prefix="runtrue-bench-")  # never the user's job database


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env.pop("NO_COLOR", None)
    env["RUNTRUE_DATA_DIR"] = _DATA_DIR
    return env


def first_screen(port: str, repeats: int) -> None:
    walls, inside, loaded = [], [], set()
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = subprocess.run([sys.executable, "-c", FIRST_SCREEN, port], capture_output=True, text=True,
                             env=_env(), timeout=60)
        walls.append(time.perf_counter() - t0)
        line = [x for x in out.stdout.splitlines() if x.startswith("{")]
        if not line:
            print(f"  failed: {out.stderr.strip()[-300:]}")
            return
        d = json.loads(line[-1])
        inside.append(d["in_python_s"])
        loaded.update(d["loaded"])
    label = port or "(picker)"
    print(f"  {label:10} process start -> first frame: median {statistics.median(walls) * 1000:6.0f} ms "
          f"(min {min(walls) * 1000:.0f}, max {max(walls) * 1000:.0f}); inside Python "
          f"{statistics.median(inside) * 1000:.0f} ms")
    print(f"  {'':10} loaded at first frame: {', '.join(sorted(loaded)) or 'none of the heavy ones'}")
    if "scipy" in loaded:
        print("  PROBLEM: scipy is imported by the application (it is a test-only dependency)")


def import_times(repeats: int) -> None:
    def run(code: list[str]) -> float:
        t0 = time.perf_counter()
        subprocess.run([sys.executable, *code], capture_output=True, env=_env(), check=True, timeout=60)
        return time.perf_counter() - t0

    bare = statistics.median(run(["-c", "pass"]) for _ in range(repeats))
    print(f"  interpreter start-up alone: {bare * 1000:.0f} ms")
    for name in (*HEAVY, "runtrue.tui.app", "runtrue.jobs", "runtrue.device"):
        times: list[float] = []
        for _ in range(repeats):
            out = subprocess.run([sys.executable, "-c", IMPORT_ONE, name], capture_output=True, text=True,
                                 env=_env(), timeout=60)
            if out.returncode != 0:
                times = []
                break
            times.append(float(out.stdout.strip()))
        if not times:
            print(f"  {name:18} not installed")
            continue
        med = statistics.median(times)
        print(f"  {name:18} import {med * 1000:7.1f} ms  ({med / bare:4.2f} x interpreter start-up)")


def main() -> None:
    repeats = int(sys.argv[1]) if len(sys.argv) > 1 else 5
    print(f"runtrue start-up, {repeats} fresh processes each, Python {sys.version.split()[0]}")
    print("time to first screen:")
    first_screen("", repeats)
    first_screen("manual", repeats)
    print("import time of each dependency (fresh interpreter, median):")
    import_times(repeats)


if __name__ == "__main__":
    try:
        main()
    finally:
        shutil.rmtree(_DATA_DIR, ignore_errors=True)
