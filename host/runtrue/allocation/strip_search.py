"""Exact search for strip cut to length at fixed positions (one strip piece per position).

Same objective and the same branch-and-bound argument as :mod:`runtrue.allocation.search`
(iterative deepening on the number of pieces, here equal to the number of positions used;
lexicographic optimistic keys from valid lower bounds), with two exact shortcuts that make it
fast for fine cutting steps, where a length ladder has hundreds of rungs:

* **Last position in closed form.**  With residual R and a strip piece of mass w at a position
  with vector u, ``|R − w·u|²`` is a convex quadratic in w, minimal at ``w* = Re(R·ū)/|u|²``.
  Over the arithmetic ladder ``w_i = w_0 + i·Δw`` (clamped to the allowed rungs) the best rung
  under the key is one of three: the rungs either side of ``w*`` (the smallest residual: a
  parabola is symmetric about its vertex), and the LIGHTEST rung on the best residual level
  those reach (level: ``max(|R|, g)`` rounded to the quantum; the rungs on it fill the interval
  ``|w − w*| ≤ sqrt(ρ² − d²)/|u|``, ρ the level's upper edge and d the distance of R from the
  line of u; they tie on the first key component, so the lightest wins).  All
  three are tried, so the last position is exact for the whole key, mass included.
* **Last two positions by a vectorised sweep.**  For each pair of positions, every rung of the
  first is tried at once (numpy) and the second is found by rounding.

Deeper levels fix earlier positions one by one (all rungs of a position at once, cut by the
support-function bound) and finish with the sweep.  The node budget and its statement are as
in :mod:`runtrue.allocation.search`.
"""

from __future__ import annotations

import math

import numpy as np

from runtrue.allocation.search_model import DIR_IM, DIR_RE, SearchKey, SearchResult, relaxation_bound_gmm


class _Budget(Exception):
    pass


class StripSearch:
    def __init__(
        self,
        target: complex,
        u: np.ndarray,
        w0_g: float,
        dw_g: float,
        n_rungs: np.ndarray,  # (P,) rungs allowed at each position (0: none)
        good_enough_gmm: float,
        quantum_gmm: float,
        max_nodes: int,
    ) -> None:
        self.T = target
        self.u = u
        self.w0 = w0_g
        self.dw = dw_g
        self.n_rungs = n_rungs
        self.g = good_enough_gmm
        self.q = quantum_gmm
        self.max_nodes = max_nodes
        self.nodes = 0
        self.P = len(u)
        self.uu = np.abs(u) ** 2
        wmax = w0_g + dw_g * np.maximum(n_rungs - 1, 0)
        proj = (u[:, None] * np.conj(DIR_RE + 1j * DIR_IM)[None, :]).real  # (P, J)
        contrib = np.where(n_rungs[:, None] > 0, np.maximum(proj, 0.0) * wmax[:, None], 0.0)
        # h[p] = max over positions >= p of a piece's reach along each direction
        h = np.zeros((self.P + 1, len(DIR_RE)))
        for p in range(self.P - 1, -1, -1):
            h[p] = np.maximum(h[p + 1], contrib[p])
        self.h = h
        self.best_key: SearchKey | None = None
        self.best: list[tuple[int, int]] = []
        self.best_R = target

    def key(self, rho: float, pieces: int, mass: float) -> SearchKey:
        return (
            int(math.floor(max(rho, self.g) / self.q + 0.5)),
            pieces,
            int(math.floor(mass * 1e6 + 0.5)),
            int(math.floor(rho / self.q + 0.5)),
        )

    def _keys_order(self, rho: np.ndarray, mass: np.ndarray) -> np.ndarray:
        level = np.floor(np.maximum(rho, self.g) / self.q + 0.5)
        return np.lexsort((np.floor(rho / self.q + 0.5), np.floor(mass * 1e6 + 0.5), level))

    def _candidate_rungs(self, R: np.ndarray, q: np.ndarray | int) -> tuple[np.ndarray, np.ndarray]:
        """For residuals ``R`` and positions ``q`` (broadcast): the three candidate rungs (see the
        module docstring) as (index into R, rung), flattened."""
        u = self.u[q]
        uu = self.uu[q]
        top = np.broadcast_to(self.n_rungs[q] - 1, np.shape(R))
        wstar = (R * np.conj(u)).real / uu
        x = (wstar - self.w0) / self.dw
        lo = np.clip(np.floor(x), 0, top)
        hi = np.clip(np.ceil(x), 0, top)
        # The lightest rung on the best residual level reachable here: every rung with
        # |residual| < (level + 1/2)·quantum ties on the first key component (the level is
        # max(|R|, g) rounded to the quantum), so the lightest of them is the candidate.
        r_lo = np.abs(R - (self.w0 + self.dw * lo) * u)
        r_hi = np.abs(R - (self.w0 + self.dw * hi) * u)
        level = np.floor(np.maximum(np.minimum(r_lo, r_hi), self.g) / self.q + 0.5)
        radius = (level + 0.5) * self.q * (1.0 - 1e-12)
        d = np.abs((R * np.conj(u)).imag) / np.sqrt(uu)
        half = np.sqrt(np.maximum(radius * radius - d * d, 0.0)) / np.sqrt(uu)
        light = np.clip(np.ceil((wstar - half - self.w0) / self.dw - 1e-9), 0, top)
        light = np.where(d <= radius, light, lo)
        idx = np.arange(np.size(R))
        rungs = np.concatenate([lo.ravel(), hi.ravel(), light.ravel()]).astype(np.int64)
        return np.concatenate([idx, idx, idx]), rungs

    def _offer(self, rho: float, pieces: int, mass: float, chosen: list[tuple[int, int]], R: complex) -> None:
        k = self.key(rho, pieces, mass)
        if self.best_key is None or k < self.best_key:
            self.best_key, self.best, self.best_R = k, list(chosen), R

    def _tick(self) -> None:
        self.nodes += 1
        if self.nodes > self.max_nodes:
            raise _Budget

    def _last_one(self, R: complex, start: int, pieces: int, mass: float, chosen: list[tuple[int, int]]) -> None:
        qs = np.arange(start, self.P)
        qs = qs[self.n_rungs[qs] > 0]
        if not len(qs):
            return
        self._tick()
        which, i = self._candidate_rungs(np.full(len(qs), R, dtype=complex), qs)
        qs = qs[which]
        w = self.w0 + self.dw * i
        Rn = R - w * self.u[qs]
        rho = np.abs(Rn)
        j = int(self._keys_order(rho, mass + w)[0])
        self._offer(float(rho[j]), pieces, mass + float(w[j]), chosen + [(int(qs[j]), int(i[j]))], complex(Rn[j]))

    def _last_two(self, R: complex, start: int, pieces: int, mass: float, chosen: list[tuple[int, int]]) -> None:
        for p in range(start, self.P):
            if self.n_rungs[p] == 0:
                continue
            ip = np.arange(self.n_rungs[p])
            wp = self.w0 + self.dw * ip
            R1 = R - wp * self.u[p]
            if self.best_key is not None:
                t = R1.real[:, None] * DIR_RE[None, :] + R1.imag[:, None] * DIR_IM[None, :]
                lb = np.maximum(0.0, np.max(t - self.h[p + 1][None, :], axis=1))
                keep = np.floor(np.maximum(lb, self.g) / self.q + 0.5) <= self.best_key[0]
                if not keep.any():
                    continue
                ip, wp, R1 = ip[keep], wp[keep], R1[keep]
            for q in range(p + 1, self.P):
                if self.n_rungs[q] == 0:
                    continue
                self._tick()
                which, iq = self._candidate_rungs(R1, q)
                wq = self.w0 + self.dw * iq
                Rn = R1[which] - wq * self.u[q]
                rho = np.abs(Rn)
                m = mass + wp[which] + wq
                j = int(self._keys_order(rho, m)[0])
                k = self.key(float(rho[j]), pieces, float(m[j]))
                if self.best_key is None or k < self.best_key:
                    self.best_key = k
                    self.best = chosen + [(p, int(ip[which[j]])), (q, int(iq[j]))]
                    self.best_R = complex(Rn[j])

    def _dfs(self, R: complex, start: int, b: int, pieces: int, mass: float, chosen: list[tuple[int, int]]) -> None:
        if b == 1:
            self._last_one(R, start, pieces, mass, chosen)
            return
        if b == 2:
            self._last_two(R, start, pieces, mass, chosen)
            return
        for p in range(start, self.P - b + 1):
            if self.n_rungs[p] == 0:
                continue
            self._tick()
            ip = np.arange(self.n_rungs[p])
            wp = self.w0 + self.dw * ip
            R1 = R - wp * self.u[p]
            t = R1.real[:, None] * DIR_RE[None, :] + R1.imag[:, None] * DIR_IM[None, :]
            lb = np.maximum(0.0, np.max(t - (b - 1) * self.h[p + 1][None, :], axis=1))
            if self.best_key is not None:
                level = np.floor(np.maximum(lb, self.g) / self.q + 0.5)
                mass_lb = mass + wp + (b - 1) * self.w0
                ok = (level < self.best_key[0]) | (
                    (level == self.best_key[0]) & ((pieces < self.best_key[1]) | (
                        (pieces == self.best_key[1]) & (np.floor(mass_lb * 1e6 + 0.5) <= self.best_key[2]))))
                ip = ip[ok]
                wp = wp[ok]
                R1 = R1[ok]
            for j in range(len(ip)):
                self._dfs(complex(R1[j]), p + 1, b - 1, pieces, mass + float(wp[j]), chosen + [(p, int(ip[j]))])

    def can_improve(self, k: int) -> bool:
        if self.best_key is None:
            return True
        t = self.T.real * DIR_RE + self.T.imag * DIR_IM
        lb = max(0.0, float(np.max(t - k * self.h[0])))
        opt = self.key(lb, k, k * self.w0)
        return opt < self.best_key


def strip_search(
    target: complex,
    u: np.ndarray,
    w0_g: float,
    dw_g: float,
    n_rungs: np.ndarray,
    good_enough_gmm: float,
    quantum_gmm: float,
    max_nodes: int,
) -> tuple[SearchResult, list[tuple[int, int]]]:
    """Run the strip search; returns the result and the chosen (position, rung) pairs."""
    s = StripSearch(target, u, w0_g, dw_g, n_rungs, good_enough_gmm, quantum_gmm, max_nodes)
    s._offer(abs(target), 0, 0.0, [], target)
    kmax = int((n_rungs > 0).sum())
    complete = 0
    optimal = True
    try:
        for k in range(1, kmax + 1):
            if not s.can_improve(k):
                if not any(s.can_improve(kk) for kk in range(k + 1, kmax + 1)):
                    complete = kmax
                    break
                complete = k
                continue
            s._dfs(target, 0, k, k, 0.0, [])
            complete = k
    except _Budget:
        optimal = False
    wmax = w0_g + dw_g * np.maximum(n_rungs - 1, 0)
    rb = relaxation_bound_gmm(target, u, np.where(n_rungs > 0, wmax, 0.0), float(np.sum(wmax)))
    res = SearchResult({}, s.best_R, s.best_key or (), optimal, complete, s.nodes, rb, True, [])
    return res, s.best
