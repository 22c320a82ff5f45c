"""What the job store reads back, and the checks every row passes on its way in and out.

The records of rows (:class:`JobRecord`, :class:`JobSummary`, :class:`Event`, :class:`TrendPoint`),
the two errors (:class:`StoreError`: the file cannot be used at all; :class:`RecordError`: one
record cannot), and the loaders and checks: every value is checked (``runtrue.validation``)
before it is written and every record again when it is read, so a row the code cannot use
(damaged, written by hand, or by an older version with other limits) raises
:class:`RecordError` for that record only.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Any

from runtrue import validation
from runtrue.jobs.model import Machine, RunReading, Weight

#: What reading a damaged or foreign record can raise.
LOAD_ERRORS = (KeyError, TypeError, ValueError, IndexError, AttributeError, OverflowError)


class StoreError(Exception):
    """The job database file cannot be used at all; the message says which file and what to do."""


class RecordError(ValueError):
    """One stored record the code cannot use.  ``table`` and ``row_id`` say which, ``reason`` why."""

    def __init__(self, table: str, row_id: int, reason: str) -> None:
        self.table = table
        self.row_id = row_id
        self.reason = reason
        what = {"jobs": "job", "machines": "machine", "runs": "run", "events": "job decision"}.get(table, table)
        super().__init__(f"unreadable record #{row_id} ({what}): {reason}")


def reason(exc: BaseException) -> str:
    """A short reason for a record that failed to load."""
    if isinstance(exc, KeyError):
        return f"missing field {exc.args[0]!r}" if exc.args else "a field is missing"
    if isinstance(exc, json.JSONDecodeError):
        return "not valid JSON"
    if isinstance(exc, (TypeError, AttributeError, IndexError)):
        return "a field has the wrong type (written by another version?)"
    text = " ".join(str(exc).split())
    return text[:120] or type(exc).__name__


def load_json(text: Any, table: str, row_id: int) -> Any:
    try:
        return json.loads(text)
    except (TypeError, ValueError) as exc:
        raise RecordError(table, row_id, reason(exc)) from None


def finite_floats(value: Any) -> list[float]:
    """A stored list of numbers, leaving out anything that is not a finite number."""
    if not isinstance(value, list):
        return []
    out = []
    for x in value:
        if isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x):
            out.append(float(x))
    return out


def check_reading(reading: RunReading) -> None:
    validation.in_range(reading.speed_rpm, "reading speed", validation.SPEED_MIN_RPM,
                        validation.CALC_SPEED_MAX_RPM, "rpm", "take the reading again", field="speed")
    if not 1 <= len(reading.channels) <= validation.MAX_PICKUPS:
        raise validation.ValidationError(f"a reading has 1-{validation.MAX_PICKUPS} channels", "channels")
    for i, ch in enumerate(reading.channels, start=1):
        validation.amplitude(abs(ch.mean), f"pickup {i} amplitude")


@dataclass(frozen=True)
class Event:
    """A workflow decision recorded with a job (trial chosen, trial check overridden, stop...)."""

    kind: str
    data: dict[str, Any]
    at: str
    id: int


@dataclass(frozen=True)
class JobRecord:
    """A job as stored. ``machine`` is the machine as it was described when the job started."""

    id: int
    machine_id: int | None
    machine: Machine
    options: dict[str, Any]
    status: str
    started_at: str
    finished_at: str | None
    result: dict[str, Any] | None


@dataclass(frozen=True)
class JobSummary:
    """One line of a job list: enough to pick a job to resume, show or report."""

    id: int
    machine_id: int | None
    machine_name: str
    status: str
    started_at: str
    finished_at: str | None
    n_runs: int
    passed: bool | None
    problem: str = ""  # set when the record cannot be used: "unreadable record #N (job): reason"


@dataclass(frozen=True)
class TrendPoint:
    """One finished job in a machine's history: how bad it was, how good it ended."""

    job_id: int
    date: str
    initial_amp_g: list[float]
    final_amp_g: list[float]
    residual_unbalance_gmm: list[float]
    permissible_unbalance_gmm: list[float]
    passed: bool | None
    speed_rpm: float | None


def load_machine(text: Any, machine_id: int | None, table: str, row_id: int) -> Machine:
    """A stored machine, checked against today's limits, or :class:`RecordError`."""
    data = load_json(text, table, row_id)
    try:
        if not isinstance(data, dict):
            raise TypeError("not an object")
        machine = Machine.from_dict(data, id=machine_id)
        validation.check_machine(machine)
    except LOAD_ERRORS as exc:
        raise RecordError(table, row_id, reason(exc)) from None
    return machine


def check_run_weight(w: Weight) -> None:
    """A weight recorded with a run: as a balance weight, or 0 g (a weight taken off)."""
    if w.mass_g == 0:
        validation.whole(w.plane, "weight plane", 1, validation.MAX_PLANES)
        return
    validation.check_weight(w)


def check_event(kind: str, data: dict[str, Any], rotor_mass_kg: float | None) -> None:
    """The values inside a recorded decision (a chosen trial weight) within the limits."""
    if kind == "trial_set":
        w = Weight(int(validation.whole(data["plane"], "trial plane", 1, validation.MAX_PLANES)),
                   validation.number(data["mass_g"], "trial mass"),
                   validation.number(data["angle_deg"], "trial angle"),
                   validation.number(data["radius_mm"], "trial radius"))
        validation.check_weight(w, rotor_mass_kg=rotor_mass_kg)
