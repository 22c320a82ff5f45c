"""Raw-capture copy for the board: the MicroPython viper version of `capture.copy_frames`.

Same loop and integer operations as the portable one in capture.py (the tests run this file's
code under CPython with the decorator replaced by the identity).  `capture.py` imports this
module inside try/except (CPython has no `micropython` module; the WebAssembly port rejects
viper) and falls back to the portable loop.  Allocates nothing.
"""

import micropython


@micropython.viper
def copy_frames(ring: ptr16, body: ptr8, p: ptr32):
    n = p[0]
    nch = p[1]
    w = p[2]
    size = p[3]
    o = p[4]
    mask = size - 1
    i = 0
    while i < n:
        pos = (w + i) & mask
        c = 0
        while c < nch:
            v = ring[c * size + pos]
            body[o] = v & 255
            body[o + 1] = v >> 8
            o += 2
            c += 1
        i += 1
