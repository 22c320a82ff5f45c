"""Reference-edge logic: debounce, glitch and extra-pulse rejection, missing pulses, speed jumps.

Edge positions are ints on the sample timebase in 1/256 sample ("q8"), modulo 2**30, so every
value and every difference stays a MicroPython small int (no long-int allocation on a 32-bit
port).  Differences are taken wrap-safe (`wrap_diff_q8`), valid while the two positions are
less than 2**29 q8 (2**21 samples; 524 s at 4 kHz) apart.

Rules (firmware/PROTOCOL.md, REV flags; the thresholds are common practice for once-per-rev
tachometer inputs, not from a published source).  "Agree" means within 10 %.

* An edge less than `debounce_q8` (4 samples) after the last accepted edge, or less than half
  the trusted period after it, is rejected (counted in `rejected`) and flags the revolution it
  falls in EXTRA_PULSE.  The trusted period is the running period when locked, the period
  locked before the disturbance when unlocked, and none after START (only the debounce
  applies until the first lock: the first turns may span a missed pulse).
* If a rejected edge comes within a fifth of the running period (plus the debounce) after the
  last accepted edge, that accepted edge may itself have been the glitch (a glitch just before
  the mark, then the real mark): `suspect_previous` is set and the revolution that ended there
  must be flagged EXTRA_PULSE too.  The Meter holds each revolution a quarter turn for this.
* Locked (the normal state): a revolution of 1.5x the running period or more is MISSING_PULSE
  and the running period is kept; a revolution that does not agree with the running period is
  SPEED_JUMP and unlocks; otherwise it is clean and becomes the running period.
* Unlocked (after START, after a speed jump, or after 8 agreeing MISSING_PULSE revolutions in
  a row, which can only be a real drop in speed): a revolution is clean, and locks, when it
  agrees with the period locked before the disturbance (a glitch, not a speed change), or when
  it and the revolution before it both agree with their predecessors (a new speed, confirmed
  twice).  Otherwise it is flagged: MISSING_PULSE if 1.5x the previous period or more, else
  SPEED_JUMP (which then also means "speed not yet confirmed").  The first revolution after
  START is FIRST.  So one glitch anywhere in a turn, or a missed pulse, never yields an
  unflagged revolution that is not exactly one real turn (tests/firmware/test_fw_edges.py,
  property test).  A second mark at a steady position in every turn, or a sensor missing every
  other pulse for good, is indistinguishable from twice or half the speed by timing alone; the
  reported speed then shows it.

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
        self.ref_q8 = 0          # running period (locked) or previous period (unlocked); 0 = none
        self.locked = False
        self.suspect_previous = False
        self._lock_q8 = 0        # the period locked before the last disturbance; 0 = none
        self._streak = 0         # unlocked: revolutions in a row agreeing with their predecessor
        self._missing_run = 0    # locked: agreeing MISSING_PULSE revolutions in a row
        self._prev_q8 = 0
        self._open_flags = 0

    def edge(self, pos_q8: int) -> bool:
        self.suspect_previous = False
        if not self.have_edge:
            self.have_edge = True
            self.last_q8 = pos_q8
            self._open_flags = 0
            return False
        gap = wrap_diff_q8(pos_q8, self.last_q8)
        ref = self.ref_q8
        # half a turn of the trusted period: the running one when locked, else the one locked
        # before the disturbance (none after START: the first turns may hold a missed pulse)
        half = (ref >> 1) if self.locked else (self._lock_q8 >> 1)
        if gap < self.debounce_q8 or gap < half:
            self.rejected += 1
            self._open_flags |= F_EXTRA_PULSE
            if ref == 0 or gap <= ref // 5 + self.debounce_q8:
                self.suspect_previous = True
            return False
        flags = self._open_flags
        if ref == 0:
            flags |= F_FIRST
            self.ref_q8 = gap
            self.locked = False
            self._lock_q8 = 0
            self._streak = 0
        elif self.locked:
            if gap >= ref + (ref >> 1):
                flags |= F_MISSING_PULSE
                prev = self._prev_q8
                if self._missing_run > 0 and abs(gap - prev) > prev // 10:
                    self._missing_run = 0
                self._missing_run += 1
                if self._missing_run >= 8:          # a real, lasting drop in speed
                    self.locked = False
                    self._lock_q8 = 0
                    self._streak = 0
                    self.ref_q8 = gap
            elif abs(gap - ref) > ref // 10:
                flags |= F_SPEED_JUMP
                self.locked = False
                self._lock_q8 = ref
                self._streak = 0
                self.ref_q8 = gap
            else:
                self._missing_run = 0
                self.ref_q8 = gap
        else:
            lock = self._lock_q8
            if lock > 0 and abs(gap - lock) <= lock // 10:
                self.locked = True
            elif abs(gap - ref) <= ref // 10:
                self._streak += 1
                if self._streak >= 2:
                    self.locked = True
                else:
                    flags |= F_SPEED_JUMP
            else:
                self._streak = 0
                flags |= F_MISSING_PULSE if gap >= ref + (ref >> 1) else F_SPEED_JUMP
            if self.locked:
                self._missing_run = 0
            self.ref_q8 = gap
        self._prev_q8 = gap
        self.rev_start_q8 = self.last_q8
        self.rev_end_q8 = pos_q8
        self.rev_period_q8 = gap
        self.rev_flags = flags
        self.last_q8 = pos_q8
        self._open_flags = 0
        return True
