"""Vector averaging of revolutions into a reading (DEVELOPERS.md, "Readings").

Only revolutions that count (:func:`runtrue.readings.admit.counts`: nothing flagged that
disqualifies them, and not the FIRST after START) are averaged, and only those with the channel
set of the first that counts.  Per channel:

* ``mean``: the arithmetic mean of the revolutions' complex 1x vectors (g peak, phase lag);
  averaging vectors, not amplitudes, is what rejects noise that is not synchronous with the
  shaft (common practice);
* ``spread_g``: the standard deviation of the mean vector, ``sqrt(sum |z_i - zbar|^2 /
  (N (N-1)))``: the root-mean-square distance between the mean and the true vector that the
  scatter of the revolutions implies (sample variance of complex values, divisor N-1, over N);
  it falls as 1/sqrt(N);
* ``confidence_g``: the 95 % confidence radius for circular scatter (Victor and Mast's
  circular T^2, see :mod:`runtrue.readings.confidence`), ``spread_g * sqrt(F(2, 2N-2; 0.95))``;
  infinite below 2 revolutions.  ``ellipse`` holds Hotelling's T^2 ellipse, valid for any shape
  of scatter;
* ``scatter_g``: the standard deviation of the single revolutions about the mean,
  ``sqrt(sum |z_i - zbar|^2 / (N-1))`` (how much one revolution wanders; ``spread_g * sqrt(N)``);
* ``h2``: the mean 2x vector; ``rms_g``: the quadratic mean of the per-revolution RMS.

Speed: mean and sample standard deviation of the per-revolution speeds in rpm.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from runtrue.protocol.messages import Revolution
from runtrue.readings.admit import counts
from runtrue.readings.confidence import ConfidenceEllipse, confidence_ellipse, confidence_radius
from runtrue.readings.units import amp_phase


@dataclass(frozen=True)
class ChannelReading:
    """One pickup's averaged 1x reading (g peak, phase lag in degrees after the mark)."""

    channel: int
    mean: complex
    amp_g: float
    phase_deg: float
    spread_g: float
    confidence_g: float
    h2: complex
    rms_g: float
    ellipse: ConfidenceEllipse = field(repr=False, compare=False, default=ConfidenceEllipse(math.inf, math.inf, 0.0, 0.95))
    scatter_g: float = math.inf


@dataclass(frozen=True)
class Reading:
    """A vector average over ``n_revs`` usable revolutions (``n_rejected`` were left out)."""

    speed_rpm: float
    speed_sd_rpm: float
    n_revs: int
    channels: list[ChannelReading]
    n_rejected: int = 0
    channel_mask: int = 0


class NoUsableRevolutions(ValueError):
    """Every revolution offered was flagged (or there were none)."""


def spread_of_mean(z: np.ndarray) -> float:
    """Standard deviation of the mean of complex observations ``z`` (see module doc)."""
    n = len(z)
    if n < 2:
        return math.inf
    return math.sqrt(float(np.sum(np.abs(z - z.mean()) ** 2)) / (n * (n - 1)))


def vector_average(revs: Iterable[Revolution], level: float = 0.95) -> Reading:
    """Average the usable revolutions of ``revs`` into a :class:`Reading`."""
    revs = list(revs)
    usable = [r for r in revs if counts(r)]
    if not usable:
        raise NoUsableRevolutions(
            f"none of the {len(revs)} revolution(s) can be averaged (all flagged: missing or extra "
            "pulses, speed jumps, clipping, dropped samples, or the first after start)"
        )
    mask = usable[0].channel_mask
    kept = [r for r in usable if r.channel_mask == mask]
    n = len(kept)
    speeds = np.array([r.speed_rpm for r in kept])
    h1 = np.array([r.h1 for r in kept], dtype=complex)  # shape (n, channels)
    h2 = np.array([r.h2 for r in kept], dtype=complex)
    rms = np.array([r.rms_g for r in kept], dtype=float)
    channels: list[ChannelReading] = []
    for i, ch in enumerate(kept[0].channels):
        z = h1[:, i]
        mean = complex(z.mean())
        amp, phase = amp_phase(mean)
        ellipse = confidence_ellipse(z, level)
        spread = spread_of_mean(z)
        channels.append(
            ChannelReading(
                channel=ch,
                mean=mean,
                amp_g=amp,
                phase_deg=phase,
                spread_g=spread,
                confidence_g=confidence_radius(spread, n, level),
                h2=complex(h2[:, i].mean()),
                rms_g=float(math.sqrt(np.mean(rms[:, i] ** 2))),
                ellipse=ellipse,
                scatter_g=spread * math.sqrt(n) if n > 1 else math.inf,
            )
        )
    return Reading(
        speed_rpm=float(speeds.mean()),
        speed_sd_rpm=float(speeds.std(ddof=1)) if n > 1 else 0.0,
        n_revs=n,
        channels=channels,
        n_rejected=len(revs) - n,
        channel_mask=mask,
    )
