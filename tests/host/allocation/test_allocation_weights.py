"""One weight type per layer: the engine's ``Weight`` and the allocator's ``ExistingWeight``
convert into each other without changing the unbalance ``m * r * e^{+j*angle}`` (g*mm)."""

from __future__ import annotations

import pytest

from runtrue.allocation import ExistingWeight, weight_gmm
from runtrue.allocation.model import angle_of_deg
from runtrue.balancing.model import Weight


def test_an_engine_weight_becomes_an_old_weight_and_back() -> None:
    w = Weight(2, 7.5, 300.0, 140.0)
    old = ExistingWeight.from_engine(w, 9, may_move=True, may_remove=True)
    assert (old.mass_g, old.angle_deg, old.radius_mm, old.position_index) == (7.5, 300.0, 140.0, 9)
    assert old.may_move and old.may_remove
    assert old.unbalance_gmm == pytest.approx(w.unbalance_gmm)
    assert old.to_engine(2) == w


def test_an_old_weight_stays_put_unless_told() -> None:
    old = ExistingWeight.from_engine(Weight(1, 3.0, 45.0, 80.0))
    assert old.position_index is None and not old.may_move and not old.may_remove


def test_weight_angles_read_back_within_0_and_360() -> None:
    assert angle_of_deg(weight_gmm(5.0, 400.0, 100.0)) == pytest.approx(40.0)
    assert angle_of_deg(weight_gmm(5.0, -30.0, 100.0)) == pytest.approx(330.0)
    assert angle_of_deg(0j) == 0.0
    assert angle_of_deg(complex(1.0, -1e-16)) == 0.0  # a hair below 360 reads as 0
