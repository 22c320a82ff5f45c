"""What the weight searches work on and what they answer: the problem, the result, the key of
the objective, and the bounds every search uses.

The objective and the branch-and-bound argument are :mod:`runtrue.allocation.search`'s; the
support-function bound of a convex set (the continuous relaxation, below) is the textbook one
(e.g. Boyd & Vandenberghe, *Convex Optimization*, 2004, sec. 3.1.8 and 8.1; from memory): for
every unit direction d, ``|T - x| >= T·d - h(d)`` for all x in a convex set with support function
h, so the maximum over directions is a valid lower bound on the residual.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: A search's objective as a tuple compared lexicographically (smaller is better); its components
#: are whole numbers (residuals and masses rounded to their quanta).
SearchKey = tuple[int, ...]

N_DIRECTIONS = 24
DIRS = np.exp(1j * np.linspace(0.0, 2.0 * np.pi, N_DIRECTIONS, endpoint=False))
DIR_RE = DIRS.real.copy()
DIR_IM = DIRS.imag.copy()


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
    key: SearchKey
    optimal: bool
    complete_pieces: int  # every allocation with at most this many pieces was examined
    nodes: int
    relaxation_bound_gmm: float
    found: bool = True
    levels: list[float] = field(default_factory=list)


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


#: At most this many pieces in all are considered.
MAX_TOTAL_PIECES = 64


def max_pieces(prob: SearchProblem) -> int:
    """The most pieces any allocation can hold (never more than MAX_TOTAL_PIECES)."""
    total_stock = int(min(prob.counts.sum(), 10**9))
    total_stack = int(min(prob.stack_limit.sum(), 10**9))
    return min(total_stock, total_stack, MAX_TOTAL_PIECES)
