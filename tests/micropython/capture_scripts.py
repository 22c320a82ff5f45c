"""A MicroPython script shared by the WebAssembly and unix-port capture tests: a 2-channel
meter sends a 600-frame capture with the heap locked; prints the lock result, END status,
codes received, edges announced and which copy ran."""

HEAP_LOCK_CAPTURE = r"""
import gc, struct, micropython
from rtlib.fakeboard import FakeBoard, Shaft
from rtlib.drive import Host, feed_blocks, raw_of
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
feed_blocks(m, hw, blocks, edges, 0, 4, ms_per_block=0)
host.command(cap.C_RAW, struct.pack("<H", 600))
gc.collect()

def locked():
    micropython.heap_lock()
    try:
        feed_blocks(m, hw, blocks, edges, 4, NB)
        r = "no-allocation"
    except MemoryError:
        r = "ALLOCATED"
    micropython.heap_unlock()
    return r

r = locked()
raw = raw_of(host.frames())
print(r, raw["status"], len(raw["codes"]), raw["begin"]["n_edges"] if raw["begin"] else -1, cap.COPY)
"""
