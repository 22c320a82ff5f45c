"""Weights on a rotor during a job: trial labels, per-plane sums, positions and weights left on.

Conventions as in ``runtrue.jobs.model``: a weight's unbalance is ``mass_g·radius_mm·e^{+jθ}``
(g·mm), its angle measured from the mark against rotation; planes and positions numbered from 1.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

from runtrue.jobs.model import Machine, Weight
from runtrue.jobs.store import JobStore
from runtrue.readings.units import angle_between_deg

#: Labels of trial weights start with this (a weight so labelled is a trial weight).
TRIAL_PREFIX = "trial"


def trial_label(plane: int) -> str:
    """The label of the trial weight in ``plane``."""
    return f"trial weight, plane {plane}"


def is_trial(w: Weight) -> bool:
    return w.label.startswith(TRIAL_PREFIX)


def plane_sums(weights: Iterable[Weight]) -> dict[int, complex]:
    """The total unbalance (g·mm) of ``weights`` in each plane."""
    out: dict[int, complex] = {}
    for w in weights:
        out[w.plane] = out.get(w.plane, 0j) + w.unbalance_gmm
    return out


def same_sums(a: dict[int, complex], b: dict[int, complex], tol_gmm: float = 1e-6) -> bool:
    """True when two :func:`plane_sums` are the same in every plane (relative tolerance)."""
    for p in set(a) | set(b):
        if abs(a.get(p, 0j) - b.get(p, 0j)) > tol_gmm * max(1.0, abs(a.get(p, 0j)), abs(b.get(p, 0j))):
            return False
    return True


def weight_key(w: Weight) -> tuple[int, float, float, float]:
    """A weight's identity for confirmations: plane, mass, angle and radius, rounded."""
    return (w.plane, round(w.mass_g, 4), round(w.angle_deg % 360.0, 3), round(w.radius_mm, 3))


def position_number(machine: Machine, plane: int, angle_deg: float) -> int | None:
    """The 1-based position number at ``angle_deg`` in ``plane`` (None in a groove or between)."""
    angles = machine.planes[plane - 1].position_angles_deg()
    if angles is None:
        return None
    for n, a in enumerate(angles, start=1):
        if angle_between_deg(a, angle_deg) < 1e-6:
            return n
    return None


def start_weights_options(machine: Machine, weights: Sequence[Weight], combine: bool,
                          move: bool = False) -> dict[str, Any]:
    """Job options for weights already on the rotor when the job starts (left by an earlier job):
    ``combine`` - the correction replaces them; ``move`` - the correction may leave each where it
    is, move it to another position, or take it off (the allocator decides, with the stock)."""
    out: dict[str, Any] = {}
    for w in weights:
        if not 1 <= w.plane <= machine.n_planes:
            raise ValueError(f"a weight left on is in plane {w.plane}, but {machine.name!r} has {machine.n_planes} plane(s)")
    if combine and move:
        raise ValueError("weights left on are either combined into the correction or moved, not both")
    if weights:
        out["weights_at_start"] = [w.to_dict() for w in weights]
        out["combine_at_start"] = bool(combine)
        if move:
            out["move_at_start"] = True
    return out


def weights_left_on(store: JobStore, machine: Machine) -> tuple[int, str, list[Weight]] | None:
    """What the latest earlier job on ``machine`` left on the rotor: (job id, when it ended, the
    weights, relative to the rotor as found before any job), or None (no earlier job with weights)."""
    if machine.id is None:
        return None
    jobs = [j for j in store.machine_history(machine.id) if j.n_runs > 0]
    if not jobs:
        return None
    last = max(jobs, key=lambda j: j.id)
    runs = store.runs(last.id)
    weights = list(runs[-1].weights) if runs else []
    if not weights:
        return None
    return last.id, last.finished_at or runs[-1].taken_at, weights
