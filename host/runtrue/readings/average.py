"""Vector averaging of revolutions into a reading (DEVELOPERS.md, "Readings").

Only revolutions that count (:func:`runtrue.protocol.admit.counts`: nothing flagged that
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

What the host's fit modelled travels with the reading: ``warnings`` (each distinct warning of the
revolutions averaged, e.g. line hum too close to an order, with how many revolutions had it)
and the front end's correction of the 1x (mean over the revolutions: ``fe_lag_deg`` taken out,
``fe_gain`` divided out, with their spread over the parts' tolerances).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from runtrue.protocol.admit import counts
from runtrue.protocol.messages import Revolution, line_hum_warning
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
    warnings: tuple[str, ...] = ()
    fe_lag_deg: float = 0.0
    fe_lag_tol_deg: float = 0.0
    fe_gain: float = 1.0
    fe_gain_tol: float = 0.0
    fit: str = "vector average"  # or "joint" (runtrue.readings.joint)

    @property
    def frontend_text(self) -> str:
        """One short line on the front-end correction ("" when none was made)."""
        if self.fe_gain == 1.0 and self.fe_lag_deg == 0.0:
            return ""
        return (f"front end corrected: lag {self.fe_lag_deg:.2f} +-{self.fe_lag_tol_deg:.2f} deg, "
                f"gain {self.fe_gain:.3f} +-{100 * self.fe_gain_tol:.1f} %")


class NoUsableRevolutions(ValueError):
    """Every revolution offered was flagged (or there were none)."""


def spread_of_mean(z: np.ndarray) -> float:
    """Standard deviation of the mean of complex observations ``z`` (see module doc)."""
    n = len(z)
    if n < 2:
        return math.inf
    return math.sqrt(float(np.sum(np.abs(z - z.mean()) ** 2)) / (n * (n - 1)))


def vector_average(revs: Iterable[Revolution], level: float = 0.95, info: Any = None) -> Reading:
    """Average the usable revolutions of ``revs`` into a :class:`Reading`.

    With the meter's ``info`` (``DeviceInfo``) and revolutions that carry their sums, the mean
    1x is the joint fit of all of them (:mod:`runtrue.readings.joint`: line hum fitted across
    the revolutions); the spread and confidence still come from the revolutions' scatter."""
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
    joint = None
    if info is not None:
        from runtrue.readings.joint import joint_1x  # start-up: loads the device layer's fit and numpy.linalg

        joint = joint_1x(kept, info)
    channels: list[ChannelReading] = []
    for i, ch in enumerate(kept[0].channels):
        z = h1[:, i]
        mean = complex(z.mean()) if joint is None else joint[0][i]
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
    seen: dict[tuple[float, int], list[float]] = {}
    for r in kept:
        for hz, k, gap in getattr(r, "line_collisions", ()):
            seen.setdefault((hz, k), []).append(gap)
    warnings = tuple(f"{line_hum_warning(hz, k, float(np.mean(g)))} ({len(g)} of {n} revolutions)"
                     for (hz, k), g in seen.items())
    if joint is not None:  # fitted across the revolutions: only what is still inseparable over their span
        warnings = tuple(f"{c.message} (over all {n} revolutions)" for c in joint[1])

    def mean_of(name: str, default: float) -> float:
        return float(np.mean([float(getattr(r, name, default)) for r in kept]))

    return Reading(
        speed_rpm=float(speeds.mean()),
        speed_sd_rpm=float(speeds.std(ddof=1)) if n > 1 else 0.0,
        n_revs=n,
        channels=channels,
        n_rejected=len(revs) - n,
        channel_mask=mask,
        warnings=warnings,
        fe_lag_deg=mean_of("fe_lag_deg", 0.0),
        fe_lag_tol_deg=mean_of("fe_lag_tol_deg", 0.0),
        fe_gain=mean_of("fe_gain", 1.0),
        fe_gain_tol=mean_of("fe_gain_tol", 0.0),
        fit="joint" if joint is not None else "vector average",
    )
