"""The weight allocator's exact search (filled in below; API fixed)."""

from __future__ import annotations

from typing import Sequence

from runtrue.allocation.model import Allocation, ExistingWeight, Positions, Stock, Strip


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
    max_nodes: int = 200_000,
) -> Allocation:
    raise NotImplementedError


def allocate_planes(
    corrections: Sequence[complex | tuple[float, float, float]],
    positions: Positions | Sequence[Positions],
    *,
    stock: Stock | None = None,
    **options: object,
) -> list[Allocation]:
    raise NotImplementedError
