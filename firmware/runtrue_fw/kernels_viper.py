"""Sample-path kernels for the board: MicroPython viper versions of `kernels.py`.

Same loops, same integer operations as `kernels.py` (the tests run both, and this file's code
under CPython with the decorators replaced by the identity, against basis.reference_sums).
Viper integers are machine words (32-bit on the RP2040): kernels.py's docstring shows every
intermediate fits 31 bits.  The WebAssembly build of MicroPython rejects these decorators at
compile time (SyntaxError), and CPython has no `micropython` module (ImportError): `meter.py`
imports this module inside try/except and falls back to `kernels`.  Nothing here allocates.
"""

import micropython


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
def copy_wrapped(src: ptr16, dst: ptr16, p: ptr32):
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


@micropython.viper
def rev_sums(ring: ptr16, table: ptr16, p: ptr32, out: ptr8):
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


@micropython.viper
def crc32_into(buf: ptr8, n: int, ctab: ptr16) -> int:
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


@micropython.viper
def cobs_encode_into(src: ptr8, n: int, dst: ptr8) -> int:
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
                if i + 1 == n:
                    return out
                code_pos = out
                out += 1
                code = 1
        i += 1
    dst[code_pos] = code
    return out
