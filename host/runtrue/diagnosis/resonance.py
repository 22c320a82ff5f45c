"""Resonances from a run-up or coast-down: 1x amplitude and phase against speed.

A rotating unbalance m*e at speed w drives a force m*e*w^2; a single-degree-of-freedom support
(mass M, natural frequency wn, damping ratio z) answers with the displacement
X = (m e / M) r^2 / sqrt((1 - r^2)^2 + (2 z r)^2), r = w / wn, lagging the force by
atan2(2 z r, 1 - r^2): 90 deg at resonance, swinging through 180 deg across it (S. S. Rao,
*Mechanical Vibrations*, 5th ed., 2011, section 3.7 "Response of a damped system under rotating
unbalance" (from memory)).  The meter measures acceleration A = w^2 X; dividing the 1x by w^4
leaves the support's compliance times m*e, whose peak marks the natural frequency and whose
half-power width gives the damping (Q = fn / (f2 - f1), the half-power bandwidth method, ibid.
section 3.4 (from memory)).

Detection rule (common practice, not a standard): a peak of the normalised 1x that stands at least
``PEAK_RATIO`` above the lowest value on each side, with the phase moving at least
``PHASE_SWING_DEG`` across its half-power band, and whose measured 1x is at least ``MIN_SHARE``
of the largest 1x of the capture (at low speed the 1x is small and dividing by w^4 would turn
noise into peaks).  Balancing within 15 % of a resonance speed is
warned about (common practice; ISO 21940-11 asks for balancing at service speed and a rotor whose
response is dominated by a nearby resonance may not hold its balance when the speed changes).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

PEAK_RATIO = 1.5
MIN_SHARE = 0.1         # a peak whose 1x is below this share of the largest 1x seen is noise
PHASE_SWING_DEG = 60.0
NEAR_FRACTION = 0.15


@dataclass(frozen=True)
class Resonance:
    speed_rpm: float
    one_x_g: float          # 1x amplitude measured at the peak (g peak)
    phase_swing_deg: float  # phase change across the half-power band
    q: float                # quality factor from the half-power band (inf when not resolved)

    @property
    def damping_ratio(self) -> float:
        return 0.5 / self.q if self.q > 0 and math.isfinite(self.q) else 0.0


@dataclass(frozen=True)
class SpeedCurve:
    """1x against speed, binned and sorted: the data behind the plots."""

    speed_rpm: np.ndarray
    one_x_g: np.ndarray            # complex g peak, phase-lag convention
    n_per_bin: np.ndarray

    @property
    def amp_g(self) -> np.ndarray:
        return np.abs(self.one_x_g)

    @property
    def phase_deg(self) -> np.ndarray:
        return np.degrees(np.angle(self.one_x_g)) % 360.0


def speed_curve(speed_rpm: Sequence[float], one_x_g: Sequence[complex], bin_rpm: float | None = None) -> SpeedCurve:
    """Sort revolutions by speed and vector-average them in speed bins (default: 1 % of the top
    speed, at least 1 rpm)."""
    s = np.asarray(speed_rpm, dtype=float)
    z = np.asarray(one_x_g, dtype=complex)
    if s.shape != z.shape:
        raise ValueError("speeds and readings must have the same length")
    keep = np.isfinite(s) & (s > 0) & np.isfinite(z.real) & np.isfinite(z.imag)
    s, z = s[keep], z[keep]
    if len(s) == 0:
        raise ValueError("no revolutions with a speed: was the reference mark seen?")
    width = float(bin_rpm) if bin_rpm else max(1.0, 0.01 * float(s.max()))
    idx = np.floor(s / width).astype(int)
    bins = np.unique(idx)
    sp = np.array([s[idx == b].mean() for b in bins])
    zz = np.array([z[idx == b].mean() for b in bins])
    nn = np.array([int(np.sum(idx == b)) for b in bins])
    return SpeedCurve(sp, zz, nn)


def find_resonances(curve: SpeedCurve) -> list[Resonance]:
    """Resonances in a 1x-against-speed curve (see the module docstring for the rule)."""
    s = curve.speed_rpm
    if len(s) < 5:
        return []
    w = 2.0 * math.pi * s / 60.0
    c = curve.one_x_g / w ** 4                     # compliance x m e (phase of the 1x kept)
    mag = np.abs(c)
    if len(mag) >= 3:                              # light 3-point smoothing of the magnitude
        sm = mag.copy()
        sm[1:-1] = (mag[:-2] + 2.0 * mag[1:-1] + mag[2:]) / 4.0
    else:
        sm = mag
    phase = np.unwrap(np.angle(c))
    floor = MIN_SHARE * float(np.abs(curve.one_x_g).max())
    found: list[Resonance] = []
    for i in range(1, len(sm) - 1):
        if not (sm[i] >= sm[i - 1] and sm[i] > sm[i + 1]):
            continue
        if sm[i] < PEAK_RATIO * sm[: i + 1].min() or sm[i] < PEAK_RATIO * sm[i:].min():
            continue
        if abs(curve.one_x_g[i]) < floor:
            continue
        half = sm[i] / math.sqrt(2.0)
        lo = i
        while lo > 0 and sm[lo] > half:
            lo -= 1
        hi = i
        while hi < len(sm) - 1 and sm[hi] > half:
            hi += 1
        swing = abs(math.degrees(phase[hi] - phase[lo]))
        if swing < PHASE_SWING_DEG:
            continue
        f_lo = _cross(s, sm, lo, lo + 1, half) if sm[lo] <= half else math.nan
        f_hi = _cross(s, sm, hi - 1, hi, half) if sm[hi] <= half else math.nan
        q = s[i] / (f_hi - f_lo) if math.isfinite(f_lo) and math.isfinite(f_hi) and f_hi > f_lo else math.inf
        found.append(Resonance(float(s[i]), float(abs(curve.one_x_g[i])), swing, float(q)))
    return found


def _cross(s: np.ndarray, m: np.ndarray, a: int, b: int, level: float) -> float:
    """Speed where the magnitude crosses ``level`` between bins a and b (linear)."""
    if m[b] == m[a]:
        return float(s[a])
    t = (level - m[a]) / (m[b] - m[a])
    return float(s[a] + t * (s[b] - s[a]))


def near_resonance(resonances: Sequence[Resonance], balancing_rpm: float,
                   fraction: float = NEAR_FRACTION) -> Resonance | None:
    """The resonance within ``fraction`` of the balancing speed, if any (the nearest)."""
    near = [r for r in resonances if abs(balancing_rpm - r.speed_rpm) <= fraction * r.speed_rpm]
    return min(near, key=lambda r: abs(balancing_rpm - r.speed_rpm)) if near else None


def warning_text(r: Resonance, balancing_rpm: float) -> str:
    pct = 100.0 * (r.speed_rpm - balancing_rpm) / balancing_rpm
    where = "above" if pct > 0 else "below"
    return (f"Resonance at {r.speed_rpm:.0f} rpm, {abs(pct):.0f} % {where} the balancing speed "
            f"({balancing_rpm:.0f} rpm): a balance done here may not hold when the speed changes. "
            "Balance at a speed further from it if the machine allows, or stiffen/detune the support.")
