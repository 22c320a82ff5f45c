"""The meter's revolution kernel with numpy, for the simulator only (host side).

Same contract and the same integers as ``runtrue_fw.kernels.rev_sums`` (the 14 sums of
``runtrue_fw.basis`` per channel, min/max codes, int40 output in the REV payload), computed with
the host fit's bit-exact cosine (:mod:`runtrue.device.revfit`) and exact int64 sums
(every sum is below 2**39).  The simulator runs the real Meter under CPython, where the portable
kernel costs ~6 ms per revolution; this twin is ~30x faster.  tests/host/sim/test_sim_fastsums.py
holds it to the portable kernel bit for bit.  The firmware never uses it.
"""

from __future__ import annotations

import numpy as np

from runtrue.device.revfit import basis_q14_from_angles
from runtrue_fw import kernels as k


def rev_sums(ring, table, p, out) -> None:  # noqa: ARG001 (table: same signature as the kernels)
    n = p[k.P_N]
    nch = p[k.P_NCH]
    start = p[k.P_START]
    mask = p[k.P_MASK]
    slot = p[k.P_SLOT]
    off = p[k.P_OFFSET]
    o = p[k.P_OUT]
    inc1 = p[k.P_INC]
    a1 = p[k.P_A1]
    b = basis_q14_from_angles(n, inc1, a1, p[k.P_LINE])
    ring_np = np.frombuffer(ring, dtype=np.uint16)
    idx = (start + np.arange(n)) & mask
    for c in range(nch):
        codes = ring_np[c * slot + idx].astype(np.int64)
        y = codes - off
        sums = [int(y.sum())] + [int(v) for v in (y @ b[:, 1:])] + [int(y @ y)]
        for j, v in enumerate(sums):
            lo = v & 0xFFFFFF
            hi = (v >> 24) & 0xFFFF
            at = o + 70 * c + 5 * j
            out[at] = lo & 255
            out[at + 1] = (lo >> 8) & 255
            out[at + 2] = lo >> 16
            out[at + 3] = hi & 255
            out[at + 4] = hi >> 8
        p[k.P_MIN + c] = int(codes.min()) if n else 65535
        p[k.P_MAX + c] = int(codes.max()) if n else 0
