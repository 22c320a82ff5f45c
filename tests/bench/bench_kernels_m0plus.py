"""Benchmark: the meter's viper kernels on an emulated RP2040 core, in cycles.

    .venv/bin/python tests/bench/bench_kernels_m0plus.py

mpy-cross compiles firmware/runtrue_fw/kernels_viper.py for armv6m; tests/micropython/m0plus.mjs
runs each kernel's machine code on the Cortex-M0+ core of rp2040js (an RP2040 emulator) from
SRAM and counts the core's cycles (rp2040js's instruction timings; not silicon, no interrupts or
DMA bus contention).  The tests hold the same runs bit for bit to the portable kernels.

Prints, for 1 to 3 channels:

* the revolution kernel (``rev_sums``) fitted as cycles = per revolution + per frame x frames, over
  revolutions of 24 to 2,000 frames (a straight line: the worst residual is printed);
* ``deinterleave`` (a 64-frame block into the ring) and ``copy_wrapped`` (the board's copy out of
  its DMA ring) per frame;
* CRC-32 and COBS, each over one REV frame (4-byte header, 16 + 70 per channel payload, 4-byte CRC);
* the kernels' share of the CPU at 4 kS/s a channel and 600 / 6,000 / 10,000 rpm, at 125 MHz.

Not in these figures: the interpreter's bytecode around the kernels (the Meter's bookkeeping, the
edge logic, the REV header, the USB write) and the runtime's argument conversion on each call;
tests/bench/bench_meter_unix.py estimates the whole.
"""

from __future__ import annotations

import sys
from array import array
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "firmware"))
sys.path.insert(0, str(ROOT / "tests" / "micropython"))
import m0plus  # noqa: E402
from rtlib.revinputs import rev_inputs  # noqa: E402

from runtrue_fw import basis, kernels  # noqa: E402

RATE_HZ = 4000
SLOT = 8192
FRAMES = (24, 60, 200, 400, 2000)
KTAB = kernels.make_kernel_table()


def rev_call(nch: int, n: int) -> list:
    codes = [[(37 * i + 500 * c) % 4096 for i in range(n)] for c in range(nch)]
    ring, p = rev_inputs(codes, n * 256 + 77, 31, basis.line_increment(50.0, RATE_HZ), 100, SLOT)
    return [ring, KTAB, p, bytearray(240)]


def main() -> int:
    why = m0plus.missing()
    if why:
        print(f"cannot run: {why}")
        return 2
    code = m0plus.viper_kernels()
    print(f"viper kernels on rp2040js's Cortex-M0+ (armv6m code from mpy-cross, run from SRAM), "
          f"{m0plus.CLOCK_HZ / 1e6:.0f} MHz:")
    print(f"  {'ch':>2} {'rev_sums /rev':>13} {'/frame':>7} {'resid.':>6} {'deinterl.':>9} {'ring copy':>9} "
          f"{'CRC':>6} {'COBS':>6} {'us/frame':>8} {'us/rev':>7} {'CPU% 600':>8} {'6000':>5} {'10000 rpm':>9}")
    cpi: list[float] = []
    for nch in (1, 2, 3):
        runs = m0plus.run(code["rev_sums"], [rev_call(nch, n) for n in FRAMES])
        cyc = np.array([r.cycles for r in runs], dtype=float)
        cpi.append(sum(r.cycles for r in runs) / sum(r.instructions for r in runs))
        x = np.column_stack([np.ones(len(FRAMES)), np.array(FRAMES, dtype=float)])
        (per_rev, per_frame), *_ = np.linalg.lstsq(x, cyc, rcond=None)
        resid = float(np.max(np.abs(x @ [per_rev, per_frame] - cyc) / cyc))
        block = array("H", [(13 * i) % 4096 for i in range(64 * nch)])
        d = m0plus.run(code["deinterleave"], [[block, array("H", bytes(2 * 1024 * nch)), array("i", [64, nch, 1000, 1024])]])
        deint = d[0].cycles / 64
        c = m0plus.run(code["copy_wrapped"], [[array("H", bytes(2 * 4096)), array("H", bytes(2 * 64 * nch)),
                                              array("i", [4090, 64 * nch, 4096])]])
        ring_copy = c[0].cycles / 64
        body = 4 + 16 + 70 * nch
        data = bytearray((i * 7 + 1) % 256 for i in range(body + 4))  # the frame, room for its CRC
        crc = m0plus.run(code["crc32_into"], [[data, body, kernels.make_crc_table()]])[0].cycles
        wire = bytearray((body + 4) + 8)
        cobs = m0plus.run(code["cobs_encode_into"], [[data, body + 4, wire]])[0].cycles
        frame_cyc = per_frame + deint + ring_copy
        rev_cyc = per_rev + crc + cobs
        us_frame, us_rev = frame_cyc / m0plus.CLOCK_HZ * 1e6, rev_cyc / m0plus.CLOCK_HZ * 1e6
        loads = [100 * (RATE_HZ * us_frame + rpm / 60 * us_rev) / 1e6 for rpm in (600, 6000, 10000)]
        print(f"  {nch:>2} {per_rev:>13,.0f} {per_frame:>7,.0f} {resid:>6.1%} {deint:>9,.0f} {ring_copy:>9,.0f} "
              f"{crc:>6,} {cobs:>6,} {us_frame:>8.1f} {us_rev:>7.1f} {loads[0]:>7.1f}% {loads[1]:>4.1f}% {loads[2]:>8.1f}%")
    print(f"  rev_sums: {min(cpi):.2f}-{max(cpi):.2f} cycles per instruction (most Cortex-M0+ instructions"
          " take 1, loads and stores 2, taken branches 2)")
    print("  (cycles; us/frame = rev_sums per frame + deinterleave + ring copy; us/rev = rev_sums per revolution"
          " + CRC + COBS;\n   the kernels only: the bytecode around them is not in these figures)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
