"""The weight allocator: a correction vector turned into pieces that can be fitted.

Objective, compared lexicographically, residuals rounded to 1e-9·|correction|:

1. the residual ``|correction − change|`` in g·mm, where any residual at or below the
   good-enough value ``g`` counts as ``g``.  Without one, ``g`` is 1 % of the correction
   (:data:`DEFAULT_GOOD_ENOUGH_FRACTION`): a measured correction is rarely known better than
   a few per cent (influence coefficients move with speed and temperature; common practice),
   and a strictly smallest residual buys invisible gains with many more pieces.  With a STRIP
   the default is instead the unbalance of one cutting step at the largest radius used (if
   that is smaller): a strip is cut to any length for the same effort, so the lengths come out
   as the exact split rounded to the cutting step, not the lightest pair that only just meets
   1 %.  Pass ``good_enough_gmm=0`` for the strictly smallest residual ("strict mode"; residuals
   are then compared to :data:`STRICT_RESOLUTION_FRACTION` of the correction, 0.01 %, or with
   a strip to one cutting step's unbalance at the smallest radius, if coarser, so that
   far-below-measurable gains do not buy heavier sets; when the search cannot prove its answer
   within its budget, the allocation says "best found" and gives its proven lower bound);
2. (with ``prefer_fewer_positions``: the fewest positions receiving weight;)
3. the fewest pieces on the rotor afterwards (new pieces and strip pieces, plus old weights
   that stay or are moved);
4. the least mass on the rotor afterwards (with no old weights: the least added mass);
5. the smaller actual residual; then the fewest positions.

Fixed positions are solved by the exact branch and bound of :mod:`runtrue.allocation.search`
(its docstring gives the argument for optimality and the bound stated when the node budget runs
out); strip at fixed positions by its specialisation :mod:`runtrue.allocation.strip_search`
(one piece a position, rungs found by rounding); a continuous groove by the closed forms of
:mod:`runtrue.allocation.groove`.  ``Allocation.optimal`` says whether optimality was proven;
if not, a warning says exactly what is guaranteed.

Old weights (``existing``): the correction is what must be *added* to the rotor as it is now,
so an old weight's effect is already in it.  Removing one adds −(its unbalance) to the change;
moving one removes it and refits it as a piece of its own mass.  Removal choices are tried
exhaustively (each removable-only weight: stay or go); movable weights become pieces of the
search (a movable weight that may not be removed must be refitted somewhere).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from runtrue.allocation.groove import allocate_groove
from runtrue.allocation.model import (
    POOR_FIT_FRACTION,
    Allocation,
    AllocationError,
    ExistingWeight,
    Placement,
    Positions,
    Stock,
    Strip,
    angle_of_deg,
    weight_gmm,
)
from runtrue.allocation.search import SearchProblem, SearchResult, search
from runtrue.allocation.strip_search import strip_search

UNLIMITED = 10**6
MAX_REMOVABLE_OLD_WEIGHTS = 8
MAX_STRIP_LENGTHS = 2000
#: good-enough residual, as a fraction of the correction, when the caller gives none
DEFAULT_GOOD_ENOUGH_FRACTION = 0.01
#: strict mode (good-enough 0): residuals compared to this fraction of the correction (our choice)
STRICT_RESOLUTION_FRACTION = 1e-4


def correction_vector(
    correction: complex | tuple[float, float, float] | Sequence[float],
    correction_radius_mm: float | None,
    default_radius_mm: float,
) -> tuple[complex, float]:
    """(unbalance g·mm, radius mm) from a complex g·mm or a (mass_g, angle_deg, radius_mm) triple."""
    if isinstance(correction, (complex, int, float)) and not isinstance(correction, bool):
        r = correction_radius_mm if correction_radius_mm is not None else default_radius_mm
        if not r > 0:
            raise AllocationError(f"correction radius {r} mm is not positive")
        return complex(correction), float(r)
    try:
        mass_g, angle_deg, radius_mm = (float(x) for x in correction)  # type: ignore[union-attr]
    except (TypeError, ValueError):
        raise AllocationError("the correction must be a complex g·mm or (mass_g, angle_deg, radius_mm)") from None
    if mass_g < 0:
        raise AllocationError(f"correction mass {mass_g:g} g is negative; give the angle of the weight instead")
    if not radius_mm > 0:
        raise AllocationError(f"correction radius {radius_mm:g} mm is not positive")
    if not all(math.isfinite(x) for x in (mass_g, angle_deg, radius_mm)):
        raise AllocationError("the correction has a value that is not a finite number")
    return weight_gmm(mass_g, angle_deg, radius_mm), radius_mm


def _strip_ladder(strip: Strip, target_gmm: float, r_min: float, mass_limit: float) -> list[float]:
    for name, v in (("grams_per_mm", strip.grams_per_mm), ("min_mm", strip.min_mm), ("step_mm", strip.step_mm)):
        if not (math.isfinite(v) and v > 0):
            raise AllocationError(f"strip {name} = {v:g} must be a positive number")
    if strip.max_mm is not None:
        max_mm = float(strip.max_mm)
        if max_mm < strip.min_mm:
            raise AllocationError(f"strip max_mm {max_mm:g} is shorter than min_mm {strip.min_mm:g}")
    else:
        # no longest piece given: a piece that alone carries twice the correction is the limit
        max_mm = max(strip.min_mm, 2.0 * target_gmm / (strip.grams_per_mm * r_min) + strip.step_mm)
    if math.isfinite(mass_limit):
        max_mm = min(max_mm, mass_limit / strip.grams_per_mm)
    n = int(math.floor((max_mm - strip.min_mm) / strip.step_mm + 1e-9)) + 1
    if n > MAX_STRIP_LENGTHS:
        raise AllocationError(
            f"the strip allows {n} different lengths; give a coarser step_mm or a max_mm "
            f"(at most {MAX_STRIP_LENGTHS} lengths)"
        )
    # lengths exact to the cutting step (no 17.080000000000002 on a fitting sheet)
    return [round(strip.min_mm + i * strip.step_mm, 9) for i in range(max(0, n))]


def _good_enough(good_enough_gmm: float | None, T: complex, strip_step_gmm: float | None = None) -> float:
    if good_enough_gmm is None:
        g = DEFAULT_GOOD_ENOUGH_FRACTION * abs(T)
        if strip_step_gmm is not None:
            g = min(g, strip_step_gmm)
        return g
    return float(good_enough_gmm)


def _validate_common(
    stock: Stock | None,
    strip: Strip | None,
    max_pieces_per_position: int | None,
    max_mass_per_position_g: float | None,
    good_enough_gmm: float | None,
    existing: Sequence[ExistingWeight],
) -> None:
    if stock is None and strip is None and not any(w.may_move for w in existing):
        raise AllocationError("no stock and no strip given: list the pieces you have (mass and count) or a strip")
    if stock is not None and strip is not None:
        raise AllocationError("give either a stock of pieces or a strip, not both")
    if stock is not None:
        for it in stock.items:
            if not (math.isfinite(it.mass_g) and it.mass_g > 0):
                raise AllocationError(f"stock piece mass {it.mass_g:g} g must be a positive number")
            if it.count is not None and it.count < 0:
                raise AllocationError(f"stock count {it.count} for {it.mass_g:g} g pieces is negative")
        if not any(it.count is None or it.count > 0 for it in stock.items) and not any(w.may_move for w in existing):
            raise AllocationError("the stock is empty: give at least one piece with a count above zero")
    if max_pieces_per_position is not None and max_pieces_per_position < 1:
        raise AllocationError("max_pieces_per_position must be at least 1")
    if max_mass_per_position_g is not None and not max_mass_per_position_g > 0:
        raise AllocationError("max_mass_per_position_g must be positive")
    if good_enough_gmm is not None and not (math.isfinite(good_enough_gmm) and good_enough_gmm >= 0):
        raise AllocationError("good_enough_gmm must be zero or a positive number")
    for i, w in enumerate(existing):
        if not (math.isfinite(w.mass_g) and w.mass_g >= 0):
            raise AllocationError(f"old weight #{i + 1}: mass {w.mass_g:g} g must be zero or positive")
        if not w.radius_mm > 0:
            raise AllocationError(f"old weight #{i + 1}: radius {w.radius_mm:g} mm must be positive")
        if w.may_move and w.position_index is None:
            raise AllocationError(f"old weight #{i + 1}: give its position (number) so it can be moved")


def allocate(
    correction: complex | tuple[float, float, float],
    positions: Positions,
    *,
    stock: Stock | None = None,
    strip: Strip | None = None,
    correction_radius_mm: float | None = None,
    max_pieces_per_position: int | None = None,
    max_mass_per_position_g: float | None = None,
    good_enough_gmm: float | None = None,
    prefer_fewer_positions: bool = False,
    existing: Sequence[ExistingWeight] = (),
    max_nodes: int = 5_000,
) -> Allocation:
    """Turn a correction into placements; see the module docstring for the objective."""
    existing = tuple(existing)
    _validate_common(stock, strip, max_pieces_per_position, max_mass_per_position_g, good_enough_gmm, existing)
    if positions.continuous:
        T, r_c = correction_vector(correction, correction_radius_mm, positions.groove_radius_mm)
        if existing:
            raise AllocationError("old weights in a continuous groove: remove them and include their effect instead")
        return allocate_groove(
            T, r_c, positions.groove_radius_mm, stock=stock, strip=strip,
            good_enough_gmm=_good_enough(good_enough_gmm, T),
        )
    usable = positions.usable()
    if not usable:
        raise AllocationError("no usable positions: give at least one position that is not excluded")
    T, r_c = correction_vector(correction, correction_radius_mm, positions.radii_mm[usable[0]])
    step_gmm = None
    if strip is not None:
        step_gmm = strip.grams_per_mm * strip.step_mm * max(positions.radii_mm[pi] for pi in usable)
    g = _good_enough(good_enough_gmm, T, step_gmm)
    P = len(usable)
    local = {pi: j for j, pi in enumerate(usable)}
    u = np.array([weight_gmm(1.0, positions.angles_deg[pi], positions.radii_mm[pi]) for pi in usable])
    for i, w in enumerate(existing):
        if w.position_index is not None and not 0 <= w.position_index < len(positions.angles_deg):
            raise AllocationError(f"old weight #{i + 1}: position {w.position_index} does not exist")
    mass_lim = float(max_mass_per_position_g) if max_mass_per_position_g is not None else math.inf

    # piece sizes: stock (or strip lengths), then movable old weights
    size_kind: list[tuple[str, float]] = []  # ("stock", mass) | ("strip", length_mm) | ("old", index)
    sizes: list[float] = []
    counts: list[int] = []
    if stock is not None:
        merged: dict[float, int] = {}
        for it in stock.items:
            c = UNLIMITED if it.count is None else it.count
            merged[it.mass_g] = min(UNLIMITED, merged.get(it.mass_g, 0) + c)
        for m_g in sorted(merged):
            if merged[m_g] > 0:
                size_kind.append(("stock", m_g))
                sizes.append(m_g)
                counts.append(merged[m_g])
    if strip is not None:
        r_min = min(positions.radii_mm[pi] for pi in usable)
        for length in _strip_ladder(strip, abs(T), r_min, mass_lim):
            size_kind.append(("strip", length))
            sizes.append(strip.grams_per_mm * length)
            counts.append(UNLIMITED)
    movable = [i for i, w in enumerate(existing) if w.may_move]
    for i in movable:
        size_kind.append(("old", float(i)))
        sizes.append(existing[i].mass_g)
        counts.append(1)
    must = np.array([kind == "old" and not existing[int(v)].may_remove for kind, v in size_kind], dtype=bool)

    if strip is not None:
        stack_default = 1 if max_pieces_per_position is None else max_pieces_per_position
    else:
        stack_default = UNLIMITED if max_pieces_per_position is None else max_pieces_per_position
    removable_only = [i for i, w in enumerate(existing) if w.may_remove and not w.may_move]
    if len(removable_only) > MAX_REMOVABLE_OLD_WEIGHTS:
        raise AllocationError(
            f"{len(removable_only)} old weights may be removed; at most {MAX_REMOVABLE_OLD_WEIGHTS} "
            "can be weighed up at once (mark the rest to stay)"
        )
    fixed = [i for i, w in enumerate(existing) if not w.may_remove and not w.may_move]
    # Residuals are compared after rounding to this quantum.  Strict mode (g = 0) compares them
    # to STRICT_RESOLUTION_FRACTION of the correction: finer differences are far below anything
    # measurable and would only buy heavier sets of pieces; it also lets the search prove its
    # answer once a residual under half a quantum is found.
    # With a strip the strict resolution is one cutting step's unbalance at the smallest radius:
    # a residual finer than the cut itself is luck, not a better fit.
    quantum = (STRICT_RESOLUTION_FRACTION if g == 0 else 1e-9) * max(abs(T), 1.0)
    if g == 0 and strip is not None:
        quantum = max(quantum, strip.grams_per_mm * strip.step_mm * min(positions.radii_mm[pi] for pi in usable))

    best = None
    best_meta = None
    nodes_left = max_nodes
    total_nodes = 0
    all_optimal = True
    complete_min = None
    relax_min = math.inf
    for r in range(len(removable_only) + 1):
        for removed in itertools.combinations(removable_only, r):
            kept = [i for i in fixed + removable_only if i not in removed]
            target = T + sum((existing[i].unbalance_gmm for i in list(removed) + movable), 0j)
            stack = np.full(P, stack_default, dtype=np.int64)
            mlim = np.full(P, mass_lim)
            for i in kept:
                pi = existing[i].position_index
                if pi is not None and pi in local:
                    stack[local[pi]] -= 1
                    mlim[local[pi]] -= existing[i].mass_g
            stack = np.maximum(stack, 0)
            mlim = np.maximum(mlim, 0.0)
            prob = SearchProblem(
                target_gmm=target,
                u=u,
                sizes_g=np.array(sizes, dtype=float),
                counts=np.array(counts, dtype=np.int64),
                stack_limit=stack,
                mass_limit_g=mlim,
                must_use=must,
                good_enough_gmm=g,
                prefer_fewer_positions=prefer_fewer_positions,
                base_pieces=len(kept),
                base_mass_g=sum(existing[i].mass_g for i in kept),
                quantum_gmm=quantum,
            )
            if strip is not None and not movable and not removable_only:
                res = _strip(prob, strip, max(1, nodes_left))
            else:
                res = search(prob, max_nodes=max(1, nodes_left), incumbent=best[0] if best else None)
            nodes_left -= res.nodes
            total_nodes += res.nodes
            all_optimal &= res.optimal
            complete_min = res.complete_pieces if complete_min is None else min(complete_min, res.complete_pieces)
            relax_min = min(relax_min, res.relaxation_bound_gmm)
            if res.found and res.key and (best is None or res.key < best[0]):
                best = (res.key, res)
                best_meta = (removed, kept)
            if nodes_left <= 0:
                all_optimal = False
                break
        if nodes_left <= 0:
            break
    if best is None or best_meta is None:
        raise AllocationError("no allocation satisfies the limits (old weights that must be refitted do not fit)")
    res = best[1]
    removed, kept = best_meta
    return _build(
        T, r_c, positions, usable, size_kind, sizes, existing, res, list(removed), list(kept), movable,
        all_optimal, complete_min or 0, relax_min, total_nodes, g,
    )


@dataclass
class _AtPosition:
    """What the search put at one position: new pieces (g), a strip length (mm) and its mass
    (g), and old weights moved here (indices into ``existing``)."""

    pieces: list[float] = field(default_factory=list)
    length: float | None = None
    old: list[int] = field(default_factory=list)
    strip_mass: float = 0.0


def _build(
    T: complex,
    r_c: float,
    positions: Positions,
    usable: list[int],
    size_kind: list[tuple[str, float]],
    sizes: list[float],
    existing: tuple[ExistingWeight, ...],
    res: SearchResult,
    removed: list[int],
    kept: list[int],
    movable: list[int],
    optimal: bool,
    complete_pieces: int,
    relax_bound: float,
    nodes: int,
    g: float,
) -> Allocation:
    by_pos: dict[int, _AtPosition] = {}
    placed_old: set[int] = set()
    for (p_local, k), n in sorted(res.counts_per_slot.items()):
        pi = usable[p_local]
        d = by_pos.setdefault(pi, _AtPosition())
        kind, v = size_kind[k]
        if kind == "stock":
            d.pieces.extend([v] * n)
        elif kind == "strip":
            d.length = v
            d.strip_mass = sizes[k]
        else:
            i = int(v)
            placed_old.add(i)
            if existing[i].position_index == pi:
                kept.append(i)  # refitted where it was: it simply stays
            else:
                d.old.append(i)
    placements = []
    moved_mass = 0.0
    fitted = 0j
    for pi in sorted(by_pos):
        d = by_pos[pi]
        pieces = tuple(sorted(d.pieces, reverse=True))
        mass = sum(pieces) + sum(existing[i].mass_g for i in d.old)
        length = d.length
        mass += d.strip_mass
        moved_mass += sum(existing[i].mass_g for i in d.old)
        if not pieces and length is None and not d.old:
            continue
        ub = weight_gmm(mass, positions.angles_deg[pi], positions.radii_mm[pi])
        fitted += ub
        placements.append(Placement(pi, positions.angles_deg[pi], positions.radii_mm[pi], pieces, length,
                                    mass, tuple(d.old), ub))
    removed_all = sorted(set(removed) | {i for i in movable if i not in placed_old})
    change = fitted - sum((existing[i].unbalance_gmm for i in removed_all), 0j)
    change -= sum((existing[i].unbalance_gmm for i in movable if i in placed_old and i not in kept), 0j)
    residual = T - change
    warnings: list[str] = []
    rho = abs(residual)
    if not optimal:
        lower = min(rho, relax_bound)
        warnings.append(
            f"search stopped after {nodes} steps: this is the best of all allocations with up to "
            f"{complete_pieces} pieces; "
            + (f"no allocation can leave less than {lower:.4g} g·mm" if lower > 0
               else "more pieces might lower the residual further (set a good-enough residual)")
        )
    if abs(T) > 0 and rho / abs(T) > POOR_FIT_FRACTION:
        msg = (f"the best fit leaves {100 * rho / abs(T):.0f}% of the correction "
               f"({rho / r_c:.3g} g at {angle_of_deg(residual):.1f}° at radius {r_c:g} mm)")
        if relax_bound > 0.01 * abs(T):
            msg += "; these positions and pieces cannot carry the whole correction"
        msg += ": add stock, allow more pieces per position, or use another radius"
        warnings.append(msg)
    return Allocation(
        correction_gmm=T,
        correction_radius_mm=r_c,
        placements=tuple(placements),
        residual_gmm=residual,
        optimal=optimal,
        # proven lower bound on the smallest residual any allocation could leave: the residual
        # itself when the search proved it smallest (above the good-enough value), else the
        # relaxation bound
        bound_gmm=rho if (optimal and rho > g) else min(rho, relax_bound),
        warnings=tuple(warnings),
        kept_existing=tuple(sorted(set(kept))),
        removed_existing=tuple(removed_all),
        nodes=nodes,
        _moved_mass_g=moved_mass,
    )


def _strip(prob: SearchProblem, strip: Strip, max_nodes: int) -> SearchResult:
    """Strip at fixed positions through the rounding-based exact search (one piece a position)."""
    n_sizes = len(prob.sizes_g)
    w0 = strip.grams_per_mm * strip.min_mm
    dw = strip.grams_per_mm * strip.step_mm
    by_mass = np.floor((prob.mass_limit_g - w0) / dw + 1e-9) + 1
    n_rungs = np.where(prob.stack_limit > 0, np.clip(np.nan_to_num(by_mass, posinf=n_sizes), 0, n_sizes), 0)
    res, chosen = strip_search(prob.target_gmm, prob.u, w0, dw, n_rungs.astype(np.int64), prob.good_enough_gmm,
                               prob.quantum_gmm, max_nodes)
    res.counts_per_slot = {(p, i): 1 for p, i in chosen}
    return res


def allocate_planes(
    corrections: Sequence[complex | tuple[float, float, float]],
    positions: Positions | Sequence[Positions],
    *,
    stock: Stock | None = None,
    existing_per_plane: Sequence[Sequence[ExistingWeight]] | None = None,
    **options: Any,
) -> list[Allocation]:
    """Allocate each plane of a multi-plane correction in turn, sharing one stock.

    Planes are allocated in the order given; pieces used in one plane are taken out of the
    stock for the next (so the combination is optimal plane by plane, not jointly).
    ``existing_per_plane`` gives each plane's old weights (for consolidation).
    """
    if existing_per_plane is not None and len(existing_per_plane) != len(corrections):
        raise AllocationError(f"{len(corrections)} corrections but old weights for {len(existing_per_plane)} planes")
    if isinstance(positions, Positions):
        plane_positions = [positions] * len(corrections)
    else:
        plane_positions = list(positions)
        if len(plane_positions) != len(corrections):
            raise AllocationError(f"{len(corrections)} corrections but {len(plane_positions)} position sets")
    out: list[Allocation] = []
    remaining = stock
    for i, (corr, pos) in enumerate(zip(corrections, plane_positions)):
        old = tuple(existing_per_plane[i]) if existing_per_plane is not None else ()
        a = allocate(corr, pos, stock=remaining, existing=old, **options)
        out.append(a)
        if remaining is not None:
            used: dict[float, int] = {}
            for p in a.placements:
                for m in p.pieces:
                    used[m] = used.get(m, 0) + 1
            items = []
            for it in remaining.items:
                take = min(used.get(it.mass_g, 0), it.count if it.count is not None else UNLIMITED)
                used[it.mass_g] = used.get(it.mass_g, 0) - take
                items.append((it.mass_g, None if it.count is None else it.count - take))
            remaining = Stock.of(items)
    return out


__all__ = ["allocate", "allocate_planes", "correction_vector"]
