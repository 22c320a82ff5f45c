"""The converters between a job's records and the balancing engine's types
(``runtrue.jobs.engine``): the engine must see the same unbalances and readings the job keeps."""

from __future__ import annotations

import numpy as np
import pytest

from runtrue.balancing import Run
from runtrue.jobs import RunReading, RunRecord, Weight
from runtrue.jobs.engine import engine_run, engine_weight, influence_rows


def record(reading: RunReading, weights: tuple[Weight, ...]) -> RunRecord:
    return RunRecord(1, 2, "trial", "2026-12-02T10:00:00Z", reading, weights)


def test_a_weight_keeps_its_unbalance_and_leaves_label_and_pieces_behind() -> None:
    w = Weight(2, 12.5, 135.0, 160.0, "trial weight, plane 2", (10.0, 2.5))
    e = engine_weight(w)
    assert (e.plane, e.mass_g, e.angle_deg, e.radius_mm) == (2, 12.5, 135.0, 160.0)
    assert e.unbalance_gmm == pytest.approx(w.unbalance_gmm)


def test_a_run_keeps_its_readings_and_passes_spreads_only_when_measured() -> None:
    typed = RunReading.manual([0.8, 0.3], [40.0, 300.0], 1470.0)  # typed in: no scatter known
    run = engine_run(record(typed, (Weight(1, 5.0, 0.0, 160.0, "trial weight, plane 1"),)))
    assert isinstance(run, Run) and run.spreads is None
    assert list(run.readings) == pytest.approx(list(typed.vector()))
    assert [w.unbalance_gmm for w in run.weights] == pytest.approx([800.0 + 0j])
    measured = RunReading.manual([0.8, 0.3], [40.0, 300.0], 1470.0, spreads=[0.01, 0.02])
    assert list(engine_run(record(measured, ())).spreads or []) == [0.01, 0.02]


def test_influence_matrix_becomes_pickup_by_plane_lists() -> None:
    h = np.array([[1 + 2j, 3j], [0.5 + 0j, -1j]])
    assert influence_rows(h) == [[1 + 2j, 3j], [0.5 + 0j, -1j]]
