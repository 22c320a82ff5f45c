"""Sample-path kernels, portable version (CPython, MicroPython without viper).

Three loops that touch every sample: de-interleaving a block into the per-channel ring,
integer statistics over a ring span (sum, minimum, maximum), and the least-squares sums of one
revolution.  `kernels_viper` holds the same loops with MicroPython's viper/native emitters for
the board; both give the same numbers (tests/firmware/test_kernels.py).  Nothing here allocates
except `fit_sums`, which returns floats (it runs in `Meter.service()`, not on the sampling path).

The sums feed the linear least-squares fit of [1, cos, sin, cos 2φ, sin 2φ] in `phasor.py`
(Rife and Boorstyn, "Single-tone parameter estimation from discrete-time observations",
IEEE Trans. Inf. Theory 20(5), 1974: the least-squares fit is the maximum-likelihood estimate
of a sinusoid of known frequency in white Gaussian noise).
"""

from math import cos, sin

# Recompute cos/sin exactly every this many samples; between anchors the basis turns by a
# complex rotation (four multiplications), so single-precision drift stays below ~1e-5 rad.
# The sums are also taken in blocks of that length (partial sums folded into the totals at each
# anchor), which keeps single-precision rounding of long revolutions ~8x smaller.
ANCHOR_EVERY = 64


def deinterleave(block, ring, p) -> None:
    """Copy `p[0]` interleaved frames of `p[1]` channels from `block` into `ring`.

    `ring` holds channel slot c at [c*p[3], (c+1)*p[3]); frame i goes to (p[2] + i) mod p[3];
    p[3] is a power of two.  Allocates nothing.
    """
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


def ring_stats(ring, p) -> None:
    """Sum, minimum and maximum of `p[2]` samples of one slot.

    p = [slot_base, start, n, mask, out_sum, out_min, out_max]: reads ring[slot_base +
    ((start + i) & mask)] for i < n and writes the results into p[4], p[5], p[6].
    """
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


def fit_sums(ring, p, dc, a0, d):
    """Least-squares sums over one revolution of one slot.

    p = [slot_base, start, n, mask]; sample i (i < n) is ring[slot_base + ((start + i) & mask)]
    minus the integer `dc`, at rotation angle a0 + i*d (radians).  Returns
    (Σy, Σy·cos φ, Σy·sin φ, Σy·cos 2φ, Σy·sin 2φ, Σy²).
    """
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
        if i % ANCHOR_EVERY == 0:
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
        b3 += yc * c - ys * s      # y·cos 2φ = y·(c² − s²)
        b4 += 2.0 * yc * s         # y·sin 2φ = y·2cs
        b5 += y * y
        t = c * cd - s * sd
        s = s * cd + c * sd
        c = t
        i += 1
    return (s0 + b0, s1 + b1, s2 + b2, s3 + b3, s4 + b4, s5 + b5)
