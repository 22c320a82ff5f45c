"""The meter's analog front end and ADC, as the simulator models them.

* Anti-alias low-pass: first-order RC, ``H(f) = 1 / (1 + j f/fc)``, or second-order Butterworth,
  ``H(f) = 1 / (1 - (f/fc)^2 + j sqrt(2) f/fc)`` (standard filter responses, e.g. P. Horowitz and
  W. Hill, *The Art of Electronics*, 3rd ed., 2015, sections 1.7 and 6.2 (from memory)).
  The complex gain multiplies a component ``Re(P e^{j w t})``; the phase lag it adds at 1x is
  ``-arg H``.
* Ratiometric accelerometer into an N-bit ADC: ``code = round(zero_code + counts_per_g * a_g)``,
  clipped to the end stops ``0 .. 2**N - 1`` (an ideal mid-tread quantiser; a real SAR ADC adds
  differential non-linearity, not modelled).
"""

from __future__ import annotations

import math

import numpy as np


def lowpass_response(freq_hz: float | np.ndarray, corner_hz: float, order: int) -> complex | np.ndarray:
    """Complex gain of the anti-alias filter at ``freq_hz``."""
    x = np.asarray(freq_hz, dtype=float) / corner_hz
    if order == 1:
        h = 1.0 / (1.0 + 1j * x)
    elif order == 2:
        h = 1.0 / (1.0 - x * x + 1j * math.sqrt(2.0) * x)
    else:
        raise ValueError(f"front-end low-pass order must be 1 or 2, not {order}")
    return complex(h) if np.ndim(h) == 0 else h


def quantise(accel_g: np.ndarray, counts_per_g: float, zero_code: int, adc_bits: int) -> np.ndarray:
    """ADC codes (uint16) for accelerations in g: ideal rounding, clipped at the end stops."""
    top = (1 << adc_bits) - 1
    codes = np.rint(zero_code + counts_per_g * accel_g)
    np.clip(codes, 0, top, out=codes)
    return codes.astype(np.uint16)
