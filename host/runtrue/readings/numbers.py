"""Every number a user reads, formatted one way: the screens and the report both print through
here, so they show the same digits (a test compares them).

Vibration is shown as a 1x amplitude in one of ``VIB_UNITS``, always with its unit and detector
(``mm/s rms``, ``mm/s pk``, ``g pk``); the default is velocity in mm/s RMS, the measure of
vibration severity in ISO 20816-1:2016 (section 3, "vibration magnitude").  The meter measures
acceleration in g peak; velocity at 1x is ``V = A / (2 pi f)`` and RMS = peak / sqrt 2 for a
sinusoid (``runtrue.readings.units``).  Grams ("g") are used for mass only; an acceleration is
always written ``g pk`` or ``g rms`` so it cannot be read as a mass.

Rounding: amplitudes, masses and unbalance to three significant figures (never an exponent),
forces to whole newtons, weight angles to 0.1 degree, phases to whole degrees, ratios to two
decimals.  Unbalance is spelt ``g·mm`` (mass times radius).
"""

from __future__ import annotations

import math
from datetime import datetime, timezone

from runtrue.readings.units import accel_g_to_velocity_mm_s

DEG = "\N{DEGREE SIGN}"
VIB_MM_S_RMS = "mm/s rms"
VIB_MM_S_PK = "mm/s pk"
VIB_G_PK = "g pk"
#: Display units for vibration, the default first.
VIB_UNITS: tuple[str, ...] = (VIB_MM_S_RMS, VIB_MM_S_PK, VIB_G_PK)
DEFAULT_VIB_UNIT = VIB_MM_S_RMS
UNBALANCE_UNIT = "g\N{MIDDLE DOT}mm"


def sig3(value: float, max_decimals: int = 6) -> str:
    """Three significant figures, never an exponent: ``0.0353``, ``4.23``, ``42.3``, ``423``, ``4230``."""
    if not math.isfinite(value):
        return "---"
    if value == 0:
        return "0"
    rounded = float(f"{abs(value):.3g}")  # 0.099999 counts as 0.100, not 0.0999
    digits = max(0, 2 - int(math.floor(math.log10(rounded))))
    return f"{value:.{min(digits, max_decimals)}f}"


def check_vib_unit(unit: str) -> str:
    if unit not in VIB_UNITS:
        raise ValueError(f"unknown vibration unit {unit!r}; use one of {', '.join(VIB_UNITS)}")
    return unit


def next_vib_unit(unit: str) -> str:
    """The unit the display switch moves to next."""
    i = VIB_UNITS.index(check_vib_unit(unit))
    return VIB_UNITS[(i + 1) % len(VIB_UNITS)]


def vib_value(amp_g_pk: float, speed_rpm: float, unit: str = DEFAULT_VIB_UNIT, order: int = 1) -> float:
    """A 1x (or ``order`` x) acceleration amplitude in g peak, as a number in ``unit``."""
    check_vib_unit(unit)
    if unit == VIB_G_PK:
        return float(amp_g_pk)
    if not (speed_rpm > 0 and math.isfinite(speed_rpm)):
        return math.nan
    v_pk = accel_g_to_velocity_mm_s(float(amp_g_pk), speed_rpm, order)
    return v_pk / math.sqrt(2.0) if unit == VIB_MM_S_RMS else v_pk


def vib_number(amp_g_pk: float, speed_rpm: float, unit: str = DEFAULT_VIB_UNIT, order: int = 1) -> str:
    """The number alone (for a table whose header carries the unit)."""
    return sig3(vib_value(amp_g_pk, speed_rpm, unit, order))


def vib_text(amp_g_pk: float, speed_rpm: float, unit: str = DEFAULT_VIB_UNIT, order: int = 1) -> str:
    """``3.21 mm/s rms``, ``4.54 mm/s pk`` or ``0.412 g pk``."""
    return f"{vib_number(amp_g_pk, speed_rpm, unit, order)} {unit}"


def accel_rms_text(rms_g: float) -> str:
    """An overall (all frequencies) acceleration: ``0.331 g rms``."""
    return f"{sig3(rms_g)} g rms"


def phase_text(phase_deg: float) -> str:
    """A phase lag, whole degrees 0-359: ``208°``."""
    if not math.isfinite(phase_deg):
        return "---"
    return f"{round(phase_deg % 360.0) % 360:d}{DEG}"


def angle_text(angle_deg: float) -> str:
    """A weight angle from the mark, 0.1 degree: ``45.0°``."""
    return f"{angle_deg % 360.0:.1f}{DEG}"


def mass_text(mass_g: float) -> str:
    """A weight's mass: ``11.0 g``, ``4.23 g``, ``123 g``."""
    return f"{sig3(mass_g)} g"


def radius_text(radius_mm: float) -> str:
    return f"{radius_mm:g} mm"


def force_text(force_n: float) -> str:
    """The force a weight must hold: ``42 N``; ``12.3 kN`` from 10 kN."""
    if not math.isfinite(force_n):
        return "---"
    if force_n >= 10_000:
        return f"{force_n / 1000:.1f} kN"
    return f"{force_n:.0f} N"


def unbalance_text(u_gmm: float) -> str:
    """``4.56 g·mm``, ``1880 g·mm``, ``12.3 kg·mm``."""
    if math.isfinite(u_gmm) and abs(u_gmm) >= 10_000:
        return f"{sig3(u_gmm / 1000)} kg\N{MIDDLE DOT}mm"
    return f"{sig3(u_gmm)} {UNBALANCE_UNIT}"


def unbalance_number(u_gmm: float) -> str:
    return sig3(u_gmm)


def ratio_text(ratio: float) -> str:
    """A multiple of an allowance: ``0.12x``."""
    if not math.isfinite(ratio):
        return "---"
    return f"{ratio:.2f}x"


def percent_change_text(before: float, after: float) -> str:
    """``-88 %`` (after against before); empty when before is zero."""
    if not (before > 0 and math.isfinite(after)):
        return ""
    return f"{(after / before - 1.0) * 100.0:+.0f} %"


def speed_text(speed_rpm: float) -> str:
    return f"{speed_rpm:.0f} rpm" if math.isfinite(speed_rpm) else "--- rpm"


def local_time_text(iso_utc: str | None) -> str:
    """A stored UTC time (``2026-12-01T21:50:03Z``) in the computer's local time zone:
    ``2026-12-01 22:50 CET``; the text unchanged when it is not such a time."""
    if not iso_utc:
        return ""
    try:
        t = datetime.strptime(iso_utc, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=timezone.utc)
    except ValueError:
        return iso_utc
    local = t.astimezone()
    return local.strftime("%Y-%m-%d %H:%M ") + (local.tzname() or "")


def grade_row(residual_gmm: float, uncertainty_gmm: float, permissible_gmm: float) -> dict[str, str]:
    """One plane of the grade check as the screen and the report print it.  ``ratio`` is
    (residual + its 95 % uncertainty) / permissible, the figure the pass is judged on."""
    u = uncertainty_gmm if math.isfinite(uncertainty_gmm) else 0.0
    ratio = (residual_gmm + u) / permissible_gmm if permissible_gmm > 0 else math.inf
    return {
        "residual": unbalance_text(residual_gmm),
        "uncertainty": unbalance_text(u),
        "permissible": unbalance_text(permissible_gmm),
        "ratio": ratio_text(ratio),
        "verdict": "pass" if ratio <= 1.0 else "fail",
    }
