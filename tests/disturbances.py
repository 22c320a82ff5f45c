"""Synthetic revolutions for the revolution-model tests and the disturbance benchmark: a rotor whose speed changes at a
constant rate, its 1x (and 2x, 3x) scaling with speed squared, a non-synchronous line tone and
white noise, sampled into whole ADC codes; the meter's exact integer sums per revolution.

Everything here is generated from the stated model (no recorded data): the truth of each
revolution is its 1x at the revolution's mean speed.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass

import numpy as np

from runtrue.device import revmodel as rm
from runtrue_fw import basis as fwb


@dataclass(frozen=True)
class Machine:
    rate_hz: float = 4000.0
    speed_hz: float = 24.5  # at the start of the record
    change_per_rev: float = 0.0  # relative speed change per revolution (constant acceleration)
    amp_codes: float = 400.0  # 1x amplitude at speed_hz
    lag_deg: float = 30.0
    orders: tuple[tuple[int, complex], ...] = ()  # (k, vector in codes at speed_hz)
    line_codes: float = 0.0  # tone amplitude
    line_tone_hz: float = 100.0
    line_hz: float = 50.0  # the meter's line setting (0: off)
    sigma_codes: float = 0.0


@dataclass(frozen=True)
class SynthRev:
    geom: rm.RevGeometry
    sums: list[int]
    truth: complex  # 1x at the revolution's mean speed, codes
    first_sample: int


def synth(m: Machine, n_revs: int, rng: np.random.Generator, *, start: float | None = None,
          line_phase_rad: float | None = None) -> list[SynthRev]:
    """``n_revs`` consecutive revolutions, the first edge at sample ``start`` (default: 20 and a
    random fraction), the line tone at phase ``line_phase_rad`` at sample 0 (default: random)."""
    w0 = m.speed_hz / m.rate_hz
    alpha = m.change_per_rev * w0 * w0
    if start is None:
        start = 20.0 + float(rng.uniform())
    if line_phase_rad is None:
        line_phase_rad = 2 * math.pi * float(rng.uniform())

    def crossing(n: float) -> float:
        return 2 * n / (w0 + math.sqrt(w0 * w0 + 2 * alpha * n))

    edges = [start + crossing(n) for n in range(n_revs + 1)]
    t = np.arange(int(edges[-1]) + 2, dtype=float)
    tt = t - start
    angle = w0 * tt + 0.5 * alpha * tt * tt
    rel = (w0 + alpha * tt) / w0
    scale = rel * rel
    y = m.amp_codes * scale * np.cos(2 * math.pi * angle - math.radians(m.lag_deg))
    for k, z in m.orders:
        y += scale * (np.conj(z) * np.exp(2j * math.pi * k * angle)).real
    if m.line_codes:
        y += m.line_codes * np.cos(2 * math.pi * m.line_tone_hz / m.rate_hz * t + line_phase_rad)
    if m.sigma_codes:
        y += rng.normal(0.0, m.sigma_codes, len(t))
    codes = np.rint(y).astype(np.int64)
    e_q8 = [int(round(e * 256)) for e in edges]
    li = fwb.line_increment(m.line_hz, m.rate_hz) if m.line_hz else 0
    out = []
    for r in range(n_revs):
        e0, e1 = e_q8[r], e_q8[r + 1]
        first, end = -(-e0 // 256), -(-e1 // 256)
        geom = rm.RevGeometry(end - first, e1 - e0, first * 256 - e0, li)
        w_mean = 256.0 / (e1 - e0)
        truth = m.amp_codes * (w_mean / w0) ** 2 * cmath.exp(1j * math.radians(m.lag_deg))
        out.append(SynthRev(geom, [int(v) for v in rm.meter_sums(geom, codes[first:end])], truth, first))
    return out


def accels(revs: list[SynthRev]) -> list[float]:
    """Each revolution's acceleration from its neighbours' periods (the first and last use one)."""
    lengths = [r.geom.length_samples for r in revs]
    out = []
    for i, length in enumerate(lengths):
        prev = lengths[i - 1] if i > 0 else None
        nxt = lengths[i + 1] if i + 1 < len(lengths) else None
        out.append(rm.accel_from_periods(length, prev, nxt))
    return out
