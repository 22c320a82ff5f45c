"""Turning a correction into pieces that can be fitted (the weight allocator).

Exact (proven optimal) for the objective below, or it says what it guarantees: see
``runtrue.allocation.search`` (fixed positions; its problem and bounds in ``search_model``, the
slots and the local search in ``slots``), ``strip_search`` (strip at fixed positions) and
``groove`` (continuous groove) for the methods and the arguments.

Conventions (DEVELOPERS.md): weight angles in degrees from the reference mark **against**
rotation; a weight is the complex unbalance ``mass_g·radius_mm·e^{+jθ}`` in g·mm.  Position
indices are 0-based in the API; the fitting sheet numbers them from 1.

Public API (exact signatures)::

    Positions.equally_spaced(count, radius_mm, first_angle_deg=0.0, excluded=()) -> Positions
    Positions.at_angles(angles_deg, radius_mm: float | Sequence[float], excluded=()) -> Positions
    Positions.groove(radius_mm) -> Positions            # continuous: any angle
    Positions.excluding(indices) -> Positions           # mark positions unusable (0-based)
    Stock.of([(mass_g, count | None), ...]) -> Stock     # Stock(items=(StockItem(mass_g, count), ...))
    Strip(grams_per_mm, min_mm, step_mm, max_mm=None)    # lengths min_mm + k*step_mm
    ExistingWeight(mass_g, angle_deg, radius_mm, position_index=None, may_move=False, may_remove=False)
    ExistingWeight.from_engine(weight, position_index=None, *, may_move=False, may_remove=False)
        # from the engine's runtrue.balancing.Weight (or any weight with mass_g, angle_deg, radius_mm)
    ExistingWeight.to_engine(plane) -> runtrue.balancing.Weight

    allocate(correction, positions, *, stock=None, strip=None, correction_radius_mm=None,
             max_pieces_per_position=None, max_mass_per_position_g=None,
             good_enough_gmm=None, prefer_fewer_positions=False, existing=(),
             max_nodes=5_000) -> Allocation
        # correction: complex g·mm, or (mass_g, angle_deg, radius_mm)
        # good_enough_gmm: residual to stop at (e.g. a fraction of the plane's permissible
        #   residual unbalance); None -> 1 % of the correction; 0 -> strictly smallest residual
        # objective: residual (at or below good-enough counts as equal), then fewest pieces,
        #   then least mass (prefer_fewer_positions puts fewest positions before pieces)
        # raises AllocationError for bad input (negative masses, no usable position, empty stock)

    Allocation: .placements: tuple[Placement, ...], .residual_gmm: complex, .residual_fraction,
                .residual_mass_g (at .correction_radius_mm), .residual_angle_deg,
                .optimal: bool, .bound_gmm: float, .warnings: tuple[str, ...],
                .kept_existing, .removed_existing (indices into ``existing``),
                .piece_count, .added_mass_g
    Placement: .position_index (0-based, None in a groove), .angle_deg, .radius_mm,
               .pieces: tuple[float, ...] (masses, g), .length_mm (strip) | None, .mass_g,
               .moved_existing, .unbalance_gmm

    allocate_planes(corrections, positions, *, stock=None, existing_per_plane=None,
                    **same_options) -> list[Allocation]
        # one Allocation per plane; positions: one Positions for all planes or one per plane;
        # the stock is shared (pieces used in one plane are gone for the next)

    split_two_positions(correction_gmm, angle_a_deg, angle_b_deg, radius_a_mm, radius_b_mm=None)
        -> tuple[float, float]          # masses (g) at positions a and b, closed form
    convert_radius(mass_g, from_radius_mm, to_radius_mm) -> float

    centrifugal_force_n(mass_g, radius_mm, speed_rpm) -> float     # F = m·r·ω², newtons, unchecked
        # (runtrue.balancing.forces.force_at_speed_n under the allocator's name)
    fitting_sheet(allocation, speed_rpm, existing=()) -> list[SheetRow]
        # one "fit" row per placement; with the ``existing`` list, "remove" rows first
    SheetRow: .number (1-based position, None in a groove), .angle_deg, .radius_mm, .what (str),
              .mass_g, .force_n, .action ("fit" | "remove" | "keep")
"""

from __future__ import annotations

from runtrue.allocation.closed_form import convert_radius, split_two_positions
from runtrue.allocation.model import (
    Allocation,
    AllocationError,
    ExistingWeight,
    Placement,
    Positions,
    Stock,
    StockItem,
    Strip,
    weight_gmm,
)
from runtrue.allocation.sheet import SheetRow, centrifugal_force_n, fitting_sheet
from runtrue.allocation.solver import allocate, allocate_planes

__all__ = [
    "Allocation",
    "AllocationError",
    "ExistingWeight",
    "Placement",
    "Positions",
    "SheetRow",
    "Stock",
    "StockItem",
    "Strip",
    "allocate",
    "allocate_planes",
    "centrifugal_force_n",
    "convert_radius",
    "fitting_sheet",
    "split_two_positions",
    "weight_gmm",
]
