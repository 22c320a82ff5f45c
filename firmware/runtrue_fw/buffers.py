"""Large buffers allocated in place, before anything else fragments the heap.

MicroPython's ``array(typecode, bytes(n))`` builds the bytes first and then copies them: twice the
buffer's size for a moment (a restart after a run could fail with MemoryError).  ``zeros`` sizes
the array from ``len()`` of a zero source and fills it, so only the array itself is allocated.
Importing and compiling modules leaves the heap in small pieces, so main.py takes the Meter's
ring first, right after boot, and hands it to the Meter (firmware/README.md, "Memory").
"""

from array import array

RING_FRAMES = 8192            # frames per channel in the Meter's ring (a power of two)


class _Zeros:
    """n zeros with a length: array() sizes itself from len() and fills in place."""

    def __init__(self, n: int) -> None:
        self.n = n

    def __len__(self) -> int:
        return self.n

    def __iter__(self):
        i = 0
        while i < self.n:
            yield 0
            i += 1


def zeros(typecode: str, n: int):
    """array(typecode) of n zeros, allocated once and in place."""
    return array(typecode, _Zeros(n))


def meter_ring(channels_max: int = 3):
    """The Meter's sample ring for `channels_max` channels (array('H'))."""
    return zeros("H", RING_FRAMES * channels_max)
