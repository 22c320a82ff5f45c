"""Reference solvers for the weight allocator's tests and benchmark (never used at run time).

* ``brute_force``: every allocation enumerated, the allocator's stated objective applied literally.
* ``milp_reference``: the same problem as a mixed-integer programme solved by scipy's ``milp``
  (HiGHS).  The Euclidean residual is replaced by a regular N-gon norm
  ``z = max_i (R·d_i)`` over N unit directions; for any vector ``cos(π/N)·|R| ≤ z ≤ |R|``
  (the N-gon circumscribing the unit circle), so with N = 256 the polygon norm is within
  7.6e-5 (relative) of the true residual.  Constraining ``z ≤ g·cos(π/N)`` guarantees
  ``|R| ≤ g`` for every MILP-feasible point, so the MILP can only be more restrictive than the
  true problem: the exact allocator must never do worse.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np


@dataclass
class Case:
    target: complex
    angles_deg: list[float]
    radii_mm: list[float]
    sizes_g: list[float]
    counts: list[int | None]
    stack: int | None
    mass_limit_g: float | None
    good_enough_gmm: float


def _u(case: Case) -> np.ndarray:
    return np.array([r * np.exp(1j * math.radians(a)) for a, r in zip(case.angles_deg, case.radii_mm)])


def brute_force(case: Case, prefer_fewer_positions: bool = False, quantum_fraction: float = 1e-7) -> tuple:
    """(residual, pieces, mass, positions) of the best allocation, by full enumeration."""
    u = _u(case)
    P, K = len(u), len(case.sizes_g)
    cap = [c if c is not None else 10**6 for c in case.counts]
    S = case.stack if case.stack is not None else sum(min(c, 8) for c in cap)
    per_pos: list[tuple[int, ...]] = []
    for s in range(S + 1):
        for combo in itertools.combinations_with_replacement(range(K), s):
            v = [0] * K
            for k in combo:
                v[k] += 1
            if all(v[k] <= cap[k] for k in range(K)):
                mass = sum(v[k] * case.sizes_g[k] for k in range(K))
                if case.mass_limit_g is None or mass <= case.mass_limit_g + 1e-9:
                    per_pos.append(tuple(v))
    best = None
    g = case.good_enough_gmm
    scale = max(abs(case.target), 1.0)
    for choice in itertools.product(per_pos, repeat=P):
        used = [sum(c[k] for c in choice) for k in range(K)]
        if any(used[k] > cap[k] for k in range(K)):
            continue
        masses = [sum(c[k] * case.sizes_g[k] for k in range(K)) for c in choice]
        R = case.target - sum(m * u[p] for p, m in enumerate(masses))
        rho = abs(R)
        pieces = sum(sum(c) for c in choice)
        npos = sum(1 for c in choice if sum(c) > 0)
        q = quantum_fraction * scale
        level = math.floor(max(rho, g) / q + 0.5)
        if prefer_fewer_positions:
            key = (level, npos, pieces, round(sum(masses), 6), math.floor(rho / q + 0.5))
        else:
            key = (level, pieces, round(sum(masses), 6), math.floor(rho / q + 0.5), npos)
        if best is None or key < best[0]:
            best = (key, (rho, pieces, sum(masses), npos))
    assert best is not None
    return best[1]


def milp_reference(case: Case, n_sides: int = 256, time_limit_s: float = 60.0) -> tuple | None:
    """(residual, pieces, mass) by scipy.optimize.milp, lexicographic in two or three stages."""
    from scipy.optimize import Bounds, LinearConstraint, milp

    u = _u(case)
    P, K = len(u), len(case.sizes_g)
    n = P * K
    m = np.array(case.sizes_g, dtype=float)
    vec = np.array([m[k] * u[p] for p in range(P) for k in range(K)])
    cap = [c if c is not None else 10**4 for c in case.counts]
    ub_x = np.array([min(cap[k], case.stack if case.stack is not None else cap[k]) for p in range(P) for k in range(K)],
                    dtype=float)
    dirs = np.exp(1j * np.linspace(0, 2 * np.pi, n_sides, endpoint=False))
    # variables: x (n), z (1)
    rows, lo, hi = [], [], []
    # polygon: (T - Σ x v)·d <= z  ->  -Σ x (v·d) - z <= -(T·d)
    A_poly = np.zeros((n_sides, n + 1))
    A_poly[:, :n] = -(vec[None, :] * np.conj(dirs[:, None])).real
    A_poly[:, n] = -1.0
    b_poly = -(case.target * np.conj(dirs)).real
    rows.append(A_poly)
    lo.append(np.full(n_sides, -np.inf))
    hi.append(b_poly)
    if case.stack is not None:
        A = np.zeros((P, n + 1))
        for p in range(P):
            A[p, p * K:(p + 1) * K] = 1
        rows.append(A)
        lo.append(np.zeros(P))
        hi.append(np.full(P, case.stack, dtype=float))
    if case.mass_limit_g is not None:
        A = np.zeros((P, n + 1))
        for p in range(P):
            A[p, p * K:(p + 1) * K] = m
        rows.append(A)
        lo.append(np.zeros(P))
        hi.append(np.full(P, case.mass_limit_g + 1e-9))
    A = np.zeros((K, n + 1))
    for k in range(K):
        A[k, k:n:K] = 1
    rows.append(A)
    lo.append(np.zeros(K))
    hi.append(np.array(cap, dtype=float))
    A_all = np.vstack(rows)
    lo_all = np.concatenate(lo)
    hi_all = np.concatenate(hi)
    integrality = np.concatenate([np.ones(n), [0]])
    pieces_c = np.concatenate([np.ones(n), [0.0]])
    mass_c = np.concatenate([np.tile(m, P), [0.0]])
    cos_n = math.cos(math.pi / n_sides)
    opts = {"time_limit": time_limit_s}

    def solve(c: np.ndarray, z_max: float, extra: list[tuple[np.ndarray, float, float]] = ()) -> np.ndarray | None:
        A2, l2, h2 = A_all, lo_all, hi_all
        for row, lo_e, hi_e in extra:
            A2 = np.vstack([A2, row])
            l2 = np.append(l2, lo_e)
            h2 = np.append(h2, hi_e)
        bounds = Bounds(np.zeros(n + 1), np.concatenate([ub_x, [z_max]]))
        res = milp(c, constraints=LinearConstraint(A2, l2, h2), integrality=integrality, bounds=bounds,
                   options=opts)
        if res.x is None:
            return None
        return res.x

    g = case.good_enough_gmm
    x = solve(pieces_c, g * cos_n) if g > 0 else None
    if x is None:
        # the good-enough residual cannot be met: smallest polygon residual first
        zc = np.zeros(n + 1)
        zc[n] = 1.0
        x0 = solve(zc, np.inf)
        if x0 is None:
            return None
        z_best = float(x0[n])
        x = solve(pieces_c, z_best * (1 + 1e-9) + 1e-9)
        if x is None:
            x = x0
        z_max = z_best * (1 + 1e-9) + 1e-9
    else:
        z_max = g * cos_n
    xr = np.round(x[:n])
    pieces = int(xr.sum())
    x2 = solve(mass_c, z_max, [(pieces_c, pieces - 0.5, pieces + 0.5)])
    if x2 is not None:
        xr = np.round(x2[:n])
    R = case.target - complex(np.sum(xr * vec))
    return abs(R), int(xr.sum()), float(np.sum(xr * np.tile(m, P)))
