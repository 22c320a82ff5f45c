"""Property tests of the influence-coefficient engine on noise-free and noisy linear machines.

The yardstick is the linear model itself (reading = A * (u + weights)), built here from random
coefficients, and numpy.linalg.lstsq as an independent least-squares solver.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from runtrue.balancing import Run, Weight, solve
from runtrue.balancing.influence import normalised_condition

pytestmark = pytest.mark.slow   # property tests: hundreds of generated cases

angles = st.floats(0, 360, allow_nan=False, exclude_max=True)


@st.composite
def machines(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray, list[list[Weight]]]:
    n_planes = draw(st.integers(1, 3))
    n_pickups = draw(st.integers(n_planes, n_planes + 2))
    a = np.array(
        [[cmath.rect(draw(st.floats(0.1, 10)) * 1e-3, math.radians(draw(angles))) for _ in range(n_planes)]
         for _ in range(n_pickups)]
    )
    assume(normalised_condition(a) < 30)
    u = np.array([cmath.rect(draw(st.floats(100, 5000)), math.radians(draw(angles))) for _ in range(n_planes)])
    runs: list[list[Weight]] = [[]]
    for p in range(1, n_planes + 1):
        runs.append([Weight(p, draw(st.floats(1, 50)), draw(angles), draw(st.floats(20, 300)))])
    return a, u, runs


def _readings(a: np.ndarray, u: np.ndarray, ws: list[Weight]) -> list[complex]:
    w = np.zeros(a.shape[1], dtype=complex)
    for wt in ws:
        w[wt.plane - 1] += wt.unbalance_gmm
    return list(a @ (u + w))


def _runs(a: np.ndarray, u: np.ndarray, weights: list[list[Weight]]) -> list[Run]:
    return [Run(ws, _readings(a, u, ws)) for ws in weights]


@settings(max_examples=60, deadline=None)
@given(machines())
def test_noise_free_machine_gives_true_coefficients_and_exact_correction(m) -> None:
    a, u, weights = m
    sol = solve(_runs(a, u, weights))
    assert sol.influence == pytest.approx(a, rel=1e-7, abs=1e-12)
    assert sol.correction_gmm == pytest.approx(list(-u), rel=1e-7)
    assert all(c.mass_g >= 0 and 0 <= c.angle_deg < 360 for c in sol.corrections)


@settings(max_examples=60, deadline=None)
@given(machines(), angles)
def test_moving_the_reference_mark_rotates_the_correction_by_the_same_angle(m, shift_deg: float) -> None:
    # Every phase (reading lags and weight angles) measured from a mark moved by shift_deg.
    a, u, weights = m
    base = solve(_runs(a, u, weights))
    rot = cmath.rect(1.0, math.radians(shift_deg))
    runs = [
        Run([Weight(w.plane, w.mass_g, w.angle_deg + shift_deg, w.radius_mm) for w in ws],
            [z * rot for z in _readings(a, u, ws)])
        for ws in weights
    ]
    moved = solve(runs)
    assert moved.correction_gmm == pytest.approx([c * rot for c in base.correction_gmm], rel=1e-7)


@settings(max_examples=60, deadline=None)
@given(machines(), angles)
def test_rotating_every_reading_phase_leaves_the_correction_unchanged(m, shift_deg: float) -> None:
    # A constant phase offset of the pickups (e.g. their angle to the reference sensor) cancels.
    a, u, weights = m
    base = solve(_runs(a, u, weights))
    rot = cmath.rect(1.0, math.radians(shift_deg))
    runs = [Run(ws, [z * rot for z in _readings(a, u, ws)]) for ws in weights]
    assert solve(runs).correction_gmm == pytest.approx(base.correction_gmm, rel=1e-7)


@settings(max_examples=60, deadline=None)
@given(machines(), st.floats(1e-3, 1e3))
def test_scaling_the_readings_leaves_the_correction_unchanged(m, k: float) -> None:
    # Changing the vibration unit (g to mm/s at one speed, say) multiplies every reading alike.
    a, u, weights = m
    base = solve(_runs(a, u, weights))
    runs = [Run(ws, [z * k for z in _readings(a, u, ws)]) for ws in weights]
    scaled = solve(runs)
    assert scaled.correction_gmm == pytest.approx(base.correction_gmm, rel=1e-7)
    assert scaled.influence == pytest.approx(base.influence * k, rel=1e-7)


@settings(max_examples=40, deadline=None)
@given(machines(), st.integers(1, 4), st.integers(0, 2**32 - 1))
def test_least_squares_with_repeated_runs_matches_numpy_lstsq(m, extra: int, seed: int) -> None:
    a, u, weights = m
    rng = np.random.default_rng(seed)
    weights = weights + [weights[1 + i % (len(weights) - 1)] for i in range(extra)]
    noise = 0.02 * float(np.max(np.abs(a @ u)))
    runs, rows, ys = [], [], []
    for ws in weights:
        y = np.array(_readings(a, u, ws)) + noise * (rng.normal(size=a.shape[0]) + 1j * rng.normal(size=a.shape[0]))
        w = np.zeros(a.shape[1], dtype=complex)
        for wt in ws:
            w[wt.plane - 1] += wt.unbalance_gmm
        runs.append(Run(ws, list(y)))
        rows.append([1, *w])
        ys.append(y)
    sol = solve(runs)
    b = np.linalg.lstsq(np.array(rows), np.array(ys), rcond=None)[0]
    assert sol.influence == pytest.approx(b[1:].T, rel=1e-7, abs=1e-12)
    c = np.linalg.lstsq(b[1:].T, -b[0], rcond=None)[0]
    assert sol.correction_gmm == pytest.approx(list(c), rel=1e-6)
