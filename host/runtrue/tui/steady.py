"""Is the machine steady enough to take a reading?  A thin adapter over
``runtrue.readings.steadiness`` (speed and 1x vector both settled) giving the live screen one
small value to draw: steady or not, a 0..1 score, and the reason in words.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class Steadiness:
    steady: bool
    score: float  # share of the checks (speed, each channel's vector) that are settled
    reason: str  # what is not settled yet, in words ("speed still changing ...")


def judge_steadiness(revs: Sequence[Any], window: int = 8) -> Steadiness:
    from runtrue.readings import steadiness

    s = steadiness(list(revs), window=window)
    checks = [bool(s.speed_steady)] + [bool(v) for v in s.vector_steady]
    score = sum(checks) / len(checks) if s.vector_steady else 0.0
    return Steadiness(bool(s.steady), 1.0 if s.steady else score, str(s.reason))
