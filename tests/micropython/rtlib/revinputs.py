"""The inputs of one revolution for the rev_sums kernels: a ring and its parameter block.

Runs under CPython and MicroPython.
"""

from array import array

from runtrue_fw import basis, kernels


def rev_inputs(codes, length_q8, first_q8, line_inc, start, slot=8192, out_offset=20):
    """(ring, p): each channel's `codes` in its ring slot from index `start` (wrapping), and the
    parameter block for a revolution `length_q8` long whose first sample lies `first_q8` after
    the edge, with line-tone step `line_inc`."""
    nch = len(codes)
    n = len(codes[0])
    ring = array("H", bytes(2 * slot * nch))
    for c in range(nch):
        for i in range(n):
            ring[c * slot + ((start + i) & (slot - 1))] = codes[c][i]
    p = kernels.make_params()
    inc1 = basis.rev_increment(length_q8)
    p[kernels.P_N] = n
    p[kernels.P_NCH] = nch
    p[kernels.P_START] = start & (slot - 1)
    p[kernels.P_MASK] = slot - 1
    p[kernels.P_SLOT] = slot
    p[kernels.P_OFFSET] = 2048
    p[kernels.P_INC] = inc1
    p[kernels.P_A1] = basis.first_angle(inc1, first_q8)
    p[kernels.P_LINE] = line_inc
    p[kernels.P_OUT] = out_offset
    return ring, p
