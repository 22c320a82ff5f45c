"""Influence-coefficient solutions against closed forms and independent solvers.

Published closed forms used as the yardstick (each computed here independently of the code
under test):
* single plane: the vector method, correction = -T * O / ((O+T) - O), i.e. trial mass times
  |O| / |T_effect| at the trial angle turned by the angle from the trial effect to -O
  (Wowk, *Machinery Vibration: Balancing*, McGraw-Hill 1995, single-plane vector method;
  ISO 21940-13:2012, field balancing, single plane) -- from memory.
* two planes: Cramer's rule on the 2x2 influence system (Thearle, "Dynamic balancing of
  rotating machinery in the field", Trans. ASME 56, 1934 -- the two-plane method; from memory).
* least squares: Goodman, J. Eng. Ind. 86(3), 1964 -- checked against numpy.linalg.lstsq.
The numbers in these tests are our own; no printed example could be consulted here.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest

from runtrue.balancing import (
    BalancingError,
    Run,
    Weight,
    correction_from_influence,
    net_correction,
    phasor,
    solve,
)
from runtrue.balancing.influence import CONDITION_WARN


def test_single_plane_matches_the_vector_method_by_hand() -> None:
    # Reference 7.9 at 41 deg; 15 g at 0 deg, 120 mm gives 4.6 at 97 deg (an example of our own).
    o = phasor(7.9, 41)
    ot = phasor(4.6, 97)
    t = ot - o  # effect of the trial weight
    # Hand form: mass = 15 * |O| / |T|; angle = trial angle + (angle of -O) - (angle of T).
    mass = 15 * abs(o) / abs(t)
    angle = (0 + math.degrees(cmath.phase(-o)) - math.degrees(cmath.phase(t))) % 360
    sol = solve([Run([], [o]), Run([Weight(1, 15, 0, 120)], [ot])])
    (c,) = sol.corrections
    assert c.plane == 1 and c.radius_mm == 120
    assert c.mass_g == pytest.approx(mass, rel=1e-12)
    assert c.angle_deg == pytest.approx(angle, abs=1e-9)
    assert abs(sol.predicted[0]) == pytest.approx(0, abs=1e-12)
    assert sol.method == "influence"
    # Independently: about 18.09 g at 35.6 deg (worked by hand on paper for this file).
    assert c.mass_g == pytest.approx(18.09, abs=0.01)
    assert c.angle_deg == pytest.approx(35.6, abs=0.1)


def test_correction_expressed_at_another_radius_scales_mass_by_radius_ratio() -> None:
    runs = [Run([], [phasor(7.9, 41)]), Run([Weight(1, 15, 0, 120)], [phasor(4.6, 97)])]
    at_trial = solve(runs).corrections[0]
    at_60 = solve(runs, radius_mm={1: 60}).corrections[0]
    assert at_60.radius_mm == 60
    assert at_60.mass_g == pytest.approx(at_trial.mass_g * 120 / 60)
    assert at_60.angle_deg == pytest.approx(at_trial.angle_deg)


def test_two_plane_matches_cramers_rule() -> None:
    o = np.array([phasor(5.2, 75), phasor(3.1, 200)])
    t1 = Weight(1, 20, 30, 150)
    t2 = Weight(2, 25, 270, 140)
    r1 = np.array([phasor(7.4, 101), phasor(2.2, 166)])
    r2 = np.array([phasor(4.0, 40), phasor(6.3, 255)])
    a = np.column_stack([(r1 - o) / t1.unbalance_gmm, (r2 - o) / t2.unbalance_gmm])
    det = a[0, 0] * a[1, 1] - a[0, 1] * a[1, 0]
    c1 = (-o[0] * a[1, 1] + o[1] * a[0, 1]) / det
    c2 = (-o[1] * a[0, 0] + o[0] * a[1, 0]) / det
    sol = solve([Run([], list(o)), Run([t1], list(r1)), Run([t2], list(r2))])
    assert sol.influence == pytest.approx(a, rel=1e-10)
    got = sol.correction_gmm
    assert got[0] == pytest.approx(c1, rel=1e-10)
    assert got[1] == pytest.approx(c2, rel=1e-10)
    assert [c.radius_mm for c in sol.corrections] == [150, 140]
    assert np.abs(sol.predicted) == pytest.approx([0, 0], abs=1e-10)


def test_least_squares_over_repeated_runs_matches_numpy_lstsq() -> None:
    rng = np.random.default_rng(7)
    a_true = np.array([[phasor(0.004, 30), phasor(0.001, 190)], [phasor(0.0015, 250), phasor(0.005, 80)]])
    u = np.array([phasor(900, 10), phasor(1300, 220)])
    weights = [[], [Weight(1, 10, 0, 100)], [Weight(2, 10, 90, 100)], [Weight(1, 10, 180, 100)],
               [Weight(1, 8, 45, 100), Weight(2, 6, 300, 100)], [Weight(2, 12, 200, 100)]]
    runs = []
    rows = []
    ys = []
    for ws in weights:
        w = np.zeros(2, dtype=complex)
        for wt in ws:
            w[wt.plane - 1] += wt.unbalance_gmm
        y = a_true @ (u + w) + 0.05 * (rng.normal(size=2) + 1j * rng.normal(size=2))
        runs.append(Run(ws, list(y)))
        rows.append([1, *w])
        ys.append(y)
    sol = solve(runs)
    b = np.linalg.lstsq(np.array(rows), np.array(ys), rcond=None)[0]
    assert sol.method == "least-squares"
    assert sol.reference == pytest.approx(list(b[0]), rel=1e-9)
    assert sol.influence == pytest.approx(b[1:].T, rel=1e-9)
    c_ref = -np.linalg.solve(b[1:].T, b[0])
    assert sol.correction_gmm == pytest.approx(list(c_ref), rel=1e-9)
    assert sol.fit_rms > 0


def test_trim_run_refines_the_coefficients() -> None:
    # Linear machine with noisy readings: adding a trim run brings the correction closer to truth.
    rng = np.random.default_rng(3)
    a_true = phasor(0.01, 130)
    u = phasor(2000, 40)
    errs_two, errs_more = [], []
    for _ in range(200):
        def rd(w: complex) -> complex:
            return a_true * (u + w) + 0.4 * complex(rng.normal(), rng.normal())
        base = [Run([], [rd(0)]), Run([Weight(1, 10, 0, 100)], [rd(1000)])]
        c2 = solve(base).correction_gmm[0]
        extra = [Run([Weight(1, 10, 120, 100)], [rd(phasor(1000, 120))]),
                 Run([Weight(1, 10, 240, 100)], [rd(phasor(1000, 240))])]
        c4 = solve(base + extra).correction_gmm[0]
        errs_two.append(abs(c2 + u))
        errs_more.append(abs(c4 + u))
    assert np.median(errs_more) < np.median(errs_two)


def test_several_pickups_one_plane_minimise_the_sum_of_squares() -> None:
    o = [phasor(3, 10), phasor(2, 100), phasor(1, 300)]
    t = [phasor(1, 80), phasor(3, 150), phasor(2, 280)]
    w = Weight(1, 5, 45, 80)
    sol = solve([Run([], o), Run([w], t)])
    a = (np.array(t) - np.array(o)) / w.unbalance_gmm
    c = -np.vdot(a, o) / np.vdot(a, a)  # normal equation for one unknown
    assert sol.correction_gmm[0] == pytest.approx(c, rel=1e-10)


def test_near_singular_two_plane_system_warns_with_the_threshold() -> None:
    o = [phasor(5, 0), phasor(5, 10)]
    # Both planes act almost identically on both pickups.
    t1 = Weight(1, 10, 0, 100)
    t2 = Weight(2, 10, 0, 100)
    r1 = [phasor(5, 0) + phasor(3, 90), phasor(5, 10) + phasor(3, 91)]
    r2 = [phasor(5, 0) + phasor(3, 92), phasor(5, 10) + phasor(3, 92)]
    sol = solve([Run([], o), Run([t1], r1), Run([t2], r2)])
    assert sol.condition_number > CONDITION_WARN
    assert any("condition number" in w for w in sol.warnings)


def test_well_separated_planes_do_not_warn() -> None:
    o = [phasor(5, 0), phasor(4, 60)]
    r1 = [phasor(5, 0) + phasor(3, 90), phasor(4, 60) + phasor(0.5, 300)]
    r2 = [phasor(5, 0) + phasor(0.4, 10), phasor(4, 60) + phasor(3, 180)]
    sol = solve([Run([], o), Run([Weight(1, 10, 0, 100)], r1), Run([Weight(2, 10, 0, 100)], r2)])
    assert sol.condition_number < 2
    assert sol.warnings == []


def test_singular_system_is_refused_not_answered() -> None:
    o = [phasor(5, 0), phasor(5, 10)]
    r = [phasor(6, 20), phasor(6, 30)]
    a1 = (np.array(r) - np.array(o)) / Weight(1, 10, 0, 100).unbalance_gmm
    r2 = list(np.array(o) + a1 * Weight(2, 10, 0, 100).unbalance_gmm)  # identical effect
    with pytest.raises(BalancingError, match="cannot tell"):
        solve([Run([], o), Run([Weight(1, 10, 0, 100)], r), Run([Weight(2, 10, 0, 100)], r2)])


def test_trial_effect_lost_in_the_noise_warns_how_much_bigger() -> None:
    runs = [Run([], [phasor(8, 40)], [0.3]), Run([Weight(1, 2, 0, 100)], [phasor(8.5, 42)], [0.3])]
    sol = solve(runs)
    msg = " ".join(sol.warnings)
    assert "times larger" in msg
    assert sol.mass_sd_g is not None and sol.mass_sd_g[0] > 0.2 * sol.corrections[0].mass_g


@pytest.mark.parametrize(
    ("runs", "match"),
    [
        ([Run([], [1 + 0j])], "need the reference run"),
        ([Run([], [1 + 0j]), Run([], [2 + 0j])], "no run has a weight"),
        ([Run([], [1 + 0j]), Run([Weight(2, 5, 0, 100)], [2 + 0j]), Run([Weight(2, 5, 90, 100)], [2j])],
         "never carry a weight"),
    ],
)
def test_bad_run_sets_are_refused_with_a_reason(runs: list[Run], match: str) -> None:
    with pytest.raises(BalancingError, match=match):
        solve(runs)


def test_too_few_runs_for_two_planes() -> None:
    with pytest.raises(BalancingError, match="need at least 3"):
        solve([Run([], [1 + 0j, 1j]), Run([Weight(1, 5, 0, 100), Weight(2, 5, 0, 100)], [2 + 0j, 2j])])


def test_zero_mass_nan_and_negative_radius_are_refused() -> None:
    ref = Run([], [1 + 0j])
    with pytest.raises(BalancingError, match="above 0 g"):
        solve([ref, Run([Weight(1, 0, 0, 100)], [2 + 0j])])
    with pytest.raises(BalancingError, match="radius"):
        solve([ref, Run([Weight(1, 5, 0, -100)], [2 + 0j])])
    with pytest.raises(BalancingError, match="finite"):
        solve([ref, Run([Weight(1, 5, 0, 100)], [complex(math.nan, 0)])])
    with pytest.raises(BalancingError, match="one reading per pickup"):
        solve([ref, Run([Weight(1, 5, 0, 100)], [2 + 0j, 1j])])


def test_same_weights_in_every_run_cannot_separate_planes() -> None:
    both = [Weight(1, 5, 0, 100), Weight(2, 5, 0, 100)]
    with pytest.raises(BalancingError, match="do not separate"):
        solve([Run([], [1 + 0j, 1j]), Run(both, [2 + 0j, 2j]), Run(both, [2.1 + 0j, 2j])])


def test_stored_coefficients_give_the_correction_directly() -> None:
    o = [phasor(5.2, 75), phasor(3.1, 200)]
    t1, t2 = Weight(1, 20, 30, 150), Weight(2, 25, 270, 140)
    r1 = [phasor(7.4, 101), phasor(2.2, 166)]
    r2 = [phasor(4.0, 40), phasor(6.3, 255)]
    first = solve([Run([], o), Run([t1], r1), Run([t2], r2)])
    again = correction_from_influence(first.influence, o, {1: 150, 2: 140})
    assert again.method == "stored"
    assert again.correction_gmm == pytest.approx(first.correction_gmm, rel=1e-10)
    with pytest.raises(BalancingError, match="pickup"):
        correction_from_influence(first.influence, o[:1], [150, 140])


def test_stored_coefficients_with_spreads_give_uncertainty_of_the_right_size() -> None:
    # One plane: C = -r / a, so sd along and across C are both spread / |a| (g*mm).
    a = np.array([[phasor(0.01, 60)]])
    sol = correction_from_influence(a, [phasor(5, 10)], [100], spreads=[0.1])
    sd_gmm = 0.1 / math.sqrt(2) / 0.01
    assert sol.mass_sd_g == pytest.approx([sd_gmm / 100], rel=1e-4)
    c = abs(sol.correction_gmm[0])
    assert sol.angle_sd_deg == pytest.approx([math.degrees(sd_gmm / c)], rel=1e-4)


def test_net_correction_when_the_trial_weight_stays_on() -> None:
    corr = [Weight(1, 18, 36, 120)]
    trial = [Weight(1, 15, 0, 120)]
    (net,) = net_correction(corr, trial)
    assert net.unbalance_gmm + trial[0].unbalance_gmm == pytest.approx(corr[0].unbalance_gmm)
    assert net.mass_g >= 0


def test_unknown_scatter_drops_weighting_and_says_so() -> None:
    runs = [Run([], [phasor(7.9, 41)], [math.inf]), Run([Weight(1, 15, 0, 120)], [phasor(4.6, 97)], [0.1])]
    sol = solve(runs)
    assert sol.mass_sd_g is None
    assert "unknown" in sol.warnings[0]
    plain = solve([Run(r.weights, r.readings) for r in runs])
    assert sol.correction_gmm == pytest.approx(plain.correction_gmm)


def test_more_planes_than_pickups_gives_the_smallest_weights_and_says_so() -> None:
    o = [phasor(4, 20)]
    r1 = [phasor(4, 20) + phasor(2, 100)]
    r2 = [phasor(4, 20) + phasor(1, 250)]
    sol = solve([Run([], o), Run([Weight(1, 10, 0, 100)], r1), Run([Weight(2, 10, 0, 100)], r2)])
    assert abs(sol.predicted[0]) == pytest.approx(0, abs=1e-12)
    assert any("smallest set of weights" in w for w in sol.warnings)
    # Minimum norm: C is a multiple of conj(a) (the row's pseudo-inverse direction).
    a = sol.influence[0]
    c = np.array(sol.correction_gmm)
    assert c == pytest.approx(-np.conj(a) * o[0] / np.vdot(a, a), rel=1e-9)


def test_phasor_wraps_large_angles_exactly() -> None:
    assert phasor(3.0, 41 + 360 * 1000) == pytest.approx(phasor(3.0, 41), abs=1e-12)
    assert phasor(3.0, -319) == pytest.approx(phasor(3.0, 41), abs=1e-12)
