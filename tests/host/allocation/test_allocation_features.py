"""Positions, stock, strip, old weights, limits, grooves, planes and the fitting sheet."""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest

from runtrue.allocation import (
    AllocationError,
    ExistingWeight,
    Positions,
    Stock,
    Strip,
    allocate,
    allocate_planes,
    centrifugal_force_n,
    fitting_sheet,
    weight_gmm,
)
from runtrue.allocation.groove import arc_unbalance_gmm, chain_angles, magnitude_range

RING = Positions.equally_spaced(12, 120.0)
BOX = Stock.of([(1.0, 6), (2.0, 6), (5.0, 4)])


def _fitted(a) -> complex:
    return sum((p.unbalance_gmm for p in a.placements), 0j)


def test_issue_example_fits_within_one_percent_with_four_pieces() -> None:
    a = allocate((9.4, 212.5, 120.0), RING, stock=BOX, max_pieces_per_position=3)
    assert a.optimal
    assert a.residual_fraction <= 0.01
    assert a.piece_count == 4
    # the residual is what the placements leave, at the correction radius
    assert a.residual_gmm == pytest.approx(weight_gmm(9.4, 212.5, 120.0) - _fitted(a))
    assert a.residual_mass_g == pytest.approx(abs(a.residual_gmm) / 120.0)


@pytest.mark.slow
def test_placements_sit_on_real_positions_with_pieces_from_stock() -> None:
    a = allocate((9.4, 212.5, 120.0), RING, stock=BOX, max_pieces_per_position=3, good_enough_gmm=0.0,
                 max_nodes=5000)
    used: dict[float, int] = {}
    for p in a.placements:
        assert p.angle_deg == pytest.approx(30.0 * p.position_index)
        assert p.mass_g == pytest.approx(sum(p.pieces))
        for m in p.pieces:
            used[m] = used.get(m, 0) + 1
        assert len(p.pieces) <= 3
    assert used.get(1.0, 0) <= 6 and used.get(2.0, 0) <= 6 and used.get(5.0, 0) <= 4


def test_excluded_position_is_never_used() -> None:
    # the correction sits exactly on position 4 (90°), which is blocked by a key
    a = allocate((5.0, 90.0, 120.0), RING.excluding([3]), stock=Stock.of([(1.0, None), (5.0, 2)]))
    assert all(p.position_index != 3 for p in a.placements)
    assert a.placements  # it used the neighbours instead
    b = allocate((5.0, 90.0, 120.0), RING, stock=Stock.of([(1.0, None), (5.0, 2)]))
    assert [(p.position_index, p.pieces) for p in b.placements] == [(3, (5.0,))]


@pytest.mark.slow
def test_stack_limit_and_mass_limit_per_position() -> None:
    stock = Stock.of([(1.0, None)])
    a = allocate((6.0, 0.0, 120.0), RING, stock=stock, max_pieces_per_position=2)
    assert all(len(p.pieces) <= 2 for p in a.placements)
    b = allocate((6.0, 0.0, 120.0), RING, stock=stock, max_mass_per_position_g=3.0)
    assert all(p.mass_g <= 3.0 for p in b.placements)
    assert b.residual_fraction <= 0.01 or not b.optimal


def test_stock_counts_are_respected() -> None:
    a = allocate((12.0, 0.0, 120.0), RING, stock=Stock.of([(5.0, 1), (1.0, 3)]))
    pieces = [m for p in a.placements for m in p.pieces]
    assert pieces.count(5.0) <= 1 and pieces.count(1.0) <= 3
    assert any("leaves" in w for w in a.warnings)  # only 8 g in the box for a 12 g correction
    assert any("cannot carry the whole correction" in w for w in a.warnings)
    # proven smallest (no good-enough residual reachable): the bound is the residual itself
    assert a.optimal and a.bound_gmm == pytest.approx(abs(a.residual_gmm))
    b = allocate((5.0, 10.0, 120.0), RING, stock=BOX, good_enough_gmm=100.0)
    assert abs(b.residual_gmm) <= 100.0 and 0.0 <= b.bound_gmm <= abs(b.residual_gmm)


def test_strip_is_cut_to_allowed_lengths() -> None:
    strip = Strip(grams_per_mm=0.25, min_mm=12.0, step_mm=5.0, max_mm=60.0)
    a = allocate((7.3, 100.0, 120.0), RING, strip=strip)
    assert a.placements
    for p in a.placements:
        assert p.pieces == ()
        assert p.length_mm is not None and 12.0 <= p.length_mm <= 60.0
        k = (p.length_mm - 12.0) / 5.0
        assert k == pytest.approx(round(k))
        assert p.mass_g == pytest.approx(0.25 * p.length_mm)


def test_old_weight_that_cancels_the_correction_is_removed() -> None:
    old = ExistingWeight(2.0, 90.0, 120.0, position_index=3, may_remove=True)
    a = allocate((2.0, 270.0, 120.0), RING, stock=BOX, existing=[old])
    assert a.removed_existing == (0,)
    assert a.placements == ()
    assert abs(a.residual_gmm) < 1e-9
    fixed = ExistingWeight(2.0, 90.0, 120.0, position_index=3)  # may not be touched
    b = allocate((2.0, 270.0, 120.0), RING, stock=BOX, existing=[fixed])
    assert b.kept_existing == (0,)
    assert [(p.position_index, p.pieces) for p in b.placements] == [(9, (2.0,))]


def test_consolidation_replaces_two_old_weights_by_one_piece() -> None:
    # old: 1 g at 0° and 1 g at 30°; the rotor should end with 2 g at 0° in total
    olds = [ExistingWeight(1.0, 0.0, 120.0, 0, may_move=True, may_remove=True),
            ExistingWeight(1.0, 30.0, 120.0, 1, may_move=True, may_remove=True)]
    total_wanted = weight_gmm(2.0, 0.0, 120.0)
    correction = total_wanted - sum((w.unbalance_gmm for w in olds), 0j)
    a = allocate(correction, RING, stock=Stock.of([(2.0, 1)]), existing=olds, correction_radius_mm=120.0)
    assert a.removed_existing == (0, 1)
    assert [(p.position_index, p.pieces) for p in a.placements] == [(0, (2.0,))]
    assert a.piece_count == 1 and abs(a.residual_gmm) < 1e-9


def test_old_weight_that_must_stay_on_the_rotor_is_moved_not_dropped() -> None:
    old = ExistingWeight(3.0, 0.0, 120.0, 0, may_move=True, may_remove=False)
    # the rotor wants 3 g at 90° instead of at 0°: move it
    correction = weight_gmm(3.0, 90.0, 120.0) - old.unbalance_gmm
    a = allocate(correction, RING, stock=Stock.of([(1.0, 2)]), existing=[old], correction_radius_mm=120.0)
    assert [(p.position_index, p.moved_existing) for p in a.placements] == [(3, (0,))]
    assert a.added_mass_g == 0.0 and abs(a.residual_gmm) < 1e-9


def test_prefer_fewer_positions_trades_pieces_for_positions() -> None:
    # 3 g at 10° with 1 g pieces, good enough 20 %: 2 g at 0° + 1 g at 30° leaves 3 %, three
    # pieces in hole 1 leave 17 %; both are good enough with three pieces and 3 g, so by default
    # the smaller residual wins, and with the preference the single hole does
    stock = Stock.of([(1.0, None)])
    g = 0.20 * 3 * 120
    a = allocate((3.0, 10.0, 120.0), RING, stock=stock, good_enough_gmm=g)
    b = allocate((3.0, 10.0, 120.0), RING, stock=stock, good_enough_gmm=g, prefer_fewer_positions=True)
    assert [(p.position_index, p.pieces) for p in a.placements] == [(0, (1.0, 1.0)), (1, (1.0,))]
    assert [(p.position_index, p.pieces) for p in b.placements] == [(0, (1.0, 1.0, 1.0))]
    assert abs(b.residual_gmm) <= g


def test_budget_stop_is_reported_with_what_is_guaranteed() -> None:
    a = allocate((9.4, 212.5, 120.0), RING, stock=BOX, max_pieces_per_position=3, good_enough_gmm=0.0,
                 max_nodes=300)
    assert not a.optimal
    assert any("best of all allocations with up to" in w for w in a.warnings)
    assert 0.0 <= a.bound_gmm <= abs(a.residual_gmm)


def test_groove_with_pieces_closes_the_vector_exactly_when_the_masses_allow() -> None:
    a = allocate((9.4, 212.5, 120.0), Positions.groove(100.0), stock=BOX)
    assert a.optimal
    assert abs(a.residual_gmm) < 1e-6
    masses = sorted(m for p in a.placements for m in p.pieces)
    assert masses == [2.0, 5.0, 5.0]  # 11.28 g needed at 100 mm: 5+5+1 is too little


def test_polygon_range_and_chain_construction() -> None:
    assert magnitude_range([5.0, 1.0]) == (4.0, 6.0)
    assert magnitude_range([2.0, 2.0, 1.0]) == (0.0, 5.0)
    for size in np.linspace(0.0, 5.0, 11):
        vecs = chain_angles([2.0, 2.0, 1.0], float(size))
        assert abs(sum(vecs, 0j)) == pytest.approx(size, abs=1e-9)


def test_strip_arc_unbalance_matches_numerical_integration() -> None:
    gpm, length, r = 0.3, 150.0, 90.0
    phi = np.linspace(-length / (2 * r), length / (2 * r), 200001)
    integral = np.trapezoid(gpm * r * np.exp(1j * phi) * r, phi)
    assert arc_unbalance_gmm(gpm, length, r) == pytest.approx(abs(integral), rel=1e-9)
    a = allocate((4.0, 45.0, 90.0), Positions.groove(90.0), strip=Strip(gpm, 10.0, 1.0))
    (p,) = a.placements
    assert p.length_mm is not None
    assert abs(p.unbalance_gmm) < gpm * p.length_mm * 90.0  # the arc's centroid is inside the radius
    assert a.residual_mass_g < 0.3 * 1.0  # within one cutting step


def test_two_planes_share_one_stock() -> None:
    stock = Stock.of([(5.0, 1), (1.0, 10)])
    a1, a2 = allocate_planes([(5.0, 0.0, 120.0), (5.0, 90.0, 120.0)], RING, stock=stock)
    fives = [m for a in (a1, a2) for p in a.placements for m in p.pieces if m == 5.0]
    assert len(fives) == 1
    assert a1.placements[0].pieces == (5.0,)


def test_fitting_sheet_gives_position_number_and_centrifugal_force() -> None:
    a = allocate((5.0, 90.0, 120.0), RING, stock=Stock.of([(5.0, 1)]))
    (row,) = fitting_sheet(a, speed_rpm=3000.0)
    assert row.number == 4 and row.angle_deg == pytest.approx(90.0) and row.what == "5 g"
    # F = m·r·ω² = 0.005 kg · 0.12 m · (2π·50 s⁻¹)² = 59.22 N, recomputed by hand
    assert row.force_n == pytest.approx(0.005 * 0.12 * (2 * math.pi * 50) ** 2)
    assert centrifugal_force_n(10.0, 100.0, 3000.0) == pytest.approx(98.696, rel=1e-4)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"stock": Stock.of([(-1.0, 2)])}, "positive"),
        ({"stock": Stock.of([(1.0, 0)])}, "empty"),
        ({}, "no stock"),
        ({"stock": BOX, "strip": Strip(1, 1, 1)}, "not both"),
        ({"strip": Strip(1.0, 10.0, 0.0)}, "step_mm"),
    ],
)
def test_bad_input_says_what_is_wrong(kwargs: dict, message: str) -> None:
    with pytest.raises(AllocationError, match=message):
        allocate((5.0, 0.0, 100.0), RING, **kwargs)


def test_no_usable_position_is_an_error() -> None:
    with pytest.raises(AllocationError, match="no usable positions"):
        allocate((5.0, 0.0, 100.0), Positions.equally_spaced(2, 100.0, excluded=[0, 1]), stock=BOX)
    with pytest.raises(AllocationError, match="negative"):
        allocate((-5.0, 0.0, 100.0), RING, stock=BOX)


def test_zero_correction_needs_nothing() -> None:
    a = allocate(0j, RING, stock=BOX)
    assert a.placements == () and a.residual_gmm == 0 and a.optimal


def test_angles_are_against_rotation_from_the_mark() -> None:
    # a weight at position angle θ is the unbalance m·r·e^{+jθ} (DEVELOPERS.md)
    a = allocate((2.0, 60.0, 120.0), RING, stock=Stock.of([(2.0, 1)]))
    (p,) = a.placements
    assert p.unbalance_gmm == pytest.approx(240.0 * cmath.exp(1j * math.radians(60.0)))


def test_prefer_fewer_positions_is_proven_with_unlimited_stacking() -> None:
    # unlimited pieces per position: the search must still prove that no single hole can do it
    box = Stock.of([(1.0, None), (2.0, None), (5.0, None)])
    g = 0.05 * 9.4 * 120
    a = allocate((9.4, 212.5, 120.0), RING, stock=box, prefer_fewer_positions=True, good_enough_gmm=g)
    assert a.optimal and len(a.placements) == 2 and abs(a.residual_gmm) <= g
    b = allocate((9.4, 211.0, 120.0), RING, stock=box, prefer_fewer_positions=True, good_enough_gmm=g)
    assert b.optimal and [(p.position_index, p.pieces) for p in b.placements] == [(7, (5.0, 2.0, 2.0))]


def test_two_planes_consolidate_their_own_old_weights() -> None:
    old1 = [ExistingWeight(2.0, 90.0, 120.0, 3, may_remove=True)]
    a1, a2 = allocate_planes([(2.0, 270.0, 120.0), (2.0, 270.0, 120.0)], RING, stock=BOX,
                             existing_per_plane=[old1, []])
    assert a1.removed_existing == (0,) and a1.placements == ()  # plane 1: take the old weight off
    assert [(p.position_index, p.pieces) for p in a2.placements] == [(9, (2.0,))]  # plane 2: fit one
