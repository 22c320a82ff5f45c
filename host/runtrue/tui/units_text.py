"""Display units for masses, radii, unbalance and forces: metric (g, mm, g·mm, N) or imperial
(oz, in, oz·in, N with lbf in brackets).  Pure functions, no Textual, so every screen formats
the same way.  Conversion happens only here, at display: the job, the database and the machine
form stay metric.

Conversions are the engine's (``runtrue.balancing.units``: 1 in = 25.4 mm and
1 oz = 28.349523125 g exactly, from the international yard and pound agreement, 1959).
1 lbf = 0.45359237 kg x 9.80665 m/s^2 = 4.4482216152605 N exactly (same agreement; standard
gravity, CGPM 1901).
"""

from __future__ import annotations

from runtrue.balancing import g_to_oz, gmm_to_ozin, mm_to_in
from runtrue.balancing.units import STANDARD_GRAVITY_M_S2
from runtrue.readings.numbers import sig3
from runtrue.readings.numbers import unbalance_text as metric_unbalance_text
from runtrue.tui.format import force_text as metric_force_text
from runtrue.tui.format import mass_text as metric_mass_text

METRIC = "metric"
IMPERIAL = "imperial"
UNIT_SYSTEMS = (METRIC, IMPERIAL)

N_PER_LBF = 0.45359237 * STANDARD_GRAVITY_M_S2

#: What each system shows, for the one-line notes on the screens.
UNITS_WORDS = {METRIC: "g, mm, g\N{MIDDLE DOT}mm", IMPERIAL: "oz, in, oz\N{MIDDLE DOT}in"}


def check_units(units: str) -> str:
    if units not in UNIT_SYSTEMS:
        raise ValueError(f"unknown display units {units!r}; use {METRIC!r} or {IMPERIAL!r}")
    return units


def other_units(units: str) -> str:
    """The system the toggle key switches to."""
    return IMPERIAL if check_units(units) == METRIC else METRIC


def mass_text(mass_g: float, units: str = METRIC) -> str:
    """A weight's mass: ``12.0 g`` (as ``runtrue.tui.format.mass_text``) or ``0.423 oz``."""
    if check_units(units) == METRIC:
        return metric_mass_text(mass_g)
    return f"{sig3(g_to_oz(mass_g))} oz"


def radius_text(radius_mm: float, units: str = METRIC) -> str:
    """A radius: ``160 mm`` or ``6.30 in`` (0.01 in = 0.25 mm: finer than a weight is placed)."""
    if check_units(units) == METRIC:
        return f"{radius_mm:g} mm"
    return f"{mm_to_in(radius_mm):.2f} in"


def unbalance_text(u_gmm: float, units: str = METRIC) -> str:
    """An unbalance amount without exponent: ``4.56 g·mm``, ``1880 g·mm``, ``12.3 kg·mm``;
    imperial ``0.0633 oz·in``, ``2.61 oz·in``, ``1250 oz·in``."""
    if check_units(units) == METRIC:
        return metric_unbalance_text(u_gmm)
    ozin = gmm_to_ozin(u_gmm)
    if ozin >= 1000:
        return f"{ozin:.0f} oz\N{MIDDLE DOT}in"
    return f"{sig3(ozin)} oz\N{MIDDLE DOT}in"


def unbalance_unit(units: str = METRIC) -> str:
    return "g\N{MIDDLE DOT}mm" if check_units(units) == METRIC else "oz\N{MIDDLE DOT}in"


def force_text(force_n: float, units: str = METRIC) -> str:
    """The force a weight must hold: ``850 N`` (as ``runtrue.tui.format.force_text``); imperial
    adds pounds-force in brackets, ``850 N (191 lbf)``."""
    text = metric_force_text(force_n)
    if check_units(units) == METRIC:
        return text
    return f"{text} ({force_n / N_PER_LBF:.0f} lbf)"
