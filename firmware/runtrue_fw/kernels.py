"""Sample-path kernels, portable version (CPython, MicroPython without viper).

The loops that touch every sample or every byte sent, in plain integer Python:

* ``deinterleave``: a block of interleaved frames into the per-channel ring;
* ``rev_sums``: in ONE pass over a revolution's frames for all enabled channels, the 14 exact
  integer sums per channel of ``basis.py`` (basis values computed once per frame and shared by
  the channels) and each channel's minimum and maximum code (the clipping flag), written
  straight into the REV payload as int40 (lo 3 bytes, hi 2 bytes, little-endian);
* ``crc32_into`` and ``cobs_encode_into``: the frame check and the byte stuffing of frames.py.

``kernels_viper`` holds the same loops for MicroPython's viper emitter on the board; the tests
hold both to ``basis.reference_sums`` and to each other bit for bit.  Nothing here allocates.

Word sizes (viper words are 32-bit on the RP2040): sample values y are codes minus
``1 << (adc_bits - 1)`` (|y| <= 2**11 for 12 bits), basis values |b| <= 2**14, so a product
fits 2**25 and a block of ``FOLD_EVERY`` = 32 products fits 2**30.  Each block accumulator is
folded into a pair (hi, lo) with lo in [0, 2**24): lo + block stays below 2**31, and the
total hi*2**24 + lo stays below 2**39 (int40) for revolutions up to 2**14 samples.

Angles (2**-30 turn) are kept in accumulators stepped each frame, modulo 2**30, by adding the
step less one turn and adding the turn back if negative, so no sum reaches 2**30: the portable
kernel stays in small ints even on a 32-bit port (MicroPython's small ints are 31-bit), apart
from a block sum at its extreme (exactly 2**30, full-scale codes in phase with a basis value at
-1 for 32 samples), which there becomes one short-lived long int.  The fold splits each block sum
s as (s >> 24, s & 0xFFFFFF) so that lo + s is never formed.  The cosine table is stored offset by +16384 (``make_kernel_table``)
so that viper's unsigned 16-bit loads read it directly.

Sources: CRC-32/ISO-HDLC (reflected polynomial 0xEDB88320, init and xorout 0xFFFFFFFF, check
0xCBF43926; Greg Cook, "Catalogue of parametrised CRC algorithms"), computed a byte at a time
from a 256-entry table (1 KiB); COBS after S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing",
IEEE/ACM Transactions on Networking 7(2), 1999.
"""

from array import array

from runtrue_fw import basis

FOLD_EVERY = 32            # products summed in a 32-bit block before folding into (hi, lo)
MAX_CHANNELS = 3
N_SUMS = 14
INT40_LEN = 5
CH_BYTES = 70              # N_SUMS * INT40_LEN
REV_HEAD_LEN = 16

# rev_sums parameter block p (array('i'), P_WORDS words)
P_N = 0          # samples per channel in the revolution
P_NCH = 1        # enabled channels (1..3), ring slots 0..n_ch-1
P_START = 2      # ring index of the first sample (already masked)
P_MASK = 3       # ring index mask (ring slot size - 1)
P_SLOT = 4       # ring slot size (frames per channel)
P_OFFSET = 5     # code subtracted from every sample (1 << (adc_bits - 1))
P_INC = 6        # rotor angle step per sample (basis.rev_increment)
P_A1 = 7         # first sample's angle (basis.first_angle)
P_LINE = 8       # line-tone angle step per sample (0: line sums are Sy-weighted cos 0 = Sy)
P_OUT = 9        # byte offset in the out buffer of channel 0's sums
P_MIN = 10       # out: minimum code per channel (3 words)
P_MAX = 13       # out: maximum code per channel (3 words)
P_HI = 16        # work: hi parts (+2**20), N_SUMS per channel
P_LO = 58        # work: lo parts in [0, 2**24), N_SUMS per channel
P_BASIS = 100    # work: 12 basis values (+16384) for each of FOLD_EVERY frames
P_WORDS = 484
HI_BIAS = 1 << 20

_CRC_POLY_LO = 0x8320      # reflected polynomial 0xEDB88320, low and high halves
_CRC_POLY_HI = 0xEDB8


def make_params():
    """A zeroed rev_sums parameter block (array('i') of P_WORDS words)."""
    return array("i", bytes(4 * P_WORDS))


def make_kernel_table():
    """basis.make_cos_table() + 16384 as array('H') (1,025 entries, no negative values)."""
    t = basis.make_cos_table()
    out = array("H", bytes(2 * len(t)))
    for j in range(len(t)):
        out[j] = t[j] + 16384
    return out


def make_crc_table():
    """CRC-32 byte table (reflected polynomial 0xEDB88320) as 256 pairs of half-words in an
    array('H'): low half then high half, so every value is a small int on any port."""
    out = array("H", bytes(1024))
    for j in range(256):
        lo = j
        hi = 0
        for _ in range(8):
            carry = lo & 1
            lo = (lo >> 1) | ((hi & 1) << 15)
            hi >>= 1
            if carry:
                lo ^= _CRC_POLY_LO
                hi ^= _CRC_POLY_HI
        out[2 * j] = lo
        out[2 * j + 1] = hi
    return out


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


def copy_wrapped(src, dst, p) -> None:
    """dst[:p[1]] = p[1] samples of the ring `src` (p[2] long) from index p[0], wrapping.

    The board copies whole frames out of its DMA ring with it (no slicing, no allocation).
    """
    a = p[0]
    n = p[1]
    size = p[2]
    i = 0
    while i < n:
        dst[i] = src[a]
        a += 1
        if a == size:
            a = 0
        i += 1


def rev_sums(ring, table, p, out) -> None:
    """The 14 sums of every enabled channel over one revolution, and min/max codes.

    Reads ring[c*p[P_SLOT] + ((p[P_START] + i) & p[P_MASK])] for i < p[P_N], c < p[P_NCH];
    writes channel c's sums at out[p[P_OUT] + 70*c ...] (int40 each, order of basis.py), its
    minimum and maximum code at p[P_MIN + c], p[P_MAX + c].  `table` from make_kernel_table().
    Frames are taken in blocks of FOLD_EVERY: the block's basis values are computed once (into
    p[P_BASIS...]), then each channel sums its block in 14 locals and folds them into (hi, lo).
    Every word stored in `p` is non-negative (viper's 32-bit loads do not sign-extend on a
    64-bit port).  Same statements as kernels_viper.rev_sums.
    """
    n = p[0]
    nch = p[1]
    start = p[2]
    mask = p[3]
    slot = p[4]
    off = p[5]
    inc1 = p[6]
    a1 = p[7]
    linc = p[8]
    m = 0x3FFFFFFF
    q = 0x10000000
    j = 0
    while j < 42:
        p[16 + j] = 1048576     # hi, biased by 2**20 (stored words stay non-negative)
        p[58 + j] = 0          # lo
        j += 1
    c = 0
    while c < nch:
        p[10 + c] = 65535
        p[13 + c] = 0
        c += 1
    # angles modulo one turn (2**30) without ever forming a sum of 2**30 or more: x + y is
    # taken as x + (y - 2**30), plus 2**30 if negative (small ints on any 32-bit port)
    h1 = a1 & m
    h2 = h1 + ((h1 - m) - 1)
    if h2 < 0:
        h2 = (h2 + m) + 1
    h3 = h2 + ((h1 - m) - 1)
    if h3 < 0:
        h3 = (h3 + m) + 1
    h4 = h2 + ((h2 - m) - 1)
    if h4 < 0:
        h4 = (h4 + m) + 1
    d1 = inc1 & m
    d2 = d1 + ((d1 - m) - 1)
    if d2 < 0:
        d2 = (d2 + m) + 1
    d3 = d2 + ((d1 - m) - 1)
    if d3 < 0:
        d3 = (d3 + m) + 1
    d4 = d2 + ((d2 - m) - 1)
    if d4 < 0:
        d4 = (d4 + m) + 1
    l1 = 0
    l2 = 0
    e1 = linc & m
    e2 = e1 + ((e1 - m) - 1)
    if e2 < 0:
        e2 = (e2 + m) + 1
    # the steps less one turn (each in [-2**30, 0))
    d1 = (d1 - m) - 1
    d2 = (d2 - m) - 1
    d3 = (d3 - m) - 1
    d4 = (d4 - m) - 1
    e1 = (e1 - m) - 1
    e2 = (e2 - m) - 1
    i0 = 0
    while i0 < n:
        nb = n - i0
        if nb > 32:
            nb = 32
        # basis values of the block's frames, once for all channels (+16384: non-negative)
        f = 0
        bb = 100
        while f < nb:
            t = h1 >> 20
            v = table[t]
            p[bb + 0] = v + (((table[t + 1] - v) * ((h1 >> 6) & 0x3FFF)) >> 14)
            x = (h1 - q) & m
            t = x >> 20
            v = table[t]
            p[bb + 1] = v + (((table[t + 1] - v) * ((x >> 6) & 0x3FFF)) >> 14)
            t = h2 >> 20
            v = table[t]
            p[bb + 2] = v + (((table[t + 1] - v) * ((h2 >> 6) & 0x3FFF)) >> 14)
            x = (h2 - q) & m
            t = x >> 20
            v = table[t]
            p[bb + 3] = v + (((table[t + 1] - v) * ((x >> 6) & 0x3FFF)) >> 14)
            t = h3 >> 20
            v = table[t]
            p[bb + 4] = v + (((table[t + 1] - v) * ((h3 >> 6) & 0x3FFF)) >> 14)
            x = (h3 - q) & m
            t = x >> 20
            v = table[t]
            p[bb + 5] = v + (((table[t + 1] - v) * ((x >> 6) & 0x3FFF)) >> 14)
            t = h4 >> 20
            v = table[t]
            p[bb + 6] = v + (((table[t + 1] - v) * ((h4 >> 6) & 0x3FFF)) >> 14)
            x = (h4 - q) & m
            t = x >> 20
            v = table[t]
            p[bb + 7] = v + (((table[t + 1] - v) * ((x >> 6) & 0x3FFF)) >> 14)
            t = l1 >> 20
            v = table[t]
            p[bb + 8] = v + (((table[t + 1] - v) * ((l1 >> 6) & 0x3FFF)) >> 14)
            x = (l1 - q) & m
            t = x >> 20
            v = table[t]
            p[bb + 9] = v + (((table[t + 1] - v) * ((x >> 6) & 0x3FFF)) >> 14)
            t = l2 >> 20
            v = table[t]
            p[bb + 10] = v + (((table[t + 1] - v) * ((l2 >> 6) & 0x3FFF)) >> 14)
            x = (l2 - q) & m
            t = x >> 20
            v = table[t]
            p[bb + 11] = v + (((table[t + 1] - v) * ((x >> 6) & 0x3FFF)) >> 14)
            h1 += d1
            if h1 < 0:
                h1 = (h1 + m) + 1
            h2 += d2
            if h2 < 0:
                h2 = (h2 + m) + 1
            h3 += d3
            if h3 < 0:
                h3 = (h3 + m) + 1
            h4 += d4
            if h4 < 0:
                h4 = (h4 + m) + 1
            l1 += e1
            if l1 < 0:
                l1 = (l1 + m) + 1
            l2 += e2
            if l2 < 0:
                l2 = (l2 + m) + 1
            bb += 12
            f += 1
        # every channel over the block: 14 block sums in locals, then folded
        c = 0
        while c < nch:
            lo_code = p[10 + c]
            hi_code = p[13 + c]
            s0 = 0
            s1 = 0
            s2 = 0
            s3 = 0
            s4 = 0
            s5 = 0
            s6 = 0
            s7 = 0
            s8 = 0
            s9 = 0
            s10 = 0
            s11 = 0
            s12 = 0
            s13 = 0
            base = c * slot
            f = 0
            bb = 100
            while f < nb:
                v = ring[base + ((start + i0 + f) & mask)]
                if v < lo_code:
                    lo_code = v
                if v > hi_code:
                    hi_code = v
                y = v - off
                s0 += y
                s1 += y * (p[bb + 0] - 16384)
                s2 += y * (p[bb + 1] - 16384)
                s3 += y * (p[bb + 2] - 16384)
                s4 += y * (p[bb + 3] - 16384)
                s5 += y * (p[bb + 4] - 16384)
                s6 += y * (p[bb + 5] - 16384)
                s7 += y * (p[bb + 6] - 16384)
                s8 += y * (p[bb + 7] - 16384)
                s9 += y * (p[bb + 8] - 16384)
                s10 += y * (p[bb + 9] - 16384)
                s11 += y * (p[bb + 10] - 16384)
                s12 += y * (p[bb + 11] - 16384)
                s13 += y * y
                bb += 12
                f += 1
            p[10 + c] = lo_code
            p[13 + c] = hi_code
            w = 16 + c * 14
            x = p[w + 42] + (s0 & 0xFFFFFF)
            p[w + 0] = p[w + 0] + (s0 >> 24) + (x >> 24)
            p[w + 42] = x & 0xFFFFFF
            x = p[w + 43] + (s1 & 0xFFFFFF)
            p[w + 1] = p[w + 1] + (s1 >> 24) + (x >> 24)
            p[w + 43] = x & 0xFFFFFF
            x = p[w + 44] + (s2 & 0xFFFFFF)
            p[w + 2] = p[w + 2] + (s2 >> 24) + (x >> 24)
            p[w + 44] = x & 0xFFFFFF
            x = p[w + 45] + (s3 & 0xFFFFFF)
            p[w + 3] = p[w + 3] + (s3 >> 24) + (x >> 24)
            p[w + 45] = x & 0xFFFFFF
            x = p[w + 46] + (s4 & 0xFFFFFF)
            p[w + 4] = p[w + 4] + (s4 >> 24) + (x >> 24)
            p[w + 46] = x & 0xFFFFFF
            x = p[w + 47] + (s5 & 0xFFFFFF)
            p[w + 5] = p[w + 5] + (s5 >> 24) + (x >> 24)
            p[w + 47] = x & 0xFFFFFF
            x = p[w + 48] + (s6 & 0xFFFFFF)
            p[w + 6] = p[w + 6] + (s6 >> 24) + (x >> 24)
            p[w + 48] = x & 0xFFFFFF
            x = p[w + 49] + (s7 & 0xFFFFFF)
            p[w + 7] = p[w + 7] + (s7 >> 24) + (x >> 24)
            p[w + 49] = x & 0xFFFFFF
            x = p[w + 50] + (s8 & 0xFFFFFF)
            p[w + 8] = p[w + 8] + (s8 >> 24) + (x >> 24)
            p[w + 50] = x & 0xFFFFFF
            x = p[w + 51] + (s9 & 0xFFFFFF)
            p[w + 9] = p[w + 9] + (s9 >> 24) + (x >> 24)
            p[w + 51] = x & 0xFFFFFF
            x = p[w + 52] + (s10 & 0xFFFFFF)
            p[w + 10] = p[w + 10] + (s10 >> 24) + (x >> 24)
            p[w + 52] = x & 0xFFFFFF
            x = p[w + 53] + (s11 & 0xFFFFFF)
            p[w + 11] = p[w + 11] + (s11 >> 24) + (x >> 24)
            p[w + 53] = x & 0xFFFFFF
            x = p[w + 54] + (s12 & 0xFFFFFF)
            p[w + 12] = p[w + 12] + (s12 >> 24) + (x >> 24)
            p[w + 54] = x & 0xFFFFFF
            x = p[w + 55] + (s13 & 0xFFFFFF)
            p[w + 13] = p[w + 13] + (s13 >> 24) + (x >> 24)
            p[w + 55] = x & 0xFFFFFF
            c += 1
        i0 += nb
    o = p[9]
    j = 0
    while j < nch * 14:
        x = p[58 + j]
        t = p[16 + j] - 1048576
        out[o] = x & 255
        out[o + 1] = (x >> 8) & 255
        out[o + 2] = (x >> 16) & 255
        out[o + 3] = t & 255
        out[o + 4] = (t >> 8) & 255
        o += 5
        j += 1


def crc32_into(buf, n: int, ctab) -> int:
    """CRC-32/ISO-HDLC of buf[:n] written little-endian at buf[n:n+4]; returns n + 4.

    `ctab` from make_crc_table().  The register is kept as two 16-bit halves so every value is
    a small int on any port (a 32-bit CRC would be a long int on MicroPython)."""
    lo = 0xFFFF
    hi = 0xFFFF
    i = 0
    while i < n:
        x = (lo ^ buf[i]) & 255
        lo = ((lo >> 8) | ((hi & 255) << 8)) ^ ctab[2 * x]
        hi = (hi >> 8) ^ ctab[2 * x + 1]
        i += 1
    lo ^= 0xFFFF
    hi ^= 0xFFFF
    buf[n] = lo & 255
    buf[n + 1] = lo >> 8
    buf[n + 2] = hi & 255
    buf[n + 3] = hi >> 8
    return n + 4


def cobs_encode_into(src, n: int, dst) -> int:
    """COBS-encode src[:n] into dst (no delimiter); returns the encoded length.

    dst must hold n + n // 254 + 1 bytes.
    """
    code_pos = 0
    out = 1
    code = 1
    i = 0
    while i < n:
        b = src[i]
        if b == 0:
            dst[code_pos] = code
            code_pos = out
            out += 1
            code = 1
        else:
            dst[out] = b
            out += 1
            code += 1
            if code == 0xFF:
                dst[code_pos] = code
                if i + 1 == n:      # a full block ends the data: no trailing 0x01 block
                    return out
                code_pos = out
                out += 1
                code = 1
        i += 1
    dst[code_pos] = code
    return out
