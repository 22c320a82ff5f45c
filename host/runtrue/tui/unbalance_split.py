"""Static and couple parts of a two-plane correction, as three short lines for the runs screen:
a technician's check on what kind of unbalance the rotor has.

The split and the kind of unbalance are ``runtrue.balancing.static_couple``'s (ISO 21940-2
vocabulary): the static part ``S = U1 + U2`` (the resultant, half in each plane), the couple
``C = (U1 - U2) / 2`` (``+C`` in plane 1, ``-C`` in plane 2), and ``split_kind`` ("mostly
static", "mostly couple" or "static + couple").  This module only writes the lines.  The angles
are those of the correction weights (from the mark, against rotation).
"""

from __future__ import annotations

from typing import Any

from runtrue.balancing import BalancingError
from runtrue.balancing.static_couple import split_kind, static_couple
from runtrue.jobs.engine import engine_weight
from runtrue.readings.units import lag_deg
from runtrue.tui.format import DEG
from runtrue.tui.units_text import METRIC, unbalance_text


def gmm_text(u_gmm: float, units: str = METRIC) -> str:
    """An unbalance amount without exponent: ``4.56 g·mm``, ``1880 g·mm``, ``12.3 kg·mm`` (or oz·in)."""
    return unbalance_text(u_gmm, units)


def static_couple_lines(plan: Any, units: str = METRIC) -> list[str]:
    """For a plan correcting planes 1 and 2: ``["Correction: mostly static", "static 245 g·mm @
    30°", "couple ±88 g·mm @ 200°"]``; no lines for anything else (one plane, no plan)."""
    if plan is None or len(plan.planes) != 2:
        return []
    ws = [engine_weight(pc.correction) for pc in plan.planes]
    try:
        sc = static_couple(ws)
    except BalancingError:
        return []
    s_ang = lag_deg(sc.static_gmm)
    c_ang = lag_deg(sc.couple_gmm)
    return [
        f"Correction: {split_kind(sc.static_gmm, sc.couple_gmm)}",
        f"static {gmm_text(abs(sc.static_gmm), units)} @ {s_ang:.0f}{DEG}",
        f"couple \N{PLUS-MINUS SIGN}{gmm_text(abs(sc.couple_gmm), units)} @ {c_ang:.0f}{DEG}",
    ]
