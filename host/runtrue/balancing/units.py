"""Unit conversions for balancing: mass, length, unbalance, and 1x vibration quantities.

Sources: the international yard and pound agreement (1959): 1 in = 25.4 mm exactly,
1 lb = 0.45359237 kg exactly, so 1 oz = 1/16 lb = 28.349523125 g; standard gravity
g_n = 9.80665 m/s^2 (CGPM 1901, ISO 80000-3).  Relations between acceleration, velocity and
displacement of a sinusoid at angular frequency w: v = a / (j*w), d = v / (j*w) (any vibration
text, e.g. Harris' *Shock and Vibration Handbook*, ch. 1).

Phase convention: a reading is ``amp * e^{+j*lag}`` (lag after the reference mark).  Velocity
lags acceleration by 90 deg and displacement lags it by 180 deg, so converting acceleration to
velocity ADDS 90 deg to the lag.
"""

from __future__ import annotations

import cmath
import math

from runtrue.balancing.forces import check_speed_rpm, shaft_speed_rad_s
from runtrue.balancing.model import BalancingError
from runtrue.readings.units import STANDARD_GRAVITY_MS2

G_PER_OZ = 28.349523125
MM_PER_IN = 25.4
GMM_PER_OZIN = G_PER_OZ * MM_PER_IN  # 720.0778...
#: Standard gravity, m/s^2 (the readings layer's constant, under the name this package uses).
STANDARD_GRAVITY_M_S2 = STANDARD_GRAVITY_MS2


def g_to_oz(mass_g: float) -> float:
    return mass_g / G_PER_OZ


def oz_to_g(mass_oz: float) -> float:
    return mass_oz * G_PER_OZ


def mm_to_in(length_mm: float) -> float:
    return length_mm / MM_PER_IN


def in_to_mm(length_in: float) -> float:
    return length_in * MM_PER_IN


def gmm_to_ozin(unbalance_gmm: float) -> float:
    return unbalance_gmm / GMM_PER_OZIN


def ozin_to_gmm(unbalance_ozin: float) -> float:
    return unbalance_ozin * GMM_PER_OZIN


# Each vibration unit: (kind, size in SI units of its kind).  kind 0 = acceleration (m/s^2),
# 1 = velocity (m/s), 2 = displacement (m).  Amplitudes are peak values; the engine never mixes
# peak and rms (rms = peak / sqrt(2) for a sinusoid) -- convert before, not here.
VIBRATION_UNITS: dict[str, tuple[int, float]] = {
    "g": (0, STANDARD_GRAVITY_M_S2),
    "m/s2": (0, 1.0),
    "mm/s": (1, 1e-3),
    "in/s": (1, MM_PER_IN * 1e-3),
    "um": (2, 1e-6),
    "mil": (2, MM_PER_IN * 1e-6),  # 1 mil = 0.001 in
}


def convert_1x(value: complex, from_unit: str, to_unit: str, speed_rpm: float) -> complex:
    """Convert a 1x reading (complex, lag convention) between vibration units at ``speed_rpm``.

    Integrating once (acceleration -> velocity) divides the amplitude by w = 2*pi*n/60 and adds
    90 deg to the lag; differentiating does the opposite.
    """
    try:
        k_from, s_from = VIBRATION_UNITS[from_unit]
        k_to, s_to = VIBRATION_UNITS[to_unit]
    except KeyError as exc:
        raise BalancingError(
            f"unknown vibration unit {exc.args[0]!r}; use one of {', '.join(VIBRATION_UNITS)}"
        ) from None
    w = shaft_speed_rad_s(check_speed_rpm(speed_rpm))
    si = complex(value) * s_from
    steps = k_to - k_from  # number of integrations
    # In the lag convention, dividing by (j*w) multiplies the lag phasor by e^{+j*90deg} / w.
    si = si * (cmath.rect(1.0 / w, math.pi / 2.0) ** steps) if steps >= 0 else si * (cmath.rect(w, -math.pi / 2.0) ** (-steps))
    return si / s_to
