"""Which device frames to keep, by their sequence numbers (firmware/PROTOCOL.md, "Framing":
16-bit sequence numbers, counted up by one per frame from 0 at power-on, wrapping at 65536).

Each checked frame gets one verdict:

* ``NEXT``: the number after the last kept one, or ahead of it by less than half the range
  (the frames in between were lost on the link; they are counted in ``lost_frames``);
* ``DUPLICATE``: the same number as the last kept frame: a frame delivered twice (a USB
  retransmission, a replayed buffer).  Dropped, counted in ``duplicates``;
* ``RESTART``: a step backwards that comes with the signs of a meter that started again:
  the number is back near 0 (at most ``RESTART_SEQ_MAX``, and more than that below the last
  one: after power-on the meter's first frames are numbered from 0), or the frame is an INFO or an ACK (the first things a restarted meter
  sends, answering the host's commands) after the link was silent for ``SILENCE_S``, or
  ``CONFIRM_FRAMES`` backward frames in a row that follow on from each other (a meter
  numbering from elsewhere is still a meter: its own numbers keep counting up).  Kept, the
  numbering is followed from there, counted in ``restarts``;
* ``STALE``: any other step backwards: an old frame arriving late or a stray repeat.  Dropped,
  counted in ``stale``; it is never taken for a new revolution.

Why not take every backward step as a restart: a stray old frame would then reset the
numbering, and the next genuine frame would look like a jump forward over "lost" frames; worse,
the old frame's revolution would be delivered twice.  Why confirm by a run of consecutive
numbers: it cannot be produced by one stray frame, and a real meter produces it within a few
revolutions.  The limits are our choices.
"""

from __future__ import annotations

SEQ_MODULO = 1 << 16
HALF = SEQ_MODULO // 2
#: A backward step to a number at most this is a meter that started again from 0.
RESTART_SEQ_MAX = 16
#: An INFO or ACK after this long without frames is a meter answering after a restart.
SILENCE_S = 1.0
#: This many backward frames, each following on from the one before, confirm new numbering.
CONFIRM_FRAMES = 3

NEXT = "next"
DUPLICATE = "duplicate"
RESTART = "restart"
STALE = "stale"


class SequenceTracker:
    """Verdicts on the sequence numbers of checked frames, in order of arrival."""

    def __init__(self) -> None:
        self.last: int | None = None
        self.last_t: float | None = None
        self.lost_frames = 0
        self.duplicates = 0
        self.restarts = 0
        self.stale = 0
        self._behind: list[int] = []  # consecutive backward numbers seen since the last kept frame

    def reset(self) -> None:
        """Forget the numbering (a reopened port: whatever comes next starts a new stream)."""
        self.last = None
        self.last_t = None
        self._behind = []

    def verdict(self, seq: int, *, answer: bool, now_s: float) -> str:
        """The verdict on a frame numbered ``seq``; ``answer`` is True for INFO and ACK frames;
        ``now_s`` a monotonic clock in seconds."""
        seq %= SEQ_MODULO
        last, last_t = self.last, self.last_t
        silent = last_t is None or now_s - last_t >= SILENCE_S
        if last is None:
            return self._keep(seq, now_s, NEXT)
        step = (seq - last) % SEQ_MODULO
        if step == 0:
            self.duplicates += 1
            return DUPLICATE
        if step < HALF:
            self.lost_frames += step - 1
            return self._keep(seq, now_s, NEXT)
        # A step backwards.
        near_zero = seq <= RESTART_SEQ_MAX and (last - seq) % SEQ_MODULO > RESTART_SEQ_MAX
        if near_zero or (answer and silent):
            self.restarts += 1
            return self._keep(seq, now_s, RESTART)
        if self._behind and (seq - self._behind[-1]) % SEQ_MODULO == 1:
            self._behind.append(seq)
        else:
            self._behind = [seq]
        if len(self._behind) >= CONFIRM_FRAMES:
            self.restarts += 1
            return self._keep(seq, now_s, RESTART)
        self.stale += 1
        return STALE

    def _keep(self, seq: int, now_s: float, verdict: str) -> str:
        self.last = seq
        self.last_t = now_s
        self._behind = []
        return verdict
