"""The board module under the real MicroPython interpreter (WebAssembly build, tests/micropython):
its edge interrupt handler allocates nothing (proved with ``micropython.heap_lock()``), and the
ring-to-Meter copy (memoryview slice assignment of 'H' arrays) gives the right frames in
MicroPython's own semantics.  ``machine``/``rp2``/``select`` are fakes put in ``sys.modules``."""

from __future__ import annotations

import json
import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest

pytestmark = pytest.mark.micropython

ROOT = Path(__file__).resolve().parents[2]
RUNNER = ROOT / "tests" / "micropython" / "run.mjs"
PKG = ROOT / "tests" / "micropython" / "node_modules" / "@micropython" / "micropython-webassembly-pyscript"

SCRIPT = r"""
import sys, json, micropython, gc

class Mem:
    def __init__(self):
        self.v = {}
    def __getitem__(self, a):
        x = self.v.get(a, 0)
        if a == 0x4004C000 or a == 0x4004C008:
            x |= 256  # CS.READY, FCS.EMPTY
        return x
    def __setitem__(self, a, x):
        if a == 0x4004C008:
            x &= ~0xC00  # FCS.OVER/UNDER are write-1-to-clear
        if a != 0x50000444:
            self.v[a] = x

class Pin:
    IN = 0
    OUT = 1
    PULL_UP = 1
    IRQ_RISING = 8
    IRQ_FALLING = 4
    def __init__(self, gpio, mode=-1, pull=-1, value=None):
        self.gpio = gpio
    def value(self, v=None):
        return 1
    def irq(self, handler=None, trigger=0, hard=False):
        self.handler = handler

MEM = Mem()

class machine:
    mem32 = MEM
    Pin = Pin
    def ADC(pin):
        return pin
    def disable_irq():
        return 0
    def enable_irq(s):
        pass
    def unique_id():
        return b"\x01\x02"

class DMA:
    n = 4
    def __init__(self):
        self.channel = DMA.n
        DMA.n += 1
    def pack_ctrl(self, **kw):
        return 0
    def config(self, read=None, write=None, count=None, ctrl=None, trigger=False):
        if count is not None:
            MEM.v[0x50000000 + 0x40 * self.channel + 8] = count

class rp2:
    DMA = DMA

class _Poll:
    def register(self, obj, mask=1):
        pass
    def poll(self, t=-1):
        return []
    def ipoll(self, t=-1):
        return ()          # nothing ready (the real ipoll returns a native, allocation-free iterator)

class select:
    POLLIN = 1
    def poll():
        return _Poll()

sys.modules["machine"] = machine
sys.modules["rp2"] = rp2
sys.modules["select"] = select

from runtrue_fw import board_rp2040 as bmod

class Rec:
    def __init__(self, nch):
        self.nch = nch
        self.got = []
        self.edges = []
    def feed_samples(self, block, n):
        for i in range(n * self.nch):
            self.got.append(block[i])
    def feed_edge(self, p):
        self.edges.append(p)
    def feed_command_bytes(self, d):
        pass
    def service(self):
        pass

b = bmod.Board()
b.configure(0b111, 4000)
b.start()
out = {}

def control():
    micropython.heap_lock()
    try:
        junk = [1, 2, 3]
        r = 1
    except MemoryError:
        r = 0
    micropython.heap_unlock()
    return r

def edges_locked(n):
    micropython.heap_lock()
    try:
        for _ in range(n):
            b._on_edge(None)
        r = 1
    except MemoryError:
        r = 0
    micropython.heap_unlock()
    return r

gc.collect()
out["control_caught"] = control() == 0
out["edge_irq_no_alloc"] = edges_locked(20) == 1
out["edges_stored"] = b._edge_head - b._edge_tail

# the DMA: write conversions into the ring across its wrap, counting TRANS_COUNT down
count_addr = 0x50000000 + 0x40 * b._dma.channel + 8
ring = b._ring
rec = Rec(3)
b._edge_tail = b._edge_head  # drop the edges above
sent = []
n = 0
for step in range(6):
    k = 3001 + 17 * step
    for i in range(k):
        v = (n * 7) % 4096
        ring[n % len(ring)] = v
        sent.append(v)
        n += 1
    MEM.v[count_addr] = MEM.v[count_addr] - k
    b.poll(rec)
out["ring_len"] = len(ring)
out["n"] = n
out["frames_ok"] = rec.got == sent[: len(rec.got)]
out["frames"] = len(rec.got) // 3
out["dropped"] = b.dropped_samples()

def idle_locked(n):
    # passes of the main loop with nothing new: no command byte, no edge, no sample
    micropython.heap_lock()
    try:
        for _ in range(n):
            b.poll(rec)
        r = 1
    except MemoryError:
        r = 0
    micropython.heap_unlock()
    return r

gc.collect()
out["idle_no_alloc"] = idle_locked(50) == 1
print(json.dumps(out))
"""


def test_board_under_real_micropython_edge_irq_allocates_nothing_and_frames_copy_right() -> None:
    node = shutil.which("node")
    if node is None or not PKG.exists():
        pytest.fail("MicroPython (WebAssembly) is not installed for the tests: run `bash tests/run` "
                    "(it runs `npm ci` in tests/micropython; needs Node.js 18+)")
    with tempfile.TemporaryDirectory() as tmp:
        script = Path(tmp) / "board_check.py"
        script.write_text(SCRIPT)
        proc = subprocess.run([node, str(RUNNER), "--fw", str(ROOT / "firmware" / "runtrue_fw"), str(script)],
                              capture_output=True, timeout=120, cwd=RUNNER.parent)
    assert proc.returncode == 0, proc.stderr.decode(errors="replace")
    out = json.loads(proc.stdout.decode().strip().splitlines()[-1])
    assert out["control_caught"], "heap_lock must catch an allocation, or the next check proves nothing"
    assert out["edge_irq_no_alloc"], "the hard IRQ handler allocated"
    assert out["edges_stored"] == 20
    assert out["n"] > out["ring_len"], "the test crossed the ring's wrap"
    assert out["frames_ok"] and out["frames"] == out["n"] // 3
    assert out["dropped"] == 0
    assert out["idle_no_alloc"], "a pass of the main loop with nothing to do allocated"
