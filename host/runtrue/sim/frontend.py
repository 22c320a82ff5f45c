"""The meter's analog front end and ADC, as the simulator models them.

* Anti-alias low-pass: the meter's two loaded RC sections (hardware/FRONTEND.md, "The circuit":
  sensor output resistance R1 with C1, then R2/C2 at the ADC pin), by nodal analysis
  ``H(jw) = 1 / (1 + jw a1 + (jw)^2 a2)`` with ``a1 = R1C1 + R1C2 + R2C2``, ``a2 = R1C1R2C2``;
  with a2 = 0 it is a single RC section ``1 / (1 + jw a1)`` (P. Horowitz and W. Hill, *The Art
  of Electronics*, 3rd ed., 2015, section 1.7 (from memory)).  The complex gain multiplies a
  component ``Re(P e^{j w t})``; the phase lag it adds at 1x is ``-arg H``.
* Ratiometric accelerometer into an N-bit ADC: ``code = round(zero_code + counts_per_g * a_g)``,
  clipped to the end stops ``0 .. 2**N - 1`` (an ideal mid-tread quantiser; a real SAR ADC adds
  differential non-linearity, not modelled; nor is the sensor's own saturation beyond its
  rated range).
"""

from __future__ import annotations

import math

import numpy as np

# hardware/FRONTEND.md design values: R1 = 32 kOhm, C1 = 4.7 nF, R2 = 1 kOhm, C2 = 1 nF.
METER_R1_OHM, METER_C1_F, METER_R2_OHM, METER_C2_F = 32e3, 4.7e-9, 1e3, 1e-9
METER_A1_S = METER_R1_OHM * METER_C1_F + METER_R1_OHM * METER_C2_F + METER_R2_OHM * METER_C2_F
METER_A2_S2 = METER_R1_OHM * METER_C1_F * METER_R2_OHM * METER_C2_F
METER_COUNTS_PER_G = 4096 * 0.1  # ratiometric sensor, 0.1 x supply per g, 12-bit ADC on the same supply


def single_rc_a1(corner_hz: float) -> float:
    """a1 of a single RC section with its -3 dB corner at ``corner_hz``."""
    return 1.0 / (2.0 * math.pi * corner_hz)


def lowpass_response(freq_hz: float | np.ndarray, a1_s: float, a2_s2: float = 0.0) -> complex | np.ndarray:
    """Complex gain of the anti-alias filter at ``freq_hz``."""
    s = 2j * math.pi * np.asarray(freq_hz, dtype=float)
    h = 1.0 / (1.0 + s * a1_s + s * s * a2_s2)
    return complex(h) if np.ndim(h) == 0 else h


def quantise(accel_g: np.ndarray, counts_per_g: float, zero_code: float, adc_bits: int) -> np.ndarray:
    """ADC codes (uint16) for accelerations in g: ideal rounding, clipped at the end stops."""
    top = (1 << adc_bits) - 1
    codes = np.rint(zero_code + counts_per_g * accel_g)
    np.clip(codes, 0, top, out=codes)
    return codes.astype(np.uint16)
