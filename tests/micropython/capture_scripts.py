"""A MicroPython script shared by the WebAssembly and unix-port capture tests: a 2-channel
meter sends a 600-frame capture with the heap locked; prints the lock result, END status,
codes received, edges announced and which copy ran."""

HEAP_LOCK_CAPTURE = r"""
import gc, struct, micropython
from rtlib.fakeboard import FakeBoard, Shaft
from rtlib.drive import Host, raw_of
from runtrue_fw.meter import Meter
from runtrue_fw import capture as cap
from runtrue_fw import frames as fr

hw = FakeBoard(channels_max=2)
m = Meter(hw)
host = Host(m, hw)
host.command(fr.C_START)
sh = Shaft(4000, 2466.24, [(0.5, 30.0, 0.1, 200.0, 0.0)] * 2, t0_samples=0.375)
NB = 40
blocks = [sh.block(b * 64, 64, hw.counts_per_g, hw.zero_code) for b in range(NB)]
edges = sh.edges_q8(NB * 64)
for b in range(4):
    for e in edges:
        if b * 64 * 256 <= e < (b + 1) * 64 * 256:
            m.feed_edge(e)
    m.feed_samples(blocks[b], 64)
    m.service()
host.command(cap.C_RAW, struct.pack("<H", 600))
gc.collect()

def locked():
    micropython.heap_lock()
    try:
        k = 0
        while k < len(edges) and edges[k] < 4 * 64 * 256:
            k += 1
        b = 4
        while b < NB:
            while k < len(edges) and edges[k] < (b + 1) * 64 * 256:
                m.feed_edge(edges[k])
                k += 1
            m.feed_samples(blocks[b], 64)
            m.service()
            hw.ms += 16
            b += 1
        r = "no-allocation"
    except MemoryError:
        r = "ALLOCATED"
    micropython.heap_unlock()
    return r

r = locked()
raw = raw_of(host.frames())
print(r, raw["status"], len(raw["codes"]), raw["begin"]["n_edges"] if raw["begin"] else -1, cap.COPY)
"""
