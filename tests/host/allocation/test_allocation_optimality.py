"""The allocator is exactly optimal: equal to exhaustive search on small cases, never worse than a
mixed-integer reference (scipy.optimize.milp, HiGHS) on larger ones."""

from __future__ import annotations

import math
import random

import pytest
from allocation_reference import Case, brute_force, milp_reference

from runtrue.allocation import Positions, Stock, allocate


def _random_case(rng: random.Random, max_positions: int = 4, max_sizes: int = 3) -> Case:
    P = rng.randint(1, max_positions)
    if rng.random() < 0.5:
        first = rng.uniform(0, 360)
        angles = [(first + 360 * i / P) % 360 for i in range(P)]
        radii = [100.0] * P
    else:
        angles = [rng.uniform(0, 360) for _ in range(P)]
        radii = [rng.choice([80.0, 100.0, 125.0]) for _ in range(P)]
    K = rng.randint(1, max_sizes)
    sizes = sorted(rng.sample([0.5, 1.0, 2.0, 2.5, 3.0, 5.0, 7.0], K))
    counts = [rng.choice([None, 1, 2, 3, 0]) for _ in range(K)]
    if all(c == 0 for c in counts):
        counts[0] = 1
    stack = rng.choice([1, 2, 3])
    mass_limit = rng.choice([None, None, 4.0, 6.0])
    target = rng.uniform(1, 12) * 100 * complex(math.cos(t := rng.uniform(0, 2 * math.pi)), math.sin(t))
    g = rng.choice([0.0, 0.0, 0.02, 0.1, 0.3]) * abs(target)
    return Case(target, angles, radii, sizes, counts, stack, mass_limit, g)


def _allocate(case: Case, prefer: bool = False, max_nodes: int = 10**7):
    return allocate(
        case.target,
        Positions.at_angles(case.angles_deg, case.radii_mm),
        stock=Stock.of(list(zip(case.sizes_g, case.counts))),
        correction_radius_mm=100.0,
        max_pieces_per_position=case.stack,
        max_mass_per_position_g=case.mass_limit_g,
        good_enough_gmm=case.good_enough_gmm,
        prefer_fewer_positions=prefer,
        max_nodes=max_nodes,
    )


def _summary(a) -> tuple[float, int, float, int]:
    return (abs(a.residual_gmm), a.piece_count, a.added_mass_g, len(a.placements))


@pytest.mark.parametrize("seed", range(60))
def test_equal_to_exhaustive_search_on_small_random_cases(seed: int) -> None:
    rng = random.Random(seed)
    case = _random_case(rng)
    prefer = seed % 5 == 0
    a = _allocate(case, prefer)
    rho, pieces, mass, npos = _summary(a)
    b_rho, b_pieces, b_mass, b_npos = brute_force(case, prefer)
    assert a.optimal
    tol = 1e-6 * max(abs(case.target), 1.0)
    g = case.good_enough_gmm
    assert max(rho, g) == pytest.approx(max(b_rho, g), abs=tol)
    if prefer:
        assert npos == b_npos
    assert pieces == b_pieces
    assert mass == pytest.approx(b_mass, abs=1e-6)
    assert rho == pytest.approx(b_rho, abs=tol)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [0, 2, 3])
def test_never_worse_than_milp_reference_on_larger_cases(seed: int) -> None:
    pytest.importorskip("scipy.optimize", reason="scipy is not installed (no build of it for this machine): "
                        "the mixed-integer reference needs it")
    rng = random.Random(1000 + seed)
    P = rng.choice([8, 12])
    K = rng.choice([4, 6])
    first = rng.uniform(0, 30)
    angles = [(first + 360 * i / P) % 360 for i in range(P)]
    sizes = sorted(rng.sample([0.5, 1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 7.5, 10.0, 15.0], K))
    counts = [rng.choice([2, 3, 4, None]) for _ in range(K)]
    t = rng.uniform(0, 2 * math.pi)
    target = rng.uniform(5, 20) * 120 * complex(math.cos(t), math.sin(t))
    g = rng.choice([0.01, 0.02, 0.05]) * abs(target)
    case = Case(target, angles, [120.0] * P, sizes, counts, rng.choice([2, 3]), None, g)
    a = allocate(case.target, Positions.at_angles(angles, 120.0), stock=Stock.of(list(zip(sizes, counts))),
                 max_pieces_per_position=case.stack, good_enough_gmm=g, max_nodes=10**6)
    # any MILP-feasible point is a valid allocation, so a time-limited MILP is still a fair bar
    ref = milp_reference(case, time_limit_s=2.0)
    assert ref is not None
    m_rho, m_pieces, m_mass = ref
    assert a.optimal
    rho, pieces, mass = abs(a.residual_gmm), a.piece_count, a.added_mass_g
    if m_rho <= g:
        # the MILP met the good-enough residual: so must we, with no more pieces, then no more mass
        assert rho <= g * (1 + 1e-9)
        assert (pieces, round(mass, 6)) <= (m_pieces, round(m_mass, 6))
    else:
        assert max(rho, g) <= max(m_rho, g) * (1 + 1e-9)


@pytest.mark.parametrize("seed", range(25))
def test_strip_search_agrees_with_the_general_search(seed: int) -> None:
    # The strip path (rounding to the nearest rung, vectorised sweeps) against the general
    # slot-by-slot branch and bound on the same problem: the same objective value.
    import numpy as np

    from runtrue.allocation.search import SearchProblem, search
    from runtrue.allocation.strip_search import strip_search

    rng = random.Random(500 + seed)
    P = rng.randint(1, 5)
    u = np.array([rng.choice([80.0, 120.0]) * np.exp(1j * rng.uniform(0, 2 * np.pi)) for _ in range(P)])
    w0, dw, L = rng.choice([0.5, 1.0, 2.0]), rng.choice([0.25, 0.5, 1.0]), rng.randint(2, 12)
    t = rng.uniform(0, 2 * np.pi)
    T = rng.uniform(1, 15) * 100 * complex(np.cos(t), np.sin(t))
    g = rng.choice([0.0, 0.01, 0.05]) * abs(T)
    n_rungs = np.array([rng.choice([L, L, L // 2, 0]) for _ in range(P)], dtype=np.int64)
    q = 1e-9 * max(abs(T), 1.0)
    res, chosen = strip_search(T, u, w0, dw, n_rungs, g, q, 10**7)
    sizes = w0 + dw * np.arange(L)
    mass_limit = np.where(n_rungs > 0, w0 + dw * (n_rungs - 1) + 1e-6, 0.0)
    prob = SearchProblem(T, u, sizes, np.full(L, 10**6), np.where(n_rungs > 0, 1, 0), mass_limit,
                         good_enough_gmm=g, quantum_gmm=q)
    ref = search(prob, max_nodes=10**7)
    assert res.optimal and ref.optimal
    assert res.key[:3] == ref.key[:3]  # residual level, pieces, mass
    assert abs(res.residual_gmm) == pytest.approx(abs(ref.residual_gmm), abs=1e-6 * abs(T))
    fitted = sum((w0 + dw * i) * u[p] for p, i in chosen)
    assert T - fitted == pytest.approx(res.residual_gmm)


@pytest.mark.parametrize("seed", range(15))
def test_old_weights_removal_equal_to_exhaustive_search(seed: int) -> None:
    # Old weights off the positions (welded, say) that may each stay or be removed: the
    # allocator must weigh every choice; exhaustive search over the choices and the pieces.
    import itertools

    from runtrue.allocation import ExistingWeight

    rng = random.Random(2000 + seed)
    case = _random_case(rng, max_positions=3, max_sizes=2)
    olds = [ExistingWeight(rng.choice([1.0, 2.0, 3.0]), rng.uniform(0, 360), 100.0, None, may_remove=True)
            for _ in range(rng.randint(1, 2))]
    a = allocate(case.target, Positions.at_angles(case.angles_deg, case.radii_mm),
                 stock=Stock.of(list(zip(case.sizes_g, case.counts))), correction_radius_mm=100.0,
                 max_pieces_per_position=case.stack, max_mass_per_position_g=case.mass_limit_g,
                 good_enough_gmm=case.good_enough_gmm, existing=olds, max_nodes=10**7)
    assert a.optimal
    best = None
    for r in range(len(olds) + 1):
        for removed in itertools.combinations(range(len(olds)), r):
            sub = Case(case.target + sum(olds[i].unbalance_gmm for i in removed), case.angles_deg, case.radii_mm,
                       case.sizes_g, case.counts, case.stack, case.mass_limit_g, case.good_enough_gmm)
            rho, pieces, mass, _ = brute_force(sub)
            kept = [i for i in range(len(olds)) if i not in removed]
            total = (round(max(rho, case.good_enough_gmm), 6), pieces + len(kept),
                     round(mass + sum(olds[i].mass_g for i in kept), 6), round(rho, 6))
            if best is None or total < best:
                best = total
    kept_mass = sum(olds[i].mass_g for i in a.kept_existing)
    got = (round(max(abs(a.residual_gmm), case.good_enough_gmm), 6), a.piece_count + len(a.kept_existing),
           round(a.added_mass_g + kept_mass, 6), round(abs(a.residual_gmm), 6))
    assert got[:3] == pytest.approx(best[:3], abs=2e-6)
