"""Display text for the screens: pure functions, no Textual, easy to test.

Conventions shown to the user (DEVELOPERS.md): phase is a lag in degrees after the reference
mark (0-360); weight angles are measured from the mark against the direction of rotation.
"""

from __future__ import annotations

import math

from runtrue.readings.numbers import DEFAULT_VIB_UNIT, sig3
from runtrue.readings.numbers import force_text as _force_text
from runtrue.readings.numbers import mass_text as _mass_text
from runtrue.readings.units import lag_deg

DEG = "\N{DEGREE SIGN}"
PHASE_NOTE = f"phase = lag after the mark, 0-360{DEG}"
ANGLE_NOTE = "weight angles from the mark, against rotation"

SAFETY_FIT = (
    "STOP and LOCK OUT the machine before touching the rotor. Secure every weight for the "
    "force shown. Follow the machine maker's instructions and local codes."
)
SAFETY_START = (
    "Before starting: guards on, tools and loose weights off the rotor, everyone clear of the "
    "plane of rotation. Never exceed the rotor's rated speed."
)


def amp_text(amp_g: float, unit: str = "g pk") -> str:
    """An acceleration amplitude with 3 significant figures and its detector, e.g.
    ``0.0412 g pk`` (never a bare "g", which reads as grams)."""
    if not math.isfinite(amp_g):
        return "---"
    return f"{sig3(amp_g, 5)} {unit}"


def vib_unit_of(app: object) -> str:
    """The vibration display unit chosen in the running application (default mm/s rms)."""
    return str(getattr(app, "vib_unit", DEFAULT_VIB_UNIT))


def phase_text(phase_deg: float) -> str:
    return f"{phase_deg % 360.0:5.1f}{DEG}"


def vector_text(v: complex, unit: str = "g") -> str:
    return f"{amp_text(abs(v), unit)} @ {phase_text(lag_deg(v)).strip()}"


def mass_text(mass_g: float) -> str:
    return _mass_text(mass_g)


def force_text(force_n: float) -> str:
    return _force_text(force_n)


def bar(fraction: float, width: int) -> str:
    """A progress bar of ``width`` characters, e.g. ``#####.....``."""
    f = min(1.0, max(0.0, fraction))
    full = int(round(f * width))
    return "\N{FULL BLOCK}" * full + "\N{LIGHT SHADE}" * (width - full)


def time_left_text(seconds: float) -> str:
    if not math.isfinite(seconds) or seconds < 0:
        return "--"
    if seconds < 60:
        return f"{seconds:.0f} s"
    return f"{seconds // 60:.0f} min {seconds % 60:02.0f} s"


def rotation_words(rotation: str) -> str:
    return "clockwise" if rotation == "cw" else "counter-clockwise"
