"""Units of a 1x vibration reading, and the phasor convention.

Convention (DEVELOPERS.md): a reading is the complex number ``amp * e^{+j*lag}``; ``amp`` is the
1x **peak** amplitude in g, ``lag`` the phase lag in degrees of rotation after the reference
mark, 0-360.

Conversions at 1x assume a pure sinusoid at the shaft frequency ``f = speed_rpm / 60``; for
``x(t) = X sin(2 pi f t)`` the velocity and acceleration amplitudes are ``V = 2 pi f X`` and
``A = (2 pi f)^2 X`` (the standard relations of harmonic motion, e.g. C. M. Harris (ed.),
*Shock and Vibration Handbook*, chapter 1 (from memory)).  For a sinusoid RMS = peak / sqrt(2)
and peak-to-peak = 2 * peak.  The usual ways of stating each quantity in the trade (common
practice): acceleration in g peak, velocity in mm/s RMS (the measure of vibration severity in
ISO 20816-1), displacement in micrometres peak-to-peak.  Every function names its detector.

Standard gravity g_n = 9.80665 m/s^2 (exact by definition; ISO 80000-3).
"""

from __future__ import annotations

import cmath
import math

STANDARD_GRAVITY_MS2 = 9.80665
SQRT2 = math.sqrt(2.0)

UNITS = ("g", "m/s2", "mm/s", "um")
DETECTORS = ("peak", "rms", "pk-pk")


def wrap_deg(angle_deg: float) -> float:
    """An angle wrapped into [0, 360) degrees."""
    a = math.fmod(float(angle_deg), 360.0)
    if a < 0.0:
        a += 360.0
    if a >= 360.0:  # fmod of a tiny negative number can round up to 360
        a = 0.0
    return a


def angle_diff_deg(a_deg: float, b_deg: float) -> float:
    """The signed difference ``a - b`` wrapped into [-180, 180) degrees (the shorter way round)."""
    return (float(a_deg) - float(b_deg) + 180.0) % 360.0 - 180.0


def angle_between_deg(a_deg: float, b_deg: float) -> float:
    """How far apart two angles are, 0-180 degrees, whichever way round."""
    return abs(angle_diff_deg(a_deg, b_deg))


def phasor(amp: float, lag_deg: float) -> complex:
    """The reading ``amp * e^{+j*lag}`` (amp in g peak, lag in degrees after the mark; any finite
    angle, wrapped exactly before conversion so 761 deg gives the same number as 41 deg)."""
    return complex(cmath.rect(float(amp), math.radians(math.fmod(float(lag_deg), 360.0))))


def lag_deg(z: complex) -> float:
    """Phase lag of ``z`` in degrees, 0 <= lag < 360."""
    lag = math.degrees(math.atan2(z.imag, z.real)) % 360.0
    return 0.0 if lag >= 360.0 else lag


def amp_phase(z: complex) -> tuple[float, float]:
    """``(amplitude, phase lag in degrees 0-360)`` of a reading."""
    return abs(z), lag_deg(z)


def shaft_hz(speed_rpm: float) -> float:
    return speed_rpm / 60.0


def g_to_ms2(amp_g: float) -> float:
    return amp_g * STANDARD_GRAVITY_MS2


def ms2_to_g(accel_ms2: float) -> float:
    return accel_ms2 / STANDARD_GRAVITY_MS2


def _omega(speed_rpm: float, order: int) -> float:
    if speed_rpm <= 0:
        raise ValueError(f"speed {speed_rpm} rpm: velocity and displacement need the shaft turning")
    return 2.0 * math.pi * shaft_hz(speed_rpm) * order


def accel_g_to_velocity_mm_s(amp_g: float, speed_rpm: float, order: int = 1) -> float:
    """Velocity amplitude (same detector as the input) in mm/s of a sinusoidal acceleration
    of ``amp_g`` at ``order`` x shaft speed: ``V = A / (2 pi f)``."""
    return g_to_ms2(amp_g) / _omega(speed_rpm, order) * 1e3


def accel_g_to_displacement_um(amp_g: float, speed_rpm: float, order: int = 1) -> float:
    """Displacement amplitude (same detector as the input) in micrometres:
    ``X = A / (2 pi f)^2``."""
    return g_to_ms2(amp_g) / _omega(speed_rpm, order) ** 2 * 1e6


def velocity_mm_s_to_accel_g(velocity_mm_s: float, speed_rpm: float, order: int = 1) -> float:
    return ms2_to_g(velocity_mm_s * 1e-3 * _omega(speed_rpm, order))


def displacement_um_to_accel_g(displacement_um: float, speed_rpm: float, order: int = 1) -> float:
    return ms2_to_g(displacement_um * 1e-6 * _omega(speed_rpm, order) ** 2)


def peak_to_rms(peak: float) -> float:
    return peak / SQRT2


def rms_to_peak(rms: float) -> float:
    return rms * SQRT2


def peak_to_peak(peak: float) -> float:
    return 2.0 * peak


def convert_1x(amp_g_peak: float, speed_rpm: float, unit: str, detector: str = "peak") -> float:
    """A 1x amplitude given in g peak, expressed in ``unit`` (g, m/s2, mm/s, um) and
    ``detector`` (peak, rms, pk-pk)."""
    if unit == "g":
        value = amp_g_peak
    elif unit == "m/s2":
        value = g_to_ms2(amp_g_peak)
    elif unit == "mm/s":
        value = accel_g_to_velocity_mm_s(amp_g_peak, speed_rpm)
    elif unit == "um":
        value = accel_g_to_displacement_um(amp_g_peak, speed_rpm)
    else:
        raise ValueError(f"unit {unit!r}: use one of {', '.join(UNITS)}")
    if detector == "peak":
        return value
    if detector == "rms":
        return peak_to_rms(value)
    if detector == "pk-pk":
        return peak_to_peak(value)
    raise ValueError(f"detector {detector!r}: use one of {', '.join(DETECTORS)}")
