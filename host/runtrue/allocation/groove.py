"""Allocation in a continuous groove (a balancing ring or channel: any angle at one radius).

Pieces of masses a_1 ≥ a_2 ≥ ... ≥ a_n placed at free angles on one radius r can make any
resultant unbalance whose size lies in ``[max(0, a_1 − (a_2+...+a_n)), a_1+...+a_n]·r`` and
nothing else: this is the polygon inequality (a closed polygon with sides l_i exists if and only
if the longest side is at most the sum of the others; e.g. any geometry text, from memory), and
the constructive chain below realises every value in between.  So for a given set of pieces
the smallest residual is the distance from |correction| to that interval, and the search is a
plain enumeration of piece multisets by increasing count: exact, with the same lexicographic
objective as fixed positions (residual above the good-enough value, pieces, mass, residual).

Strip in a groove lies along the arc.  An arc of length L, linear density μ (g/mm), radius r,
has unbalance ``μ·∫ r·e^{jφ} r dφ`` over an angle L/r, of size ``2·μ·r²·sin(L/(2r))``
(centroid of a circular arc at r·sin(α)/α from the centre, α the half-angle; e.g. Meriam &
Kraige, *Engineering Mechanics: Statics*, table of centroids; from memory, checked in the
tests by numerical integration).  Several strip pieces laid end to end act as one arc.
"""

from __future__ import annotations

import cmath
import itertools
import math

import numpy as np

from runtrue.allocation.model import (
    POOR_FIT_FRACTION,
    Allocation,
    AllocationError,
    Placement,
    Stock,
    Strip,
    angle_of_deg,
)
from runtrue.readings.units import angle_between_deg

MAX_GROOVE_PIECES = 12
MAX_STRIP_PIECES = 8

#: The objective in a groove, compared lexicographically: (residual level, pieces, mass, residual),
#: each rounded to a whole number of its quantum.
_Key = tuple[int, int, int, int]


def magnitude_range(masses: list[float]) -> tuple[float, float]:
    """(smallest, largest) size of the resultant of point masses at free angles on one radius (in g)."""
    if not masses:
        return 0.0, 0.0
    total = sum(masses)
    biggest = max(masses)
    return max(0.0, biggest - (total - biggest)), total


def chain_angles(masses: list[float], size: float) -> list[complex]:
    """Unit-radius vectors ``a_i·e^{jφ_i}`` whose sum has the size ``size`` (clamped to the range)."""
    lo, hi = magnitude_range(masses)
    d = min(max(size, lo), hi)
    ordered = sorted(masses, reverse=True)
    return _chain(ordered, d)


def _chain(ordered: list[float], d: float) -> list[complex]:
    if len(ordered) == 1:
        return [complex(ordered[0], 0.0)]
    rest, a = ordered[:-1], ordered[-1]
    lo_r, hi_r = magnitude_range(rest)
    lo = max(abs(d - a), lo_r)
    hi = min(d + a, hi_r)
    d_rest = min(max(d, lo), hi)
    vecs = _chain(rest, d_rest)
    s = sum(vecs, 0j)
    if abs(s) < 1e-12:
        return vecs + [complex(a, 0.0)]
    cos_alpha = (d * d - d_rest * d_rest - a * a) / (2.0 * d_rest * a)
    alpha = math.acos(min(1.0, max(-1.0, cos_alpha)))
    return vecs + [a * cmath.exp(1j * (cmath.phase(s) + alpha))]


def arc_unbalance_gmm(grams_per_mm: float, length_mm: float, radius_mm: float) -> float:
    """Size of the unbalance of a strip of ``length_mm`` lying along an arc of ``radius_mm``."""
    return 2.0 * grams_per_mm * radius_mm * radius_mm * math.sin(min(length_mm / (2.0 * radius_mm), math.pi / 2))


def allocate_groove(
    T: complex,
    r_c: float,
    radius_mm: float,
    *,
    stock: Stock | None,
    strip: Strip | None,
    good_enough_gmm: float,
) -> Allocation:
    """Exact allocation in a groove of ``radius_mm`` (see module docstring)."""
    q = 1e-9 * max(abs(T), 1.0)
    target = abs(T)
    theta = cmath.phase(T) if target > 0 else 0.0

    def key(rho: float, pieces: int, mass: float) -> _Key:
        return (round(max(rho, good_enough_gmm) / q), pieces, round(mass * 1e6), round(rho / q))

    if stock is not None:
        sizes = sorted({it.mass_g for it in stock.items})
        avail = {m: 0 for m in sizes}
        for it in stock.items:
            avail[it.mass_g] += MAX_GROOVE_PIECES if it.count is None else it.count
        total_pieces = sum(min(avail[m], MAX_GROOVE_PIECES) for m in sizes)
        best: _Key | None = None
        best_set: tuple[float, ...] = ()
        kmax = min(total_pieces, MAX_GROOVE_PIECES)
        for k in range(0, kmax + 1):
            if best is not None and best[0] <= round(good_enough_gmm / q):
                break
            for combo in itertools.combinations_with_replacement(sizes, k):
                if any(combo.count(m) > avail[m] for m in set(combo)):
                    continue
                lo, hi = magnitude_range(list(combo))
                rho = max(0.0, lo * radius_mm - target, target - hi * radius_mm)
                kk = key(rho, k, sum(combo))
                if best is None or kk < best:
                    best, best_set = kk, combo
        vecs = chain_angles(list(best_set), target / radius_mm) if best_set else []
        s = sum(vecs, 0j)
        rot = cmath.exp(1j * (theta - cmath.phase(s))) if abs(s) > 0 else cmath.exp(1j * theta)
        placements = []
        for m, v in zip(sorted(best_set, reverse=True), vecs):
            ang = angle_of_deg(v * rot)
            placements.append(Placement(None, ang, radius_mm, (m,), None, m, (), v * rot * radius_mm))
        placements = _merge_same_angle(placements)
        optimal = total_pieces <= MAX_GROOVE_PIECES or (best is not None and best[0] <= round(good_enough_gmm / q))
        return _finish(T, r_c, placements, optimal, good_enough_gmm)
    if strip is None:
        raise AllocationError("no stock and no strip given")
    for name, v in (("grams_per_mm", strip.grams_per_mm), ("min_mm", strip.min_mm), ("step_mm", strip.step_mm)):
        if not (math.isfinite(v) and v > 0):
            raise AllocationError(f"strip {name} = {v:g} must be a positive number")
    circumference = 2.0 * math.pi * radius_mm
    piece_max = min(strip.max_mm if strip.max_mm is not None else circumference, circumference)
    best = None
    best_n, best_total = 0, 0.0
    for n in range(0, MAX_STRIP_PIECES + 1):
        if best is not None and best[0] <= round(good_enough_gmm / q):
            break
        if n == 0:
            kk = key(target, 0, 0.0)
            best = kk
            continue
        steps_max = math.floor((min(n * piece_max, circumference) - n * strip.min_mm) / strip.step_mm + 1e-9)
        if steps_max < 0:
            break
        totals = n * strip.min_mm + strip.step_mm * np.arange(steps_max + 1)
        sizes_arr = 2.0 * strip.grams_per_mm * radius_mm**2 * np.sin(np.minimum(totals / (2 * radius_mm), np.pi / 2))
        rho = np.abs(sizes_arr - target)
        for j in np.lexsort((totals, np.maximum(rho, good_enough_gmm)))[:1]:
            kk = key(float(rho[j]), n, strip.grams_per_mm * float(totals[j]))
            if best is None or kk < best:
                best, best_n, best_total = kk, n, float(totals[j])
    placements = []
    if best_n:
        steps = round((best_total - best_n * strip.min_mm) / strip.step_mm)
        lengths = [strip.min_mm + strip.step_mm * (steps // best_n + (1 if i < steps % best_n else 0)) for i in range(best_n)]
        start = theta - best_total / (2 * radius_mm)
        for length in lengths:
            centre = start + length / (2 * radius_mm)
            start += length / radius_mm
            ub = arc_unbalance_gmm(strip.grams_per_mm, length, radius_mm) * cmath.exp(1j * centre)
            placements.append(Placement(None, angle_of_deg(cmath.exp(1j * centre)), radius_mm, (), length,
                                        strip.grams_per_mm * length, (), ub))
    return _finish(T, r_c, placements, True, good_enough_gmm)


def _merge_same_angle(placements: list[Placement]) -> list[Placement]:
    out: list[Placement] = []
    for p in placements:
        for i, o in enumerate(out):
            if angle_between_deg(o.angle_deg, p.angle_deg) < 1e-7:
                out[i] = Placement(None, o.angle_deg, o.radius_mm, tuple(sorted(o.pieces + p.pieces, reverse=True)),
                                   None, o.mass_g + p.mass_g, (), o.unbalance_gmm + p.unbalance_gmm)
                break
        else:
            out.append(p)
    return out


def _finish(T: complex, r_c: float, placements: list[Placement], optimal: bool, good_enough_gmm: float) -> Allocation:
    fitted = sum((p.unbalance_gmm for p in placements), 0j)
    residual = T - fitted
    warnings = []
    if abs(T) > 0 and abs(residual) / abs(T) > POOR_FIT_FRACTION:
        warnings.append(
            f"the best fit leaves {100 * abs(residual) / abs(T):.0f}% of the correction "
            f"({abs(residual) / r_c:.3g} g at {angle_of_deg(residual):.1f}° at radius {r_c:g} mm): "
            "add stock or use another radius"
        )
    if not optimal:
        warnings.append(f"only allocations of up to {MAX_GROOVE_PIECES} pieces were considered")
    bound = abs(residual) if (optimal and abs(residual) > good_enough_gmm) else 0.0
    return Allocation(T, r_c, tuple(placements), residual, optimal, bound, tuple(warnings))
