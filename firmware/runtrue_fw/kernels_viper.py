"""Sample-path kernels for the board: MicroPython viper/native versions of `kernels.py`.

Same loops, same integer arithmetic, same float sequence as `kernels.py`, so both give the
same numbers (tests/firmware/test_kernels.py runs this file's code under CPython with the
decorators replaced by the identity).  The WebAssembly build of MicroPython rejects these
decorators at compile time (SyntaxError), and CPython has no `micropython` module
(ImportError): `meter.py` imports this module inside try/except and falls back to `kernels`.
"""

import micropython
from micropython import const
from math import cos, sin

_ANCHOR_MASK = const(63)  # recompute cos/sin exactly every 64 samples (kernels.ANCHOR_EVERY)


@micropython.viper
def deinterleave(block: ptr16, ring: ptr16, p: ptr32):
    n = p[0]
    nch = p[1]
    w = p[2]
    size = p[3]
    mask = size - 1
    k = 0
    i = 0
    while i < n:
        pos = (w + i) & mask
        c = 0
        while c < nch:
            ring[c * size + pos] = block[k]
            k += 1
            c += 1
        i += 1


@micropython.viper
def ring_stats(ring: ptr16, p: ptr32):
    base = p[0]
    start = p[1]
    n = p[2]
    mask = p[3]
    total = 0
    lo = 65535
    hi = 0
    i = 0
    while i < n:
        v = ring[base + ((start + i) & mask)]
        total += v
        if v < lo:
            lo = v
        if v > hi:
            hi = v
        i += 1
    p[4] = total
    p[5] = lo
    p[6] = hi


@micropython.native
def fit_sums(ring, p, dc, a0, d):
    base = p[0]
    start = p[1]
    n = p[2]
    mask = p[3]
    cd = cos(d)
    sd = sin(d)
    c = 1.0
    s = 0.0
    s0 = 0.0
    s1 = 0.0
    s2 = 0.0
    s3 = 0.0
    s4 = 0.0
    s5 = 0.0
    b0 = 0.0
    b1 = 0.0
    b2 = 0.0
    b3 = 0.0
    b4 = 0.0
    b5 = 0.0
    i = 0
    while i < n:
        if i & _ANCHOR_MASK == 0:
            s0 += b0
            s1 += b1
            s2 += b2
            s3 += b3
            s4 += b4
            s5 += b5
            b0 = 0.0
            b1 = 0.0
            b2 = 0.0
            b3 = 0.0
            b4 = 0.0
            b5 = 0.0
            ang = a0 + i * d
            c = cos(ang)
            s = sin(ang)
        y = float(ring[base + ((start + i) & mask)] - dc)
        yc = y * c
        ys = y * s
        b0 += y
        b1 += yc
        b2 += ys
        b3 += yc * c - ys * s
        b4 += 2.0 * yc * s
        b5 += y * y
        t = c * cd - s * sd
        s = s * cd + c * sd
        c = t
        i += 1
    return (s0 + b0, s1 + b1, s2 + b2, s3 + b3, s4 + b4, s5 + b5)
