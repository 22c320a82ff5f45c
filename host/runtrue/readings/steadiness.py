"""Is the machine steady enough to take a reading?  Speed and vector both settled.

The rule (common practice made explicit; the thresholds are ours): look at the last
``window`` usable revolutions (8 by default) and split them into an older and a newer half.

* **speed settled**: the two halves' mean speeds differ by at most ``speed_tol`` of the mean
  (1 % by default) - a machine still running up or coasting down fails this;
* **vector settled**, for every channel: the two halves' mean 1x vectors differ by no more
  than the larger of (a) ``k_noise`` (3) times the combined standard deviation of the two means,
  ``sqrt(s_old^2 + s_new^2)`` - a difference the scatter alone would explain - (b) ``rel_tol``
  (5 %) of the mean amplitude, and (c) ``floor_g`` (0.001 g), below which nothing matters.

Steady means both hold.  Warm-up drift, a weight still settling or a belt still slipping shows
as a difference between the halves larger than the scatter explains.
"""

from __future__ import annotations

import collections
import math
from dataclasses import dataclass

import numpy as np

from runtrue.protocol.admit import counts
from runtrue.protocol.messages import Revolution
from runtrue.readings.average import spread_of_mean


@dataclass(frozen=True)
class Steadiness:
    steady: bool
    speed_steady: bool
    vector_steady: list[bool]
    n_revs: int
    reason: str


def steadiness(
    revs: list[Revolution],
    *,
    window: int = 8,
    speed_tol: float = 0.01,
    k_noise: float = 3.0,
    rel_tol: float = 0.05,
    floor_g: float = 0.001,
) -> Steadiness:
    """Judge the last ``window`` usable revolutions of ``revs`` (see the module doc)."""
    if window < 4:
        raise ValueError("the window needs at least 4 revolutions (two halves of two)")
    usable = [r for r in revs if counts(r)]
    if usable:
        usable = [r for r in usable if r.channel_mask == usable[-1].channel_mask]
    recent = usable[-window:]
    if len(recent) < window:
        return Steadiness(False, False, [], len(recent), f"waiting for {window - len(recent)} more usable revolution(s)")
    half = window // 2
    old, new = recent[:half], recent[-half:]
    speed_old = float(np.mean([r.speed_rpm for r in old]))
    speed_new = float(np.mean([r.speed_rpm for r in new]))
    speed_mean = (speed_old + speed_new) / 2
    speed_ok = abs(speed_new - speed_old) <= speed_tol * speed_mean
    vec_ok: list[bool] = []
    worst = ""
    for i, ch in enumerate(recent[0].channels):
        z_old = np.array([r.h1[i] for r in old])
        z_new = np.array([r.h1[i] for r in new])
        diff = abs(z_new.mean() - z_old.mean())
        noise = math.hypot(spread_of_mean(z_old), spread_of_mean(z_new))
        amp = abs(np.concatenate([z_old, z_new]).mean())
        allowed = max(k_noise * noise, rel_tol * amp, floor_g)
        ok = diff <= allowed
        vec_ok.append(ok)
        if not ok and not worst:
            worst = f"channel {ch} vector still changing ({diff:.4f} g between halves, {allowed:.4f} g allowed)"
    if not speed_ok:
        reason = f"speed still changing ({speed_old:.1f} -> {speed_new:.1f} rpm)"
    elif worst:
        reason = worst
    else:
        reason = "steady"
    return Steadiness(speed_ok and all(vec_ok), speed_ok, vec_ok, len(recent), reason)


class SteadinessDetector:
    """Feed revolutions one by one; ask :meth:`state` whenever."""

    def __init__(self, window: int = 8, **limits: float) -> None:
        self.window = window
        self.limits = limits
        self._revs: collections.deque[Revolution] = collections.deque(maxlen=window)

    def add(self, rev: Revolution) -> Steadiness:
        if counts(rev):
            self._revs.append(rev)
        return self.state()

    def state(self) -> Steadiness:
        return steadiness(list(self._revs), window=self.window, **self.limits)
