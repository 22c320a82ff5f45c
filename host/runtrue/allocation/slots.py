"""The slots of a weight search (one position and one piece size each), the state of the pieces
placed, the objective's keys, and the local search that improves the best allocation found once
the exact search has spent its budget.

The exact search itself (branch and bound, and what it proves) is
:mod:`runtrue.allocation.search`, which builds on :class:`Slots`.  The local search is plain
neighbourhood descent (e.g. Papadimitriou & Steiglitz, *Combinatorial Optimization*, 1982,
ch. 19, "local search"; from memory): it can only lower the incumbent and proves nothing.
"""

from __future__ import annotations

import math

import numpy as np

from runtrue.allocation.search_model import DIRS, N_DIRECTIONS, SearchKey, SearchProblem

#: the pair table holds every slot pair; above this many slots it is not built
MAX_SLOTS_FOR_PAIRS = 700


class Slots:
    """The slots of ``prob``, ordered for the search, with their vectors and bounds, and the
    pieces placed so far."""

    def __init__(self, prob: SearchProblem, max_nodes: int) -> None:
        self.prob = prob
        self.max_nodes = max_nodes
        self.nodes = 0
        P = len(prob.u)
        K = len(prob.sizes_g)
        T = prob.target_gmm
        # order positions by angular distance from the correction, nearest first
        if abs(T) > 0:
            ang = np.abs(np.angle(prob.u * np.conj(T)))
        else:
            ang = np.zeros(P)
        order = sorted(range(P), key=lambda p: (round(float(ang[p]), 9), p))
        size_order = sorted(range(K), key=lambda k: (prob.sizes_g[k], k))
        spos, ssize = [], []
        for p in order:
            for k in size_order:
                if prob.counts[k] > 0 and prob.sizes_g[k] <= prob.mass_limit_g[p] + 1e-9 and prob.stack_limit[p] > 0:
                    spos.append(p)
                    ssize.append(k)
        self.spos = np.array(spos, dtype=np.int64)
        self.ssize = np.array(ssize, dtype=np.int64)
        self.smass = prob.sizes_g[self.ssize] if len(ssize) else np.zeros(0)
        self.svec = (self.smass * prob.u[self.spos]) if len(spos) else np.zeros(0, complex)
        n = len(spos)
        self.n = n
        # suffix support h_s(d) = max(0, max_{t>=s} svec_t·d)
        proj = (self.svec[:, None] * np.conj(DIRS)[None, :]).real if n else np.zeros((0, N_DIRECTIONS))
        h = np.zeros((n + 1, N_DIRECTIONS))
        for s in range(n - 1, -1, -1):
            h[s] = np.maximum(h[s + 1], proj[s])
        self.h = h
        # suffix minimum piece mass
        mmin = np.full(n + 1, np.inf)
        for s in range(n - 1, -1, -1):
            mmin[s] = min(mmin[s + 1], self.smass[s])
        self.mmin = mmin
        self.stack_used = np.zeros(P, dtype=np.int64)
        self.mass_used = np.zeros(P)
        self.count_used = np.zeros(K, dtype=np.int64)
        self.stack_one = prob.size_stack_one if prob.size_stack_one is not None else np.zeros(K, bool)
        self.size_used_at = np.zeros((P, K), dtype=np.int64) if self.stack_one.any() else None
        self.must = prob.must_use if prob.must_use is not None else np.zeros(K, bool)
        self.q = prob.quantum_gmm
        self.g = prob.good_enough_gmm
        self.best_key: SearchKey | None = None
        self.best_slots: list[int] = []
        self.best_residual: complex = T
        self.chosen: list[int] = []
        self.found_here = False
        self._pair_table: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None = None

    # keys ---------------------------------------------------------------
    def _qr(self, x: float) -> int:
        return int(math.floor(x / self.q + 0.5))

    def _qm(self, m: float) -> int:
        return int(math.floor(m * 1e6 + 0.5))

    def make_key(self, rho: float, pieces: int, mass: float, npos: int) -> SearchKey:
        level = self._qr(max(rho, self.g))
        if self.prob.prefer_fewer_positions:
            return (level, npos, pieces, self._qm(mass), self._qr(rho))
        return (level, pieces, self._qm(mass), self._qr(rho), npos)

    # improvement after the budget --------------------------------------------
    def _keys(self, rho: np.ndarray, pieces: np.ndarray, mass: np.ndarray, npos: np.ndarray) -> np.ndarray:
        """Indices sorting candidate moves by the objective (best first)."""
        level = np.floor(np.maximum(rho, self.g) / self.q + 0.5)
        rq = np.floor(rho / self.q + 0.5)
        mq = np.floor(mass * 1e6 + 0.5)
        if self.prob.prefer_fewer_positions:
            return np.lexsort((rq, mq, pieces, npos, level))
        return np.lexsort((npos, rq, mq, pieces, level))

    def _set_state(self, slots: list[int]) -> None:
        self.stack_used[:] = 0
        self.mass_used[:] = 0.0
        self.count_used[:] = 0
        for s in slots:
            self.stack_used[self.spos[s]] += 1
            self.mass_used[self.spos[s]] += self.smass[s]
            self.count_used[self.ssize[s]] += 1

    def _add_feasible(self) -> np.ndarray:
        prob = self.prob
        return (
            (self.stack_used[self.spos] < prob.stack_limit[self.spos])
            & (self.count_used[self.ssize] < prob.counts[self.ssize])
            & (self.mass_used[self.spos] + self.smass <= prob.mass_limit_g[self.spos] + 1e-9)
        )

    def improve(self, max_moves: int = 60) -> None:
        """Local search from the incumbent once the exact search has run out of budget.

        A move takes off zero, one or two of the pieces placed and puts on zero, one or two
        pieces (pairs come from a table of all slot pairs sorted by their vector's x, so only
        pairs landing near the residual are looked at).  The best move by the objective is
        taken while it improves the incumbent.  This can only lower the incumbent; it proves
        nothing (the guarantee stays that of the exact phase).
        """
        if self.n == 0 or self.best_key is None or self.n > MAX_SLOTS_FOR_PAIRS:
            return
        prob = self.prob
        ia, ib, pv, xs = self._pairs()
        slots = list(self.best_slots)
        R = self.best_residual
        for _ in range(max_moves):
            width = max(abs(R), self.g) * (1 + 1e-9) + self.q
            removable = sorted({c for c in slots if not self.must[self.ssize[c]]})
            removal_sets: list[list[int]] = [[]] + [[c] for c in removable]
            for i, c in enumerate(removable):
                for d in removable[i:]:
                    if c != d or slots.count(c) >= 2:
                        removal_sets.append([c, d])
            best: tuple[SearchKey, list[int], complex] | None = None
            for rem in removal_sets:
                rest = list(slots)
                for c in rem:
                    rest.remove(c)
                Rr = R + sum((self.svec[c] for c in rem), 0j)
                self._set_state(rest)
                pieces = len(rest) + prob.base_pieces
                mass = prob.base_mass_g + float(sum(self.smass[c] for c in rest))
                npos = int((self.stack_used > 0).sum())
                if rem:
                    k0 = self.make_key(abs(Rr), pieces, mass, npos)
                    if best is None or k0 < best[0]:
                        best = (k0, rest, Rr)
                newpos = (self.stack_used[self.spos] == 0).astype(np.int64)
                idx = np.nonzero(self._add_feasible())[0]
                if len(idx):
                    rho1 = np.abs(Rr - self.svec[idx])
                    o = self._keys(rho1, np.full(len(idx), pieces + 1), mass + self.smass[idx], npos + newpos[idx])
                    j = int(idx[o[0]])
                    k1 = self.make_key(abs(Rr - self.svec[j]), pieces + 1, mass + self.smass[j], npos + int(newpos[j]))
                    if best is None or k1 < best[0]:
                        best = (k1, rest + [j], Rr - self.svec[j])
                lo = int(np.searchsorted(xs, Rr.real - width, "left"))
                hi = int(np.searchsorted(xs, Rr.real + width, "right"))
                if hi <= lo:
                    continue
                a, b = ia[lo:hi], ib[lo:hi]
                rho2 = np.abs(Rr - pv[lo:hi])
                keep = rho2 <= width
                a, b, rho2 = a[keep], b[keep], rho2[keep]
                if not len(a):
                    continue
                ok, same_pos = self._pair_fits(a, b)
                if not ok.any():
                    continue
                a, b, rho2, same_pos = a[ok], b[ok], rho2[ok], same_pos[ok]
                np2 = npos + newpos[a] + newpos[b] * (~same_pos)
                m2 = mass + self.smass[a] + self.smass[b]
                o2 = self._keys(rho2, np.full(len(a), pieces + 2), m2, np2)
                jj = int(o2[0])
                k2 = self.make_key(float(rho2[jj]), pieces + 2, float(m2[jj]), int(np2[jj]))
                if best is None or k2 < best[0]:
                    best = (k2, rest + [int(a[jj]), int(b[jj])], Rr - complex(pv[lo:hi][keep][ok][jj]))
            if best is None or not best[0] < self.best_key:
                break
            self.best_key, slots, R = best
            self.best_slots, self.best_residual = list(slots), R
        self._set_state([])

    def _pair_fits(self, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Which slot pairs (a[i], b[i]) can still be added: stack, stock-count and mass limits
        of their positions, counting both pieces when they share a position or a size.  Also
        returns whether each pair shares a position."""
        prob = self.prob
        pa, pb, ka, kb = self.spos[a], self.spos[b], self.ssize[a], self.ssize[b]
        same_pos = pa == pb
        same_size = ka == kb
        ok = (
            (self.stack_used[pa] + 1 + same_pos <= prob.stack_limit[pa])
            & (self.stack_used[pb] + 1 + same_pos <= prob.stack_limit[pb])
            & (self.count_used[ka] + 1 + same_size <= prob.counts[ka])
            & (self.count_used[kb] + 1 + same_size <= prob.counts[kb])
            & (self.mass_used[pa] + self.smass[a] + np.where(same_pos, self.smass[b], 0.0)
               <= prob.mass_limit_g[pa] + 1e-9)
            & (self.mass_used[pb] + self.smass[b] + np.where(same_pos, self.smass[a], 0.0)
               <= prob.mass_limit_g[pb] + 1e-9)
        )
        return ok, same_pos

    def _pairs(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """All slot pairs s <= t with their summed vectors, sorted by the x component."""
        if self._pair_table is None:
            ia, ib = np.triu_indices(self.n)
            pv = self.svec[ia] + self.svec[ib]
            order = np.argsort(pv.real, kind="stable")
            self._pair_table = (ia[order], ib[order], pv[order], pv.real[order].copy())
        return self._pair_table
