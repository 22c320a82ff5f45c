"""What the live-readings screen shows, kept apart from the screen: recent revolutions, the
reading being taken, its progress and time left.  Plain Python (the averaging itself is
``runtrue.readings.vector_average``), so it can be tested without a terminal.

A reading is *taken* over ``target_revs`` usable revolutions, either when the user asks or
automatically once the readings have settled (speed and 1x vector steady).
"""

from __future__ import annotations

import math
import time
from collections import deque
from collections.abc import Callable
from typing import Any

from runtrue.protocol.admit import counts, why_left_out
from runtrue.tui.steady import Steadiness, judge_steadiness


class LiveState:
    """Revolutions arriving from the meter, and an optional reading being accumulated."""

    def __init__(self, recent_revs: int = 48, clock: Callable[[], float] = time.monotonic) -> None:
        self.recent: deque[Any] = deque(maxlen=recent_revs)  # usable revolutions only
        self.seen: deque[Any] = deque(maxlen=400)  # every revolution, flagged ones too
        self.clock = clock
        self.total_revs = 0
        self.unusable_revs = 0
        self.lost_frames = 0
        self.target_revs = 0
        self.collecting = False
        self.waiting_for_steady = False
        self.collected: list[Any] = []
        self.started_at = 0.0
        self._rate_window: deque[float] = deque(maxlen=40)
        self.done: Any = None  # the Reading when complete
        self.min_epoch = 0  # batches from before the rotor last changed are ignored
        self.last_flags: list[str] = []  # why the last revolution was left out ("missing pulse", ...)
        self.last_rev_at = -1.0  # clock time of the last revolution (any), -1 before the first
        self.refused_while_taking = 0  # flagged revolutions since the reading was asked for
        self.info: Any = None  # the meter's INFO: a taken reading is then the joint fit of its revolutions

    # -- feeding ----------------------------------------------------------------------------------
    def reset(self, min_epoch: int | None = None) -> None:
        """Forget the recent revolutions (the rotor changed); keep counters."""
        self.recent.clear()
        self.seen.clear()
        self.cancel()
        self.done = None
        if min_epoch is not None:
            self.min_epoch = min_epoch

    def add(self, revs: list[Any], lost_frames: int = 0, epoch: int = 0) -> None:
        if epoch < self.min_epoch:
            return
        now = self.clock()
        self.lost_frames = lost_frames
        if revs:
            self.last_rev_at = now
        for rev in revs:
            self.total_revs += 1
            self.seen.append(rev)
            self._rate_window.append(now)
            if not counts(rev):
                self.unusable_revs += 1
                if self.busy:
                    self.refused_while_taking += 1
                self.last_flags = why_left_out(rev)
                continue
            self.recent.append(rev)
            if self.waiting_for_steady and self.steadiness().steady:
                self.waiting_for_steady = False
                self.collecting = True
                self.started_at = now
            if self.collecting:
                self.collected.append(rev)
                if len(self.collected) >= self.target_revs:
                    self._finish()

    def start_taking(self, target_revs: int, *, when_steady: bool = False) -> None:
        """Begin a reading of ``target_revs`` revolutions (now, or once settled)."""
        self.target_revs = max(1, int(target_revs))
        self.collected = []
        self.done = None
        self.refused_while_taking = 0
        self.collecting = not when_steady
        self.waiting_for_steady = when_steady
        self.started_at = self.clock()

    def cancel(self) -> None:
        self.collecting = False
        self.waiting_for_steady = False
        self.collected = []

    def _finish(self) -> None:
        from runtrue.readings import vector_average

        self.collecting = False
        self.done = vector_average(self.collected[: self.target_revs], info=self.info)

    # -- showing ----------------------------------------------------------------------------------
    @property
    def busy(self) -> bool:
        return self.collecting or self.waiting_for_steady

    def revs_per_s(self) -> float:
        w = self._rate_window
        if len(w) < 2 or w[-1] <= w[0]:
            speed = self.speed_rpm()
            return speed / 60.0 if speed > 0 else math.nan
        return (len(w) - 1) / (w[-1] - w[0])

    def progress(self) -> tuple[int, int, float]:
        """(revolutions averaged, target, seconds left)."""
        n = len(self.collected)
        rate = self.revs_per_s()
        left = (self.target_revs - n) / rate if rate and rate > 0 and math.isfinite(rate) else math.nan
        return n, self.target_revs, left

    def speed_rpm(self) -> float:
        if not self.recent:
            return math.nan
        return float(self.recent[-1].speed_rpm)

    def n_channels(self) -> int:
        return len(self.recent[-1].h1) if self.recent else 0

    def scatter(self, channel: int) -> list[complex]:
        return [complex(r.h1[channel]) for r in self.recent if channel < len(r.h1)]

    def window_reading(self) -> Any:
        """The vector average of the recent revolutions (what the screen shows as 'now')."""
        if not self.recent:
            return None
        from runtrue.readings import vector_average

        return vector_average(list(self.recent)[-16:])

    def steadiness(self) -> Steadiness:
        return judge_steadiness(list(self.recent))
