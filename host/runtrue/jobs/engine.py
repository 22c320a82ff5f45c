"""Converters between the jobs layer's records and the balancing engine's types.

One weight type per layer: a job keeps ``runtrue.jobs.model.Weight`` (with a label and the stock
pieces it is made of) and ``RunRecord``; the engine (``runtrue.balancing``) takes its own
``Weight`` and ``Run``.  They are converted here and nowhere else.
"""

from __future__ import annotations

from typing import Any

from runtrue.balancing import Run
from runtrue.balancing import Weight as EngineWeight
from runtrue.jobs.model import RunRecord, Weight


def engine_weight(w: Weight) -> EngineWeight:
    """The engine's weight for a job's weight (label and pieces are the job's own business)."""
    return EngineWeight(w.plane, w.mass_g, w.angle_deg, w.radius_mm)


def engine_run(r: RunRecord) -> Run:
    """The engine's run for a recorded run: its weights, its 1x readings and, when the meter
    gave them, the readings' spreads."""
    spreads = [c.spread_g for c in r.reading.channels]
    return Run(
        weights=[engine_weight(w) for w in r.weights],
        readings=r.reading.vector(),
        spreads=spreads if any(spreads) else None,
    )


def influence_rows(matrix: Any) -> list[list[complex]]:
    """An engine influence matrix (pickups x planes, numpy) as the job's ``[pickup][plane]`` lists."""
    return [[complex(matrix[i, j]) for j in range(matrix.shape[1])] for i in range(matrix.shape[0])]
