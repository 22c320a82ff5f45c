"""What kind of unbalance a two-plane correction is: mostly static, mostly couple, or both.

Source: ISO 21940-2:2017 (Mechanical vibration - Rotor balancing - Vocabulary): static unbalance
is the resultant (equal unbalances in phase in both planes), couple unbalance a pair of equal
and opposite unbalances.  The dominance ratio (one part at least twice the other, per plane) is
runtrue's own rule of thumb."""

from __future__ import annotations

import pytest

from runtrue.balancing.model import Weight
from runtrue.balancing.static_couple import (
    DOMINANT_RATIO,
    MOSTLY_COUPLE,
    MOSTLY_STATIC,
    STATIC_AND_COUPLE,
    split_kind,
    static_couple,
)


def _kind(w1: Weight, w2: Weight) -> str:
    sc = static_couple([w1, w2])
    return split_kind(sc.static_gmm, sc.couple_gmm)


def test_equal_weights_in_phase_are_static_unbalance() -> None:
    assert _kind(Weight(1, 12, 40, 100), Weight(2, 12, 40, 100)) == MOSTLY_STATIC == "mostly static"


def test_equal_weights_opposite_are_couple_unbalance() -> None:
    assert _kind(Weight(1, 12, 40, 100), Weight(2, 12, 220, 100)) == MOSTLY_COUPLE == "mostly couple"


def test_weights_at_right_angles_are_both() -> None:
    # |S|/2 = |C| = 12 * 100 / sqrt(2) g*mm: neither dominates.
    assert _kind(Weight(1, 12, 0, 100), Weight(2, 12, 90, 100)) == STATIC_AND_COUPLE == "static + couple"


@pytest.mark.parametrize(("static_per_plane", "couple", "kind"), [
    (200.0, 100.0, MOSTLY_STATIC),      # exactly twice: dominant
    (199.0, 100.0, STATIC_AND_COUPLE),
    (100.0, 200.0, MOSTLY_COUPLE),
    (100.0, 199.0, STATIC_AND_COUPLE),
])
def test_one_part_dominates_at_twice_the_other_per_plane(static_per_plane: float, couple: float, kind: str) -> None:
    assert DOMINANT_RATIO == 2.0
    assert split_kind(complex(2 * static_per_plane, 0), complex(0, couple)) == kind
