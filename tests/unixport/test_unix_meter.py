"""The firmware under MicroPython's unix port: the viper kernels bit for bit with the portable
ones, the whole Meter allocation-free under heap_lock across whole revolutions and idle passes,
in a limited heap, and every revolution touched by lost samples flagged.

Viper words are 64-bit on this port and 32-bit on the RP2040: tests/firmware/test_fw_kernels.py
shows every intermediate fits 31 bits, so the results carry over."""

from __future__ import annotations

import json

from rtlib.drive import scenario  # type: ignore[import-not-found]

KERNELS_SCRIPT = r"""
import json, random
from array import array
from runtrue_fw import basis, kernels as P
from runtrue_fw import kernels_viper as V

def run(fn, codes, f, L, linc, start):
    nch = len(codes); n = len(codes[0])
    ring = array("H", bytes(2 * 8192 * nch))
    for c in range(nch):
        for i in range(n):
            ring[c * 8192 + ((start + i) & 8191)] = codes[c][i]
    p = P.make_params()
    inc1 = basis.rev_increment(L)
    for k, v in ((P.P_N, n), (P.P_NCH, nch), (P.P_START, start), (P.P_MASK, 8191), (P.P_SLOT, 8192),
                 (P.P_OFFSET, 2048), (P.P_INC, inc1), (P.P_A1, basis.first_angle(inc1, f)),
                 (P.P_LINE, linc), (P.P_OUT, 20)):
        p[k] = v
    out = bytearray(240)
    fn(ring, P.make_kernel_table(), p, out)
    return list(out) + [p[P.P_MIN + c] for c in range(nch)] + [p[P.P_MAX + c] for c in range(nch)]

random.seed(7)
bad = 0
cases = 0
for trial in range(24):
    nch = 1 + trial % 3
    kind = (trial // 3) % 4
    L = random.choice([15 * 256 + 17, 4096 * 256, random.randrange(15 * 256, 4096 * 256)])
    f = random.randrange(256)
    n = min(4096, (L - f - 1) // 256 + 1)
    linc = random.choice([0, basis.line_increment(50.0, 4000.0), random.randrange(1 << 30)])
    if kind == 0:
        codes = [[random.randrange(4096) for _ in range(n)] for _ in range(nch)]
    elif kind == 1:
        codes = [[0] * n for _ in range(nch)]
    elif kind == 2:
        codes = [[4095] * n for _ in range(nch)]
    else:
        codes = [[random.choice((0, 4095)) for _ in range(n)] for _ in range(nch)]
    start = random.randrange(8192)
    a = run(P.rev_sums, codes, f, L, linc, start)
    b = run(V.rev_sums, codes, f, L, linc, start)
    cases += 1
    if a != b:
        bad += 1
buf = bytearray(b"123456789" + bytes(4))
V.crc32_into(buf, 9, P.make_crc_table())
crc = buf[9] | buf[10] << 8 | buf[11] << 16 | buf[12] << 24
print(json.dumps({"cases": cases, "bad": bad, "crc": crc}))
"""


def test_viper_kernels_equal_the_portable_ones_on_random_and_extreme_inputs(unix_mp) -> None:
    res = unix_mp(KERNELS_SCRIPT)
    assert res.returncode == 0, res.stderr
    out = json.loads(res.stdout)
    assert out["cases"] == 24 and out["bad"] == 0
    assert out["crc"] == 0xCBF43926  # Greg Cook's catalogue, CRC-32/ISO-HDLC check value


LOCKED_SCRIPT = r"""
import gc, json, micropython
from runtrue_fw import buffers
RING = buffers.meter_ring(3)        # first, as main.py does
from rtlib.fakeboard import FakeBoard, Shaft
from rtlib.drive import Host, feed_blocks, revs_of
from runtrue_fw.acquisition import KERNELS
from runtrue_fw.meter import Meter
from runtrue_fw import frames as fr

hw = FakeBoard(channels_max=3, out_capacity=1 << 14)
m = Meter(hw, ring=RING)
host = Host(m, hw)
host.command(fr.C_START)
sh = Shaft(4000, 2466.24, [(0.5, 30.0, 0.1, 200.0, 0.0)] * 3, t0_samples=0.375)
NB = 40
blocks = [sh.block(b * 64, 64, hw.counts_per_g, hw.zero_code) for b in range(NB)]
edges = sh.edges_q8(NB * 64)
gc.collect()

def locked():
    micropython.heap_lock()
    try:
        feed_blocks(m, hw, blocks, edges, 0, NB)
        i = 0
        while i < 100:          # idle passes, a STATUS among them
            m.service()
            hw.ms += 20
            i += 1
        r = "no-allocation"
    except MemoryError:
        r = "ALLOCATED"
    micropython.heap_unlock()
    return r

r = locked()
frames = host.frames()
print(json.dumps({"locked": r, "kernels": KERNELS, "revs": len(revs_of(frames)),
                  "status": sum(1 for t, _, _ in frames if t == fr.T_STATUS)}))
"""


def test_whole_revolutions_and_idle_passes_allocate_nothing_in_a_small_heap(unix_mp) -> None:
    res = unix_mp(LOCKED_SCRIPT, heap="512k")  # the test harness (rtlib, blocks, output) needs room too
    assert res.returncode == 0, res.stderr
    out = json.loads(res.stdout)
    assert out["kernels"] == "viper"
    assert out["locked"] == "no-allocation"
    assert out["revs"] >= 20 and out["status"] >= 2   # REV and STATUS frames written under the lock


def test_a_3_channel_meter_starts_in_the_heap_the_chip_leaves_free(unix_mp) -> None:
    """The RP2040 build has about 240 KiB of heap; the interpreter, the board's DMA ring (16 KiB,
    aligned: 32 KiB allocated) and its buffers take their share.  A 3-channel Meter (48 KiB ring)
    must start well inside 192 KiB, and restart (a second Meter after the first is dropped)
    without running out: buffers are allocated in place, with no transient copy."""
    script = ("import gc\nfrom runtrue_fw import buffers\nRING = buffers.meter_ring(3)\n"
              "from rtlib.fakeboard import FakeBoard\nfrom runtrue_fw.meter import Meter\n"
              "m = Meter(FakeBoard(channels_max=3, out_capacity=256), ring=RING)\n"
              "m = None\ngc.collect()\n"
              "m = Meter(FakeBoard(channels_max=3, out_capacity=256), ring=RING)\nprint('ok')\n")
    res = unix_mp(script, heap="192k")
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == "ok"


SCENARIOS = [dict(rpm=2466.2388, counts_per_g=1500.0), dict(rpm=3600.0, round_robin=True, block=50),
             dict(rate_hz=10000, rpm=29999.0, n_frames=800)]


def test_viper_meter_sends_the_same_revolutions_as_cpython(unix_mp) -> None:
    script = ("import json\nfrom rtlib.drive import scenario\n"
              f"for case in {SCENARIOS!r}:\n    print(json.dumps(scenario(**case)))\n")
    res = unix_mp(script)
    assert res.returncode == 0, res.stderr
    lines = res.stdout.splitlines()
    for case, line in zip(SCENARIOS, lines, strict=True):
        assert json.loads(line) == scenario(**case)


OVERRUN_SCRIPT = r"""
import json
from rtlib.drive import run_with_overrun

out = []
for nch in (1, 2, 3):
    for drop_first, drop_len in ((500, 1), (731, 40), (1000, 333), (1499, 260), (2222, 3)):
        revs, edges = run_with_overrun(nch, drop_first, drop_len, 97.3125)
        out.append({"nch": nch, "drop": [drop_first, drop_len], "edges": edges,
                    "revs": [[r["rev"], r["flags"], r["length_q8"]] for r in revs]})
print(json.dumps(out))
"""


def test_every_revolution_touched_by_lost_samples_is_flagged_for_any_overrun(unix_mp) -> None:
    res = unix_mp(OVERRUN_SCRIPT)
    assert res.returncode == 0, res.stderr
    for case in json.loads(res.stdout):
        lo, n = case["drop"]
        hi = lo + n
        edges = case["edges"]
        for rev, flags, _ in case["revs"]:
            e0, e1 = edges[rev] / 256, edges[rev + 1] / 256     # no pulse is missed here
            touched = e0 < hi and e1 > lo
            assert bool(flags & 0x10) == touched, (case["nch"], case["drop"], rev, flags)
