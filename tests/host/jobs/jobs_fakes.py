"""A linear rotor for workflow tests: readings are exactly H·(U0 + fitted unbalance) + optional noise.

Its influence matrix and initial unbalance are invented test numbers, not from any source.
"""

from __future__ import annotations

import cmath
import math
import random
from collections.abc import Sequence

from runtrue.jobs import RunReading, Weight
from runtrue.jobs.model import ChannelValue


class LinearRotor:
    """``n_pickups`` × ``n_planes`` linear system; ``reading(weights)`` as a meter would give it."""

    def __init__(
        self,
        influence: Sequence[Sequence[complex]],
        initial_gmm: Sequence[complex],
        speed_rpm: float,
        noise_g: float = 0.0,
        seed: int = 1,
    ) -> None:
        self.h = [list(r) for r in influence]
        self.u0 = list(initial_gmm)
        self.speed_rpm = speed_rpm
        self.noise_g = noise_g
        self.rng = random.Random(seed)

    def unbalance_gmm(self, weights: Sequence[Weight]) -> list[complex]:
        u = list(self.u0)
        for w in weights:
            u[w.plane - 1] += w.unbalance_gmm
        return u

    def reading(self, weights: Sequence[Weight]) -> RunReading:
        u = self.unbalance_gmm(weights)
        chans = []
        for row in self.h:
            z = sum((h * x for h, x in zip(row, u)), 0j)
            if self.noise_g:
                z += complex(self.rng.gauss(0, self.noise_g / math.sqrt(2)), self.rng.gauss(0, self.noise_g / math.sqrt(2)))
            chans.append(ChannelValue(mean=z, spread_g=self.noise_g, confidence_g=2.45 * self.noise_g))
        return RunReading(speed_rpm=self.speed_rpm, channels=tuple(chans), n_revs=50)


def polar(amp: float, deg: float) -> complex:
    return amp * cmath.exp(1j * math.radians(deg))
