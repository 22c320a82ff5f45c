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
   to two; :mod:`runtrue.allocation.slots`) then improves the incumbent while it can; it
   proves nothing more.  The problem, the result and the bounds are
   :mod:`runtrue.allocation.search_model`'s.
6. **Limits.**  At most :data:`MAX_TOTAL_PIECES` pieces in all are considered.

Why a good-enough residual matters for speed: with many pieces the reachable unbalances
become dense (sums of vectors at several angles), so the strictly smallest residual keeps
shrinking with every extra piece and nothing prunes; with a good-enough residual the search
stops at the first piece count that reaches it, typically two to five pieces.
"""

from __future__ import annotations

import math

import numpy as np

from runtrue.allocation.search_model import (
    DIR_IM,
    DIR_RE,
    MAX_TOTAL_PIECES,
    SearchKey,
    SearchProblem,
    SearchResult,
    max_pieces,
    relaxation_bound_gmm,
)
from runtrue.allocation.slots import MAX_SLOTS_FOR_PAIRS, Slots


class _BudgetSpent(Exception):
    pass


class _Searcher(Slots):
    """The exact search over the slots of a problem (see the module docstring)."""

    # search ---------------------------------------------------------------
    def _lb(self, R: complex, b: int, s: int) -> float:
        if b == 0:
            return abs(R)
        t = R.real * DIR_RE + R.imag * DIR_IM
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

    def _offer(self, key: SearchKey, slots: list[int], R: complex) -> None:
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
        t = Rn.real[:, None] * DIR_RE[None, :] + Rn.imag[:, None] * DIR_IM[None, :]
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


def search(prob: SearchProblem, max_nodes: int = 200_000, incumbent: SearchKey | None = None) -> SearchResult:
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


__all__ = ["MAX_TOTAL_PIECES", "SearchKey", "SearchProblem", "SearchResult", "max_pieces", "relaxation_bound_gmm", "search"]
