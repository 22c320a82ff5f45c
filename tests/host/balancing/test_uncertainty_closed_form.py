"""The correction's uncertainty in closed form agrees with refitting per reading.

Yardstick: first-order propagation (JCGM 100:2008, GUM, 5.1) with sensitivities by central
finite differences of the whole least-squares solution (``uncertainty.propagate``, one refit per
reading part), against the closed-form derivative the engine now uses
(``influence._sensitivities``).  Invented machines; 1 % agreement is asked.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from runtrue.balancing import Run, Weight, correction_from_influence, solve
from runtrue.balancing import influence as infl
from runtrue.balancing.uncertainty import propagate


def _runs(rng: np.random.Generator, n_runs: int, n_pickups: int, n_planes: int) -> list[Run]:
    a = (rng.normal(size=(n_pickups, n_planes)) + 1j * rng.normal(size=(n_pickups, n_planes))) * 1e-3
    u = (rng.normal(size=n_planes) + 1j * rng.normal(size=n_planes)) * 500
    runs = []
    for k in range(n_runs):
        ws = [] if k == 0 else [Weight(1 + (k - 1) % n_planes, 10.0 + k % 3, float(rng.uniform(0, 360)), 100.0)]
        tot = u.copy()
        for w in ws:
            tot[w.plane - 1] += w.unbalance_gmm
        y = a @ tot
        s = 0.02 * np.abs(y) + 1e-4
        y = y + s / math.sqrt(2) * (rng.normal(size=n_pickups) + 1j * rng.normal(size=n_pickups))
        runs.append(Run(ws, list(y), list(s)))
    return runs


@pytest.mark.parametrize("n_runs,n_pickups,n_planes", [(3, 2, 2), (7, 3, 2), (5, 1, 1), (9, 2, 2)])
def test_closed_form_uncertainty_matches_refitting_per_reading(n_runs: int, n_pickups: int, n_planes: int) -> None:
    runs = _runs(np.random.default_rng(n_runs * 10 + n_pickups), n_runs, n_pickups, n_planes)
    sol = solve(runs)
    x = infl._design(runs, n_planes)
    y = np.array([[complex(z) for z in r.readings] for r in runs])
    wts = infl._row_weights(runs)
    sd = np.array([r.spreads for r in runs], dtype=float)

    def refit(yy: np.ndarray) -> np.ndarray:
        rr, aa = infl._fit(x, yy, wts)
        return infl._correct(aa, rr)

    along, across = propagate(refit, y, sd, refit(y))
    c = np.array(sol.correction_gmm)
    radii = np.array([w.radius_mm for w in sol.corrections])
    assert sol.mass_sd_g is not None and sol.angle_sd_deg is not None
    assert np.array(sol.mass_sd_g) * radii == pytest.approx(along, rel=0.01)
    assert np.radians(sol.angle_sd_deg) * np.abs(c) == pytest.approx(across, rel=0.01)


def test_stored_coefficients_uncertainty_matches_differences() -> None:
    a = np.array([[0.002 + 0.001j, 0.0005j], [0.0003, 0.0015 - 0.0004j], [0.001, 0.001]])
    reading = [0.8 + 0.2j, -0.3 + 0.5j, 0.4 - 0.1j]
    spreads = [0.02, 0.03, 0.05]
    sol = correction_from_influence(a, reading, [100.0, 100.0], spreads)
    c0 = infl._correct(a, np.array(reading))
    along, across = propagate(lambda yy: infl._correct(a, yy[0]), np.array([reading]), np.array([spreads]), c0)
    assert np.array(sol.mass_sd_g) * 100.0 == pytest.approx(along, rel=0.01)
    assert np.radians(sol.angle_sd_deg) * np.abs(c0) == pytest.approx(across, rel=0.01)
