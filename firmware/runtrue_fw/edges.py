"""Reference-edge logic: debounce, glitch and extra-pulse rejection, missing pulses, speed jumps.

Edge positions are ints on the sample timebase in 1/256 sample ("q8"), modulo 2**30, so every
value and every difference stays a MicroPython small int (no long-int allocation on a 32-bit
port).  Differences are taken wrap-safe (`wrap_diff_q8`), valid while the two positions are
less than 2**29 q8 (2**21 samples; 524 s at 4 kHz) apart.

Rules (firmware/PROTOCOL.md, REV flags; the thresholds are common practice for once-per-rev
tachometer inputs, not from a published source):

* An edge less than `debounce_q8` (4 samples) after the last accepted edge, or less than half
  the running period after it, is rejected (counted in `rejected`) and flags the revolution it
  falls in EXTRA_PULSE.  A glitch is never allowed to end a revolution early.
* A revolution of 1.5x the running period or more is MISSING_PULSE (a pulse was missed); the
  running period is kept.  Two such revolutions in a row that agree within 10 % mean the speed
  really changed: the running period follows them.
* A revolution whose period differs from the running period by more than 10 % is SPEED_JUMP;
  the running period follows it.
* The first revolution after a (re)start has no running period: it is FIRST and unchecked.

No revolution is averaged or merged here: each one is reported with its flags.
"""

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

Q8_MASK = const(0x3FFFFFFF)    # positions are modulo 2**30
_Q8_HALF = const(0x20000000)

F_MISSING_PULSE = const(0x0001)
F_EXTRA_PULSE = const(0x0002)
F_SPEED_JUMP = const(0x0004)
F_FIRST = const(0x0020)

DEBOUNCE_Q8 = const(4 * 256)


def wrap_diff_q8(a: int, b: int) -> int:
    """a - b for positions modulo 2**30, in [-2**29, 2**29).  Small ints only."""
    d = (a - b) & Q8_MASK
    if d >= _Q8_HALF:
        d = d - Q8_MASK - 1
    return d


class EdgeTracker:
    """Turns the stream of reference edges into revolutions with flags.

    `edge(pos_q8)` returns True when the edge was accepted and completed a revolution; that
    revolution is then in `rev_start_q8`, `rev_end_q8`, `rev_period_q8`, `rev_flags`.
    """

    def __init__(self, debounce_q8: int = DEBOUNCE_Q8) -> None:
        self.debounce_q8 = debounce_q8
        self.rejected = 0
        self.rev_start_q8 = 0
        self.rev_end_q8 = 0
        self.rev_period_q8 = 0
        self.rev_flags = 0
        self.restart()

    def restart(self) -> None:
        """Forget the reference (after START, or when it has been lost for a long time)."""
        self.have_edge = False
        self.last_q8 = 0
        self.ref_q8 = 0          # running period; 0 = unknown
        self._prev_q8 = 0
        self._prev_missing = False
        self._open_flags = 0

    def edge(self, pos_q8: int) -> bool:
        if not self.have_edge:
            self.have_edge = True
            self.last_q8 = pos_q8
            self._open_flags = 0
            return False
        gap = wrap_diff_q8(pos_q8, self.last_q8)
        ref = self.ref_q8
        if gap < self.debounce_q8 or (ref > 0 and gap < (ref >> 1)):
            self.rejected += 1
            self._open_flags |= F_EXTRA_PULSE
            return False
        flags = self._open_flags
        if ref == 0:
            flags |= F_FIRST
            self.ref_q8 = gap
            self._prev_missing = False
        elif gap >= ref + (ref >> 1):
            flags |= F_MISSING_PULSE
            prev = self._prev_q8
            if self._prev_missing and abs(gap - prev) <= prev // 10:
                self.ref_q8 = gap
            self._prev_missing = True
        else:
            if abs(gap - ref) > ref // 10:
                flags |= F_SPEED_JUMP
            self.ref_q8 = gap
            self._prev_missing = False
        self._prev_q8 = gap
        self.rev_start_q8 = self.last_q8
        self.rev_end_q8 = pos_q8
        self.rev_period_q8 = gap
        self.rev_flags = flags
        self.last_q8 = pos_q8
        self._open_flags = 0
        return True
