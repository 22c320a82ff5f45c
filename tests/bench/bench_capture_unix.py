"""Benchmark: what sending a raw capture costs the meter, under MicroPython's unix port.

    .venv/bin/python tests/bench/bench_capture_unix.py

Runs the real capture code (firmware/runtrue_fw/capture.py: the viper copy from the ring, the
RAW header, CRC-32, COBS, write) with a board that discards output, for 1-3 channels, and prints
the time per RAW SAMPLES frame and per service pass (at most 2 RAW frames), the heap bytes
allocated per frame (``gc.mem_alloc`` with ``gc.disable``), and the whole capture's cost.

Chip figures are ESTIMATES: the unix time times the chip/unix factor of firmware/README.md ("CPU
budget": 45-94, from the old float loop measured on an emulated RP2040); the upper end is used.
Measured here only; never on hardware.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
MP = shutil.which("micropython") or str(Path(sys.executable).with_name("micropython"))
CHIP_FACTOR = 94.0      # firmware/README.md, CPU budget: the largest chip/unix factor measured

SCRIPT = r"""
import gc, time, json
from runtrue_fw.meter import Meter
from runtrue_fw import capture as cap
from runtrue_fw.buffers import RING_FRAMES

class Board:
    def __init__(self, nch): self.nch = nch
    def write(self, buf, n): return n
    def configure(self, mask, rate): return float(rate)
    def set_edge(self, f): pass
    def start(self): pass
    def stop(self): pass
    def ticks_ms(self): return 0
    def info(self): return {"board": "bench", "adc_bits": 12, "channels_max": self.nch,
                            "counts_per_g": [400.0] * self.nch, "zero_code": [2048.0] * self.nch}
    def cpu_load_permille(self): return 0
    def dropped_samples(self): return 0

out = {}
for nch in (1, 2, 3):
    best = None
    for trial in range(3):
        m = Meter(Board(nch))
        c = m._cap
        c.request(b"\x00\x10", 0, True, nch, (1 << nch) - 1)      # 4096 frames
        c.state = 3                                             # sending samples (edges: none)
        c._idx = 0
        frames = 0
        gc.collect()
        gc.disable()
        a0 = gc.mem_alloc()
        t0 = time.ticks_us()
        while c.state == 3:
            c.service(4096 + 64, True)
            frames += 2
        t1 = time.ticks_us()
        a1 = gc.mem_alloc()
        gc.enable()
        us = time.ticks_diff(t1, t0)
        if best is None or us < best[0]:
            best = (us, frames, a1 - a0)
    us, passes2, heap = best
    n_frames = -(-4096 // cap.frames_per_chunk(nch))
    out[str(nch)] = {"us_total": us, "raw_frames": n_frames, "heap_bytes": heap, "copy": cap.COPY}
print(json.dumps(out))
"""


def main() -> None:
    res = subprocess.run([MP, "-c", "import sys; sys.path[:0] = ['firmware']\n" + SCRIPT], cwd=ROOT,
                         capture_output=True, text=True, timeout=300)
    if res.returncode:
        print(res.stdout, res.stderr)
        raise SystemExit(1)
    data = json.loads(res.stdout)
    print("raw capture of 4096 frames, sent 2 RAW frames per service pass (unix port; chip = x"
          f"{CHIP_FACTOR:g}, an estimate)")
    print(f"{'ch':>3} {'copy':>8} {'RAW frames':>10} {'us/frame unix':>14} {'us/pass unix':>13} "
          f"{'chip ms/pass':>13} {'chip ms total':>14} {'heap B':>7}")
    for nch, d in data.items():
        per = d["us_total"] / d["raw_frames"]
        print(f"{nch:>3} {d['copy']:>8} {d['raw_frames']:>10} {per:14.1f} {2 * per:13.1f} "
              f"{2 * per * CHIP_FACTOR / 1000:13.2f} {d['us_total'] * CHIP_FACTOR / 1000:14.1f} {d['heap_bytes']:>7}")


if __name__ == "__main__":
    main()
