"""Synthetic revolutions for the readings tests."""

from __future__ import annotations

import numpy as np

from runtrue.protocol.messages import Revolution


def make_revs(
    truth: list[complex],
    n: int,
    sigma_g: float,
    rng: np.random.Generator,
    *,
    speed_rpm: float = 3000.0,
    speed_sd_rpm: float = 0.0,
    flags: list[int] | None = None,
    elongation: float = 1.0,
) -> list[Revolution]:
    """``n`` revolutions scattered about ``truth`` (one vector per channel) with circular
    Gaussian noise of ``sigma_g`` per component (times ``elongation`` along the real axis)."""
    revs = []
    mask = (1 << len(truth)) - 1
    for i in range(n):
        h1 = [
            t + complex(rng.normal(0, sigma_g * elongation), rng.normal(0, sigma_g)) for t in truth
        ]
        speed = speed_rpm + rng.normal(0, speed_sd_rpm) if speed_sd_rpm else speed_rpm
        revs.append(
            Revolution(
                rev=i,
                period_us=60e6 / speed,
                n_samples=100,
                flags=flags[i] if flags else 0,
                channel_mask=mask,
                h1=h1,
                h2=[0j] * len(truth),
                rms_g=[abs(t) / np.sqrt(2) for t in truth],
            )
        )
    return revs
