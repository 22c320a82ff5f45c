"""Where the vibration is: running-speed orders, below 1x, and everything else, from a raw capture.

The velocity power spectrum of a Hann-windowed block (as in :mod:`runtrue.diagnosis.severity`,
Parseval with the window's noise power gain divided out) is split over the severity band into
the bins of each running-speed order k x f1 (the Hann main lobe: +-2 bins, F. J. Harris, "On the
use of windows for harmonic analysis with the discrete Fourier transform", Proc. IEEE 66(1),
1978, table 1), the bins below the 1x lobe (sub-synchronous) and the rest (non-synchronous).
Velocity, because severity is judged in velocity over the same band (ISO 20816-1:2016, 5.2): a
share here is a share of what the severity value is made of.

With the mains frequency given, the lobes of its first four multiples that are not on an order
are counted apart as electrical (a motor's magnetic pull vibrates at twice the line frequency:
common practice), so that hum is neither taken for a bearing nor for a rub.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from runtrue.diagnosis.severity import band_hz, hann_window
from runtrue.readings.units import STANDARD_GRAVITY_MS2

LOBE_BINS = 2            # Hann main lobe half-width, bins
MIN_BINS_PER_ORDER = 5   # orders closer than this many bins cannot be told apart


@dataclass(frozen=True)
class OrderContent:
    speed_rpm: float
    band_hz: tuple[float, float]
    total_mm_s_rms: float
    orders_mm_s_rms: list[tuple[int, float]]     # (k, velocity rms of order k) inside the band
    sub_sync_mm_s_rms: float
    non_sync_mm_s_rms: float
    electrical_mm_s_rms: float = 0.0
    line_hz: float = 0.0

    def _share(self, v: float) -> float:
        return (v * v) / (self.total_mm_s_rms ** 2) if self.total_mm_s_rms > 0 else 0.0

    @property
    def one_x_share(self) -> float:
        one = dict(self.orders_mm_s_rms).get(1, 0.0)
        return self._share(one)

    @property
    def sync_share(self) -> float:
        return sum(self._share(v) for _, v in self.orders_mm_s_rms)

    @property
    def sub_sync_share(self) -> float:
        return self._share(self.sub_sync_mm_s_rms)

    @property
    def non_sync_share(self) -> float:
        return self._share(self.non_sync_mm_s_rms)

    @property
    def electrical_share(self) -> float:
        return self._share(self.electrical_mm_s_rms)

    def shares(self) -> dict[str, float]:
        """The shares :func:`runtrue.diagnosis.verdict.judge` takes."""
        return {"one_x": self.one_x_share, "non_sync": self.non_sync_share, "sub_sync": self.sub_sync_share,
                "sync": self.sync_share, "electrical": self.electrical_share}


def order_content(samples_g: Sequence[float] | np.ndarray, rate_hz: float, speed_rpm: float,
                  band: tuple[float, float] | None = None, line_hz: float = 0.0) -> OrderContent:
    """Split the band's velocity mean square into orders, electrical (``line_hz`` > 0: its
    multiples 1-4), sub-synchronous and non-synchronous."""
    x = np.asarray(samples_g, dtype=float)
    n = len(x)
    if n < 64:
        raise ValueError("an order analysis needs at least 64 samples: capture more frames")
    if not (math.isfinite(speed_rpm) and speed_rpm > 0):
        raise ValueError("no running speed for the capture: is the reference mark seen?")
    lo, hi = band if band is not None else band_hz(speed_rpm)
    hi = min(hi, 0.45 * rate_hz)                 # the anti-alias filter's region is left out
    f1 = speed_rpm / 60.0
    df = rate_hz / n
    if f1 / df < MIN_BINS_PER_ORDER:
        need = int(math.ceil(MIN_BINS_PER_ORDER * rate_hz / f1))
        raise ValueError(f"the capture is too short to separate the orders at {speed_rpm:.0f} rpm: "
                         f"capture at least {need} frames (or a lower sample rate)")
    w = hann_window(n)
    xf = np.fft.rfft((x - x.mean()) * w)
    freq = np.fft.rfftfreq(n, 1.0 / rate_hz)
    inside = (freq >= lo) & (freq <= hi) & (freq > 0)
    v = np.zeros(len(freq))
    v[inside] = np.abs(xf[inside] * STANDARD_GRAVITY_MS2 / (2.0 * np.pi * freq[inside])) ** 2
    weight = np.where(freq == rate_hz / 2.0, 1.0, 2.0)
    ms = weight * v / (n * float(np.sum(w * w))) * 1e6      # (mm/s)^2 per bin
    used = np.zeros(len(freq), dtype=bool)
    orders: list[tuple[int, float]] = []
    k = 1
    while k * f1 <= hi + LOBE_BINS * df:
        sel = (np.abs(freq - k * f1) <= LOBE_BINS * df + 1e-9) & inside
        used |= sel
        if k * f1 >= lo - LOBE_BINS * df:
            orders.append((k, math.sqrt(float(ms[sel].sum()))))
        k += 1
    elec = np.zeros(len(freq), dtype=bool)
    if line_hz and line_hz > 0:
        for mult in range(1, 5):
            elec |= np.abs(freq - mult * line_hz) <= LOBE_BINS * df + 1e-9
        elec &= inside & ~used
    sub = inside & ~used & ~elec & (freq < f1)
    non = inside & ~used & ~elec & (freq > f1)
    return OrderContent(float(speed_rpm), (float(lo), float(hi)), math.sqrt(float(ms[inside].sum())), orders,
                        math.sqrt(float(ms[sub].sum())), math.sqrt(float(ms[non].sum())),
                        math.sqrt(float(ms[elec].sum())), float(line_hz or 0.0))
