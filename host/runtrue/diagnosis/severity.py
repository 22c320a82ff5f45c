"""Vibration severity: broadband velocity RMS and the evaluation zones A-D.

Sources (zone boundary values are quoted from memory and must be checked against the printed
standards before they are relied on; the tests pin the values below, not the standards):

* ISO 20816-1:2016, *Mechanical vibration — Measurement and evaluation of machine vibration —
  Part 1: General guidelines*, clause 6.2 (evaluation zones A to D: A newly commissioned, B
  acceptable for unrestricted long-term operation, C unsatisfactory for long-term continuous
  operation, D severe enough to cause damage).
* ISO 20816-3:2022, *Part 3: Industrial machines with a power rating above 15 kW and operating
  speeds between 120 r/min and 30 000 r/min*, Annex A, Table A.1 (machine group 1, rated power
  above 300 kW) and Table A.2 (group 2, 15 kW to 300 kW), rigid and flexible supports; r.m.s.
  velocity over 10 Hz to 1 000 Hz (2 Hz to 1 000 Hz below 600 r/min).
* For small machines (up to 15 kW), which ISO 20816-3 does not cover, the machine classes of the
  older ISO 10816-1:1995, Annex B, Table B.1 (class I: small machines up to 15 kW; class II:
  medium machines 15 kW to 75 kW, or up to 300 kW on special foundations; class III: large
  machines on rigid foundations; class IV: large machines on soft foundations).

Velocity from acceleration: for a sinusoid of frequency f, v = a / (2 pi f) (harmonic motion;
see :mod:`runtrue.readings.units`).  The broadband value integrates the spectrum in the
frequency domain: each FFT bin's acceleration is divided by j 2 pi f, bins outside the band are
dropped, and Parseval's theorem gives the RMS (A. V. Oppenheim and R. W. Schafer, *Discrete-Time
Signal Processing*, 3rd ed., 2010, section 8.5 (from memory)).  A Hann window is applied and its
noise power gain is divided out, so the RMS of broadband content is right; a single tone between
bins is within the window's scalloping loss for power (below 0.3 dB after the noise-gain
correction, since the tone's power spreads over neighbouring bins that are all summed).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from runtrue.diagnosis.zones import ZONE_MEANING, ZoneTable, zone_table
from runtrue.readings.units import STANDARD_GRAVITY_MS2


def suggest_class(power_kw: float, flexible_support: bool = False) -> str:
    """The zone table to use for a machine of ``power_kw`` (see the module docstring)."""
    p = float(power_kw)
    if not math.isfinite(p) or p <= 0.0:
        raise ValueError(f"rated power must be a positive number of kW, not {power_kw!r}")
    if p <= 15.0:
        return "class-I"
    if p <= 300.0:
        return "group2-flexible" if flexible_support else "group2-rigid"
    return "group1-flexible" if flexible_support else "group1-rigid"


def band_hz(speed_rpm: float) -> tuple[float, float]:
    """Measurement band of ISO 20816-3 for a machine speed: 10-1000 Hz, 2-1000 Hz below 600 rpm."""
    return (2.0, 1000.0) if speed_rpm < 600.0 else (10.0, 1000.0)


def order_velocity_rms_mm_s(orders_g_pk: Sequence[complex], speed_rpm: float) -> float:
    """Velocity RMS (mm/s) of the running-speed orders 1x, 2x, ... given as g peak phasors.

    Each order k is a sinusoid at k*f (f = speed_rpm / 60): v_pk = a_pk / (2 pi k f); the
    orders are uncorrelated sinusoids, so their mean squares add: RMS = sqrt(sum v_pk^2 / 2).
    """
    f_hz = float(speed_rpm) / 60.0
    if not math.isfinite(f_hz) or f_hz <= 0.0:
        raise ValueError(f"speed must be a positive rpm, not {speed_rpm!r}")
    total = 0.0
    for k, a in enumerate(orders_g_pk, start=1):
        v_pk_mm_s = abs(complex(a)) * STANDARD_GRAVITY_MS2 / (2.0 * math.pi * k * f_hz) * 1000.0
        total += v_pk_mm_s * v_pk_mm_s / 2.0
    return math.sqrt(total)


@dataclass(frozen=True)
class Spectrum:
    """One-sided amplitude spectrum of a block of acceleration samples."""

    freq_hz: np.ndarray
    accel_g_pk: np.ndarray       # peak amplitude of a sinusoid at each bin (Hann, coherent gain corrected)
    velocity_mm_s_pk: np.ndarray
    window: str = "Hann"

    def orders(self, speed_rpm: float) -> list[tuple[int, float]]:
        """(k, frequency) of the running-speed orders inside the spectrum."""
        f = speed_rpm / 60.0
        top = float(self.freq_hz[-1]) if len(self.freq_hz) else 0.0
        return [(k, k * f) for k in range(1, 64) if k * f <= top]


def hann_window(n: int) -> np.ndarray:
    # Periodic Hann window, w[i] = 0.5 - 0.5 cos(2 pi i / n) (F. J. Harris, "On the use of windows
    # for harmonic analysis with the discrete Fourier transform", Proc. IEEE 66(1), 1978).
    i = np.arange(n)
    return 0.5 - 0.5 * np.cos(2.0 * np.pi * i / n)


def spectrum(samples_g: Sequence[float] | np.ndarray, rate_hz: float) -> Spectrum:
    """Hann-windowed amplitude spectrum (g peak and mm/s peak per bin), DC removed."""
    x = np.asarray(samples_g, dtype=float)
    n = len(x)
    if n < 16:
        raise ValueError("a spectrum needs at least 16 samples")
    if not math.isfinite(rate_hz) or rate_hz <= 0.0:
        raise ValueError(f"sample rate must be positive, not {rate_hz!r}")
    w = hann_window(n)
    xf = np.fft.rfft((x - x.mean()) * w)
    freq = np.fft.rfftfreq(n, 1.0 / rate_hz)
    amp = 2.0 * np.abs(xf) / w.sum()           # coherent gain of the window divided out
    amp[0] = 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        vel = np.where(freq > 0, amp * STANDARD_GRAVITY_MS2 / (2.0 * np.pi * freq) * 1000.0, 0.0)
    return Spectrum(freq, amp, vel)


def broadband_velocity_rms_mm_s(samples_g: Sequence[float] | np.ndarray, rate_hz: float,
                                band: tuple[float, float] = (10.0, 1000.0)) -> float:
    """Velocity RMS (mm/s) of acceleration samples (g) over ``band``, by integration in frequency.

    Parseval with the Hann window's noise power gain (sum w^2) divided out, so the value is the
    RMS the same band-limited velocity would have in the time domain.
    """
    x = np.asarray(samples_g, dtype=float)
    n = len(x)
    if n < 16:
        raise ValueError("a severity value needs at least 16 samples")
    lo, hi = band
    if not (0.0 <= lo < hi):
        raise ValueError(f"band must be low < high, not {band!r}")
    w = hann_window(n)
    xf = np.fft.rfft((x - x.mean()) * w)
    freq = np.fft.rfftfreq(n, 1.0 / rate_hz)
    inside = (freq >= lo) & (freq <= hi) & (freq > 0)
    a_ms2 = xf[inside] * STANDARD_GRAVITY_MS2
    v = a_ms2 / (2.0 * np.pi * freq[inside])
    # one-sided power: every bin but DC and Nyquist stands for two
    weight = np.where(freq[inside] == rate_hz / 2.0, 1.0, 2.0)
    mean_square = float(np.sum(weight * np.abs(v) ** 2)) / (n * float(np.sum(w * w)))
    return math.sqrt(mean_square) * 1000.0


@dataclass(frozen=True)
class Severity:
    velocity_rms_mm_s: float
    zone: str
    table: ZoneTable

    @property
    def meaning(self) -> str:
        return ZONE_MEANING[self.zone]

    def line(self) -> str:
        """One line for a screen or report."""
        return (f"{self.velocity_rms_mm_s:.2f} mm/s rms: zone {self.zone} ({self.meaning}); "
                f"{self.table.title}, {self.table.source}")


def assess(velocity_rms_mm_s: float, machine_class: str) -> Severity:
    table = zone_table(machine_class)
    return Severity(float(velocity_rms_mm_s), table.zone(velocity_rms_mm_s), table)
