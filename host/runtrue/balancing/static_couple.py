"""Static and couple view of a two-plane correction.

Source: ISO 21940-2:2017 (Mechanical vibration - Rotor balancing - Vocabulary) defines static
unbalance (the resultant, which displaces the central principal axis parallel to the shaft axis)
and couple unbalance (a pair of equal and opposite unbalances in two planes) (from memory).
Any two-plane unbalance splits uniquely as ``U1 = S/2 + C`` and ``U2 = S/2 - C``:
``S = U1 + U2`` is the resultant (static part, shown shared half and half between the planes)
and ``C = (U1 - U2) / 2`` the couple pair (``+C`` in plane 1, ``-C`` in plane 2).

What kind of unbalance it is (:func:`split_kind`, our rule of thumb, no standard): per plane,
``|S|/2`` against ``|C|``; one at least DOMINANT_RATIO times the other is "mostly static" or
"mostly couple", else "static + couple".
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from runtrue.balancing.model import BalancingError, Weight

#: One part counts as dominant when it is at least this many times the other, per plane (our choice).
DOMINANT_RATIO = 2.0
MOSTLY_STATIC = "mostly static"
MOSTLY_COUPLE = "mostly couple"
STATIC_AND_COUPLE = "static + couple"


@dataclass(frozen=True)
class StaticCouple:
    """``static_gmm`` = U1 + U2 (the resultant); ``couple_gmm`` = (U1 - U2) / 2, fitted as
    ``+couple`` in plane 1 and ``-couple`` in plane 2.  ``static`` is the resultant as one weight
    (plane 0: not a real plane) at the radius given; ``couple`` the pair of weights."""

    static_gmm: complex
    couple_gmm: complex
    static: Weight
    couple: tuple[Weight, Weight]


def static_couple(corrections: Sequence[Weight], radius_mm: float | None = None) -> StaticCouple:
    """Split a two-plane correction (planes 1 and 2) into static and couple parts.  Weights are
    expressed at ``radius_mm`` (default: plane 1's correction radius)."""
    by_plane = {w.plane: w for w in corrections}
    if set(by_plane) != {1, 2} or len(corrections) != 2:
        raise BalancingError("the static/couple view needs a correction in plane 1 and one in plane 2")
    u1 = by_plane[1].unbalance_gmm
    u2 = by_plane[2].unbalance_gmm
    r = by_plane[1].radius_mm if radius_mm is None else radius_mm
    s = u1 + u2
    c = (u1 - u2) / 2.0
    return StaticCouple(
        static_gmm=s,
        couple_gmm=c,
        static=Weight.from_unbalance(0, s, r),
        couple=(Weight.from_unbalance(1, c, r), Weight.from_unbalance(2, -c, r)),
    )


def split_kind(static_gmm: complex, couple_gmm: complex) -> str:
    """``MOSTLY_STATIC``, ``MOSTLY_COUPLE`` or ``STATIC_AND_COUPLE`` for a split (see the module
    docstring): the static part per plane ``|S|/2`` against the couple ``|C|``."""
    s_per_plane = abs(static_gmm) / 2.0
    c = abs(couple_gmm)
    if s_per_plane >= DOMINANT_RATIO * c:
        return MOSTLY_STATIC
    if c >= DOMINANT_RATIO * s_per_plane:
        return MOSTLY_COUPLE
    return STATIC_AND_COUPLE
