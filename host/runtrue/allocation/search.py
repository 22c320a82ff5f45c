"""Exact branch-and-bound search for discrete weight placement at fixed positions.

The problem (an integer program; subset sum is the special case of one angle, so it is NP-hard
in general): choose how many pieces ``n[s]`` of each *slot* (a position and a piece size) to
fit so that the residual ``R = T − Σ n[s]·m[s]·u[s]`` (g·mm, ``u = radius·e^{jθ}``) minimises
the key, compared lexicographically::

    (max(|R|, g), pieces, mass, |R|, positions)              # default
    (max(|R|, g), positions, pieces, mass, |R|)              # prefer_fewer_positions

``g`` is the good-enough residual (0: none); residuals are compared after rounding to
1e-9·|T| so that ties are exact.  Subject to: pieces per position (stack height), mass per
position, pieces of each size in stock, old weights that must be refitted.

Method (classic depth-first branch and bound, e.g. Wolsey, *Integer Programming*, 2nd ed.
2020, ch. 7, "Branch and Bound"; from memory):

1. **Iterative deepening on the piece count** k = 0, 1, 2, ...  Each level enumerates every
   allocation of exactly k pieces, as a non-decreasing sequence of slot indices (each multiset
   once), checking stack, mass and stock limits as pieces are added.
2. **Bound.**  For a partial allocation with residual R and b pieces still to place from
   slots ≥ s, for any unit direction d the final residual satisfies
   ``|R_final| ≥ (R − A)·d ≥ R·d − b·h_s(d)`` where ``h_s(d) = max(0, max_{t≥s} m_t u_t·d)``
   (each piece adds at most h_s(d) along d).  Taking the maximum over 24 directions gives a
   valid lower bound on |R_final|.  Mass, positions and pieces have obvious lower bounds, and
   the tuple of component-wise lower bounds is a lower bound in lexicographic order (at the
   first differing component, a completion's value is larger).  A child is cut when this
   optimistic key is not better than the best allocation found so far (the incumbent), so
   nothing better than the incumbent is ever cut.  Slots are ordered by the angle of their
   position from the correction, nearest first: a canonical sequence never returns to an
   earlier slot, so deep in the tree only positions facing away remain and the bound cuts
   hard.  Children are visited most promising first (this changes speed, not the answer).
3. **The last two pieces at once.**  All slot pairs (s ≤ t) and their summed vectors are kept
   in one table sorted by x.  A pair can only beat the incumbent if its sum lands within the
   incumbent's residual level r of R, so only the window ``|x − R.x| ≤ r`` of the table is
   read, and every pair in it is checked exactly (limits, keys).  The last piece alone (when
   the table is not used) is chosen by a vectorised scan of every slot.
4. **Stopping.**  Deeper levels have more pieces, so once the incumbent's residual is at most
   g (its first key component is at its floor) no deeper level can beat it and the answer is
   proven optimal.  Otherwise a level is searched only if the bound at its root can beat the
   incumbent; the search ends proven optimal when no level can (or no more pieces exist).
5. **Budget.**  Exactness can cost exponential time in bad cases (many pieces and a residual
   target finer than the stock allows).  After ``max_nodes`` nodes the search stops and says so:
   the answer is then exactly optimal among allocations of at most ``complete_pieces``
   pieces, and ``relaxation_bound_gmm`` (support functions of the continuous relaxation) is a
   proven lower bound on any residual.  A local search (take off up to two pieces, put on up
   to two) then improves the incumbent while it can; it proves nothing more.
6. **Limits.**  At most :data:`MAX_TOTAL_PIECES` pieces in all are considered.

Why a good-enough residual matters for speed: with many pieces the reachable unbalances
become dense (sums of vectors at several angles), so the strictly smallest residual keeps
shrinking with every extra piece and nothing prunes; with a good-enough residual the search
stops at the first piece count that reaches it, typically two to five pieces.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

N_DIRECTIONS = 24
_DIRS = np.exp(1j * np.linspace(0.0, 2.0 * np.pi, N_DIRECTIONS, endpoint=False))
_DIR_RE = _DIRS.real.copy()
_DIR_IM = _DIRS.imag.copy()


@dataclass
class SearchProblem:
    """One search.  Arrays are over usable positions (P) and piece sizes (K)."""

    target_gmm: complex
    u: np.ndarray  # (P,) complex: radius_mm·e^{jθ} of each position
    sizes_g: np.ndarray  # (K,) float
    counts: np.ndarray  # (K,) int, pieces available (a large number for unlimited)
    stack_limit: np.ndarray  # (P,) int, pieces that may still go at each position
    mass_limit_g: np.ndarray  # (P,) float, mass that may still go at each position
    size_stack_one: np.ndarray | None = None  # (K,) bool: at most one such piece per position (strip)
    must_use: np.ndarray | None = None  # (K,) bool: every piece of this size must be fitted
    good_enough_gmm: float = 0.0
    prefer_fewer_positions: bool = False
    base_pieces: int = 0  # pieces on the rotor the search does not place (old weights kept)
    base_mass_g: float = 0.0
    quantum_gmm: float = 1e-9


@dataclass
class SearchResult:
    counts_per_slot: dict[tuple[int, int], int]  # (position, size) -> pieces
    residual_gmm: complex
    key: tuple
    optimal: bool
    complete_pieces: int  # every allocation with at most this many pieces was examined
    nodes: int
    relaxation_bound_gmm: float
    found: bool = True
    levels: list[float] = field(default_factory=list)


class _BudgetSpent(Exception):
    pass


def relaxation_bound_gmm(
    target: complex, u: np.ndarray, cap_g: np.ndarray, total_mass_g: float
) -> float:
    """A lower bound on |T − Σ w_p u_p| over 0 ≤ w_p ≤ cap_p, Σ w_p ≤ total (support functions)."""
    if len(u) == 0:
        return abs(target)
    dirs = np.exp(1j * np.linspace(0.0, 2.0 * np.pi, 720, endpoint=False))
    proj = (u[None, :] * np.conj(dirs[:, None])).real  # (D, P)
    pos = np.maximum(proj, 0.0)
    h_zono = (pos * cap_g[None, :]).sum(axis=1)
    h_mass = total_mass_g * pos.max(axis=1)
    h = np.minimum(h_zono, h_mass)
    t = (target * np.conj(dirs)).real
    return float(max(0.0, np.max(t - h)))


class _Searcher:
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
        proj = (self.svec[:, None] * np.conj(_DIRS)[None, :]).real if n else np.zeros((0, N_DIRECTIONS))
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
        self.best_key: tuple | None = None
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

    def make_key(self, rho: float, pieces: int, mass: float, npos: int) -> tuple:
        level = self._qr(max(rho, self.g))
        if self.prob.prefer_fewer_positions:
            return (level, npos, pieces, self._qm(mass), self._qr(rho))
        return (level, pieces, self._qm(mass), self._qr(rho), npos)

    # search ---------------------------------------------------------------
    def _lb(self, R: complex, b: int, s: int) -> float:
        if b == 0:
            return abs(R)
        t = R.real * _DIR_RE + R.imag * _DIR_IM
        return max(0.0, float(np.max(t - b * self.h[s])))

    def level(self, k: int) -> None:
        prob = self.prob
        pieces = k + prob.base_pieces
        T = prob.target_gmm
        if k == 0:
            if self.must.any() and (prob.counts[self.must] > 0).any():
                return
            key = self.make_key(abs(T), pieces, prob.base_mass_g, 0)
            self._offer(key, [], T)
            return
        self._dfs(0, k, T, prob.base_mass_g, 0, pieces)

    def _offer(self, key: tuple, slots: list[int], R: complex) -> None:
        if self.best_key is None or key < self.best_key:
            self.found_here = True
            self.best_key = key
            self.best_slots = list(slots)
            self.best_residual = R

    def _pending_must(self) -> int:
        if not self.must.any():
            return 0
        return int(((self.prob.counts - self.count_used) * self.must).sum())

    def _dfs(self, i0: int, b: int, R: complex, mass: float, npos: int, pieces: int) -> None:
        self.nodes += 1
        if self.nodes > self.max_nodes:
            raise _BudgetSpent
        n = self.n
        if i0 >= n:
            return
        if b == 2 and n <= MAX_SLOTS_FOR_PAIRS and self.size_used_at is None:
            self._last_two(i0, R, mass, npos, pieces)
            return
        sl = slice(i0, n)
        spos = self.spos[sl]
        ssize = self.ssize[sl]
        smass = self.smass[sl]
        prob = self.prob
        feas = (
            (self.stack_used[spos] < prob.stack_limit[spos])
            & (self.count_used[ssize] < prob.counts[ssize])
            & (self.mass_used[spos] + smass <= prob.mass_limit_g[spos] + 1e-9)
        )
        if self.size_used_at is not None:
            feas &= ~(self.stack_one[ssize] & (self.size_used_at[spos, ssize] > 0))
        pending = self._pending_must()
        if pending > b:
            return
        if b == 1:
            if pending == 1:
                feas &= self.must[ssize] & (self.count_used[ssize] < prob.counts[ssize])
            idx = np.nonzero(feas)[0]
            if len(idx) == 0:
                return
            Rn = R - self.svec[sl][idx]
            rho = np.abs(Rn)
            m = mass + smass[idx]
            newpos = (self.stack_used[spos[idx]] == 0).astype(np.int64)
            npos_arr = npos + newpos
            level = np.floor(np.maximum(rho, self.g) / self.q + 0.5)
            rq = np.floor(rho / self.q + 0.5)
            mq = np.floor(m * 1e6 + 0.5)
            if prob.prefer_fewer_positions:
                order = np.lexsort((rq, mq, npos_arr, level))
            else:
                order = np.lexsort((npos_arr, rq, mq, level))
            j = int(order[0])
            key = self.make_key(float(rho[j]), pieces, float(m[j]), int(npos_arr[j]))
            if self.best_key is None or key < self.best_key:
                self.chosen.append(i0 + int(idx[j]))
                self._offer(key, self.chosen, complex(Rn[j]))
                self.chosen.pop()
            return
        idx = np.nonzero(feas)[0]
        if len(idx) == 0:
            return
        Rn = R - self.svec[sl][idx]
        # vectorised lower bound for every child
        t = Rn.real[:, None] * _DIR_RE[None, :] + Rn.imag[:, None] * _DIR_IM[None, :]
        lb = np.maximum(0.0, np.max(t - (b - 1) * self.h[i0 + idx], axis=1))
        mass_lb = mass + smass[idx] + (b - 1) * self.mmin[i0 + idx]
        # most promising children first, so that good incumbents come early and cut more;
        # the order does not change what is proven (every child is either cut or searched)
        for jj in np.lexsort((mass_lb, lb)).tolist():
            j = int(idx[jj])
            s = i0 + j
            p = int(spos[j])
            k = int(ssize[j])
            # feasibility may have changed? no: siblings do not change state (undone)
            newpos = 1 if self.stack_used[p] == 0 else 0
            if self.best_key is not None:
                opt = self.make_key(float(lb[jj]), pieces, float(mass_lb[jj]), npos + newpos)
                if not opt < self.best_key:
                    continue
            self.stack_used[p] += 1
            self.mass_used[p] += self.smass[s]
            self.count_used[k] += 1
            if self.size_used_at is not None:
                self.size_used_at[p, k] += 1
            self.chosen.append(s)
            try:
                self._dfs(s, b - 1, complex(Rn[jj]), mass + float(self.smass[s]), npos + newpos, pieces)
            finally:
                self.chosen.pop()
                self.stack_used[p] -= 1
                self.mass_used[p] -= self.smass[s]
                self.count_used[k] -= 1
                if self.size_used_at is not None:
                    self.size_used_at[p, k] -= 1

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
            best: tuple | None = None
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

    def _last_two(self, i0: int, R: complex, mass: float, npos: int, pieces: int) -> None:
        """The last two pieces of a level at once, from the sorted pair table (exact).

        Only pairs whose sum lands within the incumbent's residual level of R can improve on
        it; they lie in a window of the table sorted by x, and every pair in it is checked.
        """
        ia, ib, pv, xs = self._pairs()
        pending = self._pending_must()
        if pending > 2:
            return
        if self.best_key is None:
            lo, hi = 0, len(xs)
            width = math.inf
        else:
            width = max(self.best_key[0] * self.q, self.g) * (1 + 1e-9) + 2 * self.q
            lo = int(np.searchsorted(xs, R.real - width, "left"))
            hi = int(np.searchsorted(xs, R.real + width, "right"))
        if hi <= lo:
            return
        a, b, v = ia[lo:hi], ib[lo:hi], pv[lo:hi]
        Rn = R - v
        rho = np.abs(Rn)
        sel = (a >= i0) & (rho <= width)
        if pending:
            sel &= (self.must[self.ssize[a]].astype(np.int64) + self.must[self.ssize[b]]) >= pending
        if not sel.any():
            return
        a, b, Rn, rho = a[sel], b[sel], Rn[sel], rho[sel]
        ok, same_pos = self._pair_fits(a, b)
        if not ok.any():
            return
        a, b, Rn, rho, same_pos = a[ok], b[ok], Rn[ok], rho[ok], same_pos[ok]
        newpos_a = (self.stack_used[self.spos[a]] == 0).astype(np.int64)
        newpos_b = (self.stack_used[self.spos[b]] == 0).astype(np.int64)
        np2 = npos + newpos_a + newpos_b * (~same_pos)
        m2 = mass + self.smass[a] + self.smass[b]
        j = int(self._keys(rho, np.full(len(a), pieces), m2, np2)[0])
        key = self.make_key(float(rho[j]), pieces, float(m2[j]), int(np2[j]))
        if self.best_key is None or key < self.best_key:
            self._offer(key, self.chosen + [int(a[j]), int(b[j])], complex(Rn[j]))

    def _one_position_possible(self, k: int) -> bool:
        prob = self.prob
        live = prob.counts > 0
        if not live.any() or not len(prob.u):
            return False
        m_min = float(prob.sizes_g[live].min())
        m_max = float(prob.sizes_g[live].max())
        T = prob.target_gmm
        g = self.g * (1 + 1e-9) + self.q
        for p in range(len(prob.u)):
            if prob.stack_limit[p] < k or k * m_min > prob.mass_limit_g[p] + 1e-9:
                continue
            r = abs(prob.u[p])
            z = T * np.conj(prob.u[p]) / r
            if abs(z.imag) > g:
                continue
            half = math.sqrt(max(0.0, g * g - z.imag * z.imag))
            w_lo, w_hi = (z.real - half) / r, (z.real + half) / r
            if k * m_min <= w_hi + 1e-12 and k * m_max >= w_lo - 1e-12:
                return True
        return False

    def root_can_improve(self, k: int) -> bool:
        """Can any allocation of exactly k pieces beat the incumbent?"""
        if self.best_key is None:
            return True
        prob = self.prob
        lb = self._lb(prob.target_gmm, k, 0)
        max_stack = int(prob.stack_limit.max()) if len(prob.stack_limit) else 1
        npos_lb = -(-k // max(1, max_stack))
        mass_lb = prob.base_mass_g + k * (float(self.mmin[0]) if self.n else 0.0)
        if prob.prefer_fewer_positions and k > 0:
            # A deeper level has more pieces, so with positions before pieces it can only win
            # on the residual level or on fewer positions.
            level_floor = self.best_key[0] <= self._qr(self.g)
            if level_floor and self.best_key[1] <= 1:
                return False
            if level_floor and self.best_key[1] == 2:
                # one position is the only way down: k pieces at position p weigh w in
                # [k·m_min, k·m_max] and lie on p's ray, and |T − w·u_p| <= g needs w in an
                # interval around T's projection; no overlap at any p: this level cannot win
                return self._one_position_possible(k)
        opt = self.make_key(lb, k + prob.base_pieces, mass_lb, npos_lb)
        return opt < self.best_key


MAX_TOTAL_PIECES = 64
#: the local search builds a table of all slot pairs; above this many slots it is skipped
MAX_SLOTS_FOR_PAIRS = 700


def max_pieces(prob: SearchProblem) -> int:
    """The most pieces any allocation can hold (never more than MAX_TOTAL_PIECES)."""
    total_stock = int(min(prob.counts.sum(), 10**9))
    total_stack = int(min(prob.stack_limit.sum(), 10**9))
    return min(total_stock, total_stack, MAX_TOTAL_PIECES)


def search(prob: SearchProblem, max_nodes: int = 200_000, incumbent: tuple | None = None) -> SearchResult:
    """Run the exact search; see the module docstring for what is guaranteed."""
    srch = _Searcher(prob, max_nodes)
    if incumbent is not None:
        srch.best_key = incumbent
    kmax = max_pieces(prob)
    complete = -1
    optimal = True
    levels: list[float] = []
    k = 0
    try:
        while k <= kmax:
            if k > 0 and not srch.root_can_improve(k):
                # the bound only weakens with more pieces, but a deeper level may still be
                # able to improve when its own bound is lower; check them all cheaply
                if not any(srch.root_can_improve(kk) for kk in range(k + 1, kmax + 1)):
                    complete = kmax
                    break
                complete = k
                k += 1
                continue
            srch.level(k)
            complete = k
            levels.append(abs(srch.best_residual))
            k += 1
        else:
            complete = kmax
    except _BudgetSpent:
        optimal = False
        srch.chosen.clear()
        if srch.found_here:
            srch.improve()
    slots: dict[tuple[int, int], int] = {}
    for s in srch.best_slots:
        key = (int(srch.spos[s]), int(srch.ssize[s]))
        slots[key] = slots.get(key, 0) + 1
    cap = np.minimum(
        prob.mass_limit_g,
        np.where(prob.stack_limit > 0, prob.stack_limit * (prob.sizes_g.max() if len(prob.sizes_g) else 0.0), 0.0),
    )
    total_mass = float(np.sum(np.minimum(prob.counts, 10**6) * prob.sizes_g))
    rb = relaxation_bound_gmm(prob.target_gmm, prob.u, cap, total_mass)
    return SearchResult(
        counts_per_slot=slots,
        residual_gmm=srch.best_residual,
        key=srch.best_key if srch.best_key is not None else (),
        optimal=optimal,
        complete_pieces=complete,
        nodes=srch.nodes,
        relaxation_bound_gmm=rb,
        found=srch.best_key is not None,
        levels=levels,
    )
