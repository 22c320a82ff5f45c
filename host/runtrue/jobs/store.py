"""The job store: machines, jobs, runs and workflow decisions in one SQLite file.

Every write is its own committed transaction, made before the call returns, with SQLite's
write-ahead log and ``synchronous=FULL``: a crash, a ``kill -9`` or a pulled cable loses at most a
call that had not returned, and never tears a row (a run is one row, written in one
transaction).  A job's state is rebuilt from its runs and decisions (see
``runtrue.jobs.workflow.BalanceJob.resume``).

Where the file lives: ``$RUNTRUE_DATA_DIR/runtrue.sqlite`` when that variable is set, else
``platformdirs.user_data_dir("runtrue")/runtrue.sqlite``.

Defensive on both sides.  Every value is checked (``runtrue.validation``) before it is written,
so nothing absurd is saved.  Every record is checked again when it is read: a row the code
cannot use (damaged, written by hand, or by an older version with other limits) raises
:class:`RecordError` ("unreadable record #N: reason") for that record only; lists show it as a
row with ``problem`` set, and :meth:`JobStore.set_aside` closes such a job so it no longer
waits to be resumed.  A file that is not a job database, or one from a newer runtrue, raises
:class:`StoreError` when opened.
"""

from __future__ import annotations

import json
import math
import os
import sqlite3
import threading
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, TypeVar

from runtrue import validation
from runtrue.jobs.model import RUN_KINDS, Machine, RunReading, RunRecord, StoredInfluence, Weight

DB_FILENAME = "runtrue.sqlite"
SCHEMA_VERSION = 1

_SCHEMA = """
CREATE TABLE IF NOT EXISTS machines (
    id          INTEGER PRIMARY KEY,
    name        TEXT NOT NULL UNIQUE,
    data        TEXT NOT NULL,
    created_at  TEXT NOT NULL,
    updated_at  TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS jobs (
    id          INTEGER PRIMARY KEY,
    machine_id  INTEGER REFERENCES machines(id),
    machine     TEXT NOT NULL,
    options     TEXT NOT NULL,
    status      TEXT NOT NULL DEFAULT 'open',
    started_at  TEXT NOT NULL,
    finished_at TEXT,
    result      TEXT
);
CREATE TABLE IF NOT EXISTS runs (
    id          INTEGER PRIMARY KEY,
    job_id      INTEGER NOT NULL REFERENCES jobs(id),
    seq         INTEGER NOT NULL,
    kind        TEXT NOT NULL,
    taken_at    TEXT NOT NULL,
    reading     TEXT NOT NULL,
    weights     TEXT NOT NULL,
    note        TEXT NOT NULL DEFAULT '',
    UNIQUE (job_id, seq)
);
CREATE TABLE IF NOT EXISTS events (
    id          INTEGER PRIMARY KEY,
    job_id      INTEGER NOT NULL REFERENCES jobs(id),
    kind        TEXT NOT NULL,
    at          TEXT NOT NULL,
    data        TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS runs_by_job ON runs(job_id, seq);
CREATE INDEX IF NOT EXISTS events_by_job ON events(job_id, id);
CREATE INDEX IF NOT EXISTS jobs_by_machine ON jobs(machine_id, id);
"""

JOB_STATUSES = ("open", "passed", "stopped")

#: What reading a damaged or foreign record can raise.
_LOAD_ERRORS = (KeyError, TypeError, ValueError, IndexError, AttributeError, OverflowError)


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


def _reason(exc: BaseException) -> str:
    """A short reason for a record that failed to load."""
    if isinstance(exc, KeyError):
        return f"missing field {exc.args[0]!r}" if exc.args else "a field is missing"
    if isinstance(exc, json.JSONDecodeError):
        return "not valid JSON"
    if isinstance(exc, (TypeError, AttributeError, IndexError)):
        return "a field has the wrong type (written by another version?)"
    text = " ".join(str(exc).split())
    return text[:120] or type(exc).__name__


def _json(text: Any, table: str, row_id: int) -> Any:
    try:
        return json.loads(text)
    except (TypeError, ValueError) as exc:
        raise RecordError(table, row_id, _reason(exc)) from None


def _floats(value: Any) -> list[float]:
    """A stored list of numbers, leaving out anything that is not a finite number."""
    if not isinstance(value, list):
        return []
    out = []
    for x in value:
        if isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x):
            out.append(float(x))
    return out


def _check_reading(reading: RunReading) -> None:
    validation.in_range(reading.speed_rpm, "reading speed", validation.SPEED_MIN_RPM,
                        validation.CALC_SPEED_MAX_RPM, "rpm", "take the reading again", field="speed")
    if not 1 <= len(reading.channels) <= validation.MAX_PICKUPS:
        raise validation.ValidationError(f"a reading has 1-{validation.MAX_PICKUPS} channels", "channels")
    for i, ch in enumerate(reading.channels, start=1):
        validation.amplitude(abs(ch.mean), f"pickup {i} amplitude")

_F = TypeVar("_F", bound=Callable[..., Any])


def _locked(method: _F) -> _F:
    """Serialise a JobStore method on the store's lock (one connection, many threads)."""

    def wrapper(self: Any, *args: Any, **kwargs: Any) -> Any:
        with self._lock:
            return method(self, *args, **kwargs)

    wrapper.__name__ = method.__name__
    wrapper.__doc__ = method.__doc__
    return wrapper  # type: ignore[return-value]


def now_iso() -> str:
    """The current time, UTC, ISO 8601 to the second (``2026-12-01T21:50:03Z``)."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def default_db_path() -> Path:
    """``$RUNTRUE_DATA_DIR/runtrue.sqlite``, else under ``platformdirs.user_data_dir("runtrue")``."""
    env = os.environ.get("RUNTRUE_DATA_DIR")
    if env:
        return Path(env) / DB_FILENAME
    import platformdirs  # where user data lives on each OS

    return Path(platformdirs.user_data_dir("runtrue")) / DB_FILENAME


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


class JobStore:
    """The SQLite job store.  ``JobStore()`` opens (and creates) the default file.

    Use as a context manager or call :meth:`close`.  One store may be used from several threads
    (calls are serialised by a lock); several stores, even in several processes, may share one
    file (SQLite's WAL lets readers and one writer work side by side).
    """

    def __init__(self, path: str | os.PathLike[str] | None = None) -> None:
        self.path = Path(path) if path is not None else default_db_path()
        self._lock = threading.RLock()
        where = str(self.path)
        try:
            if where != ":memory:":
                if self.path.is_dir():
                    raise StoreError(f"{where} is a folder, not a job database; give the database file")
                self.path.parent.mkdir(parents=True, exist_ok=True)
            self._db = sqlite3.connect(where, isolation_level=None, timeout=10.0, check_same_thread=False)
        except (OSError, sqlite3.Error) as exc:
            raise StoreError(f"cannot open the job database {where}: {exc}; check the path and its permissions") from None
        try:
            self._db.row_factory = sqlite3.Row
            version = int(self._db.execute("PRAGMA user_version").fetchone()[0])
            if version > SCHEMA_VERSION:
                raise StoreError(
                    f"the job database {where} was written by a newer runtrue (format {version}, this one "
                    f"reads {SCHEMA_VERSION}); update runtrue, or use another file"
                )
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.execute("PRAGMA foreign_keys=ON")
            self._db.executescript(_SCHEMA)
            self._db.execute(f"PRAGMA user_version={SCHEMA_VERSION}")
        except sqlite3.Error as exc:
            self._db.close()
            raise StoreError(
                f"{where} is not a runtrue job database ({exc}); give the right file, or move this one "
                "away and runtrue starts a new one"
            ) from None
        except StoreError:
            self._db.close()
            raise

    # -- plumbing -------------------------------------------------------------------------------
    @_locked
    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> JobStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @_locked
    def _write(self, sql: str, params: Iterable[Any] = ()) -> sqlite3.Cursor:
        """One statement in one committed transaction."""
        cur = self._db.cursor()
        cur.execute("BEGIN IMMEDIATE")
        try:
            cur.execute(sql, tuple(params))
        except BaseException:
            cur.execute("ROLLBACK")
            raise
        cur.execute("COMMIT")
        return cur

    # -- machines -------------------------------------------------------------------------------
    @_locked
    def save_machine(self, machine: Machine) -> int:
        """Insert a new machine or update a saved one (``machine.id`` set); returns the id.

        Raises ValueError when another machine already has the name.
        """
        validation.check_machine(machine)
        data = json.dumps(machine.to_dict())
        t = now_iso()
        try:
            if machine.id is None:
                cur = self._write(
                    "INSERT INTO machines (name, data, created_at, updated_at) VALUES (?, ?, ?, ?)",
                    (machine.name, data, t, t),
                )
                machine.id = int(cur.lastrowid or 0)
            else:
                cur = self._write(
                    "UPDATE machines SET name=?, data=?, updated_at=? WHERE id=?",
                    (machine.name, data, t, machine.id),
                )
                if cur.rowcount == 0:
                    raise ValueError(f"no saved machine with id {machine.id}")
        except sqlite3.IntegrityError:
            raise ValueError(
                f"a machine named {machine.name!r} is already saved: pick it, or choose another name"
            ) from None
        return machine.id

    @_locked
    def get_machine(self, key: int | str) -> Machine | None:
        """A saved machine by id or by exact name; None if there is none."""
        if isinstance(key, int):
            row = self._db.execute("SELECT id, data FROM machines WHERE id=?", (key,)).fetchone()
        else:
            row = self._db.execute("SELECT id, data FROM machines WHERE name=?", (key,)).fetchone()
        return _load_machine(row["data"], row["id"], "machines", row["id"]) if row else None

    @_locked
    def list_machines(self) -> list[Machine]:
        """The saved machines that can be used, by name (see :meth:`unreadable_machines`)."""
        rows = self._db.execute("SELECT id, data FROM machines ORDER BY name COLLATE NOCASE").fetchall()
        out = []
        for r in rows:
            try:
                out.append(_load_machine(r["data"], r["id"], "machines", r["id"]))
            except RecordError:
                continue
        return out

    @_locked
    def unreadable_machines(self) -> list[RecordError]:
        """The saved machines that cannot be used, each with its reason."""
        out = []
        for r in self._db.execute("SELECT id, data FROM machines ORDER BY id").fetchall():
            try:
                _load_machine(r["data"], r["id"], "machines", r["id"])
            except RecordError as exc:
                out.append(exc)
        return out

    @_locked
    def store_influence(self, machine_id: int, influence: StoredInfluence) -> None:
        """Keep fitted influence coefficients with a saved machine (for its next job)."""
        machine = self.get_machine(machine_id)
        if machine is None:
            raise ValueError(f"no saved machine with id {machine_id}")
        machine.influence = influence
        self.save_machine(machine)

    # -- jobs -----------------------------------------------------------------------------------
    @_locked
    def new_job(self, machine: Machine, options: dict[str, Any] | None = None) -> int:
        """Start a job on a machine (saved or not); the machine is kept as it is now."""
        validation.check_machine(machine)
        cur = self._write(
            "INSERT INTO jobs (machine_id, machine, options, status, started_at) VALUES (?, ?, ?, 'open', ?)",
            (machine.id, json.dumps(machine.to_dict()), json.dumps(options or {}), now_iso()),
        )
        return int(cur.lastrowid or 0)

    @_locked
    def get_job(self, job_id: int) -> JobRecord | None:
        """A job by number; None if there is none; :class:`RecordError` if it cannot be used."""
        if not 1 <= job_id <= validation.MAX_JOB_ID:
            return None
        row = self._db.execute("SELECT * FROM jobs WHERE id=?", (job_id,)).fetchone()
        if row is None:
            return None
        options = _json(row["options"], "jobs", job_id)
        result = _json(row["result"], "jobs", job_id) if row["result"] else None
        if not isinstance(options, dict) or not (result is None or isinstance(result, dict)):
            raise RecordError("jobs", job_id, "its options or result are not a JSON object")
        if row["status"] not in JOB_STATUSES:
            raise RecordError("jobs", job_id, f"unknown status {str(row['status'])[:20]!r}")
        return JobRecord(
            id=row["id"],
            machine_id=row["machine_id"],
            machine=_load_machine(row["machine"], row["machine_id"], "jobs", job_id),
            options=options,
            status=row["status"],
            started_at=str(row["started_at"]),
            finished_at=row["finished_at"],
            result=result,
        )

    @_locked
    def job_problem(self, job_id: int) -> str:
        """Why a job cannot be resumed or shown ("unreadable record #N (...): reason"), or ""."""
        try:
            rec = self.get_job(job_id)
            if rec is None:
                return f"there is no job {job_id}"
            self.runs(job_id)
            self.events(job_id, rotor_mass_kg=rec.machine.rotor_mass_kg)
        except RecordError as exc:
            return str(exc)
        return ""

    @_locked
    def set_aside(self, job_id: int, reason: str = "") -> None:
        """Close an unfinished job that cannot be resumed (status "stopped", no result): it leaves
        the resume list and its records stay in the file, untouched, for a report or a repair."""
        self._write(
            "UPDATE jobs SET status='stopped', finished_at=? WHERE id=? AND status='open'",
            (now_iso(), job_id),
        )
        self._write(
            "INSERT INTO events (job_id, kind, at, data) VALUES (?, 'set_aside', ?, ?)",
            (job_id, now_iso(), json.dumps({"reason": reason[:500]})),
        )

    @_locked
    def finish_job(self, job_id: int, status: str, result: dict[str, Any] | None) -> None:
        """Close a job as ``"passed"`` or ``"stopped"`` with its result (JSON-able)."""
        if status not in JOB_STATUSES:
            raise ValueError(f"job status must be one of {JOB_STATUSES}")
        finished = None if status == "open" else now_iso()
        self._write(
            "UPDATE jobs SET status=?, finished_at=?, result=? WHERE id=?",
            (status, finished, json.dumps(result) if result is not None else None, job_id),
        )

    @_locked
    def save_result(self, job_id: int, result: dict[str, Any]) -> None:
        """Keep the latest result of a job still open (shown in lists and history)."""
        self._write("UPDATE jobs SET result=? WHERE id=?", (json.dumps(result), job_id))

    @_locked
    def list_jobs(self, machine_id: int | None = None, status: str | None = None) -> list[JobSummary]:
        """Jobs, newest first; optionally of one machine and/or one status."""
        sql = (
            "SELECT j.id, j.machine_id, j.machine, j.status, j.started_at, j.finished_at, j.result, "
            "(SELECT COUNT(*) FROM runs r WHERE r.job_id = j.id) AS n_runs FROM jobs j"
        )
        where: list[str] = []
        params: list[Any] = []
        if machine_id is not None:
            where.append("j.machine_id = ?")
            params.append(machine_id)
        if status is not None:
            where.append("j.status = ?")
            params.append(status)
        if where:
            sql += " WHERE " + " AND ".join(where)
        sql += " ORDER BY j.id DESC"
        out = []
        for r in self._db.execute(sql, params).fetchall():
            problem = ""
            name = "?"
            passed = None
            try:
                result = _json(r["result"], "jobs", r["id"]) if r["result"] else None
                machine = _json(r["machine"], "jobs", r["id"])
                if not isinstance(machine, dict) or not isinstance(machine.get("name"), str):
                    raise RecordError("jobs", r["id"], "the machine it was started on has no name")
                name = machine["name"]
                passed = result.get("passed") if isinstance(result, dict) else None
                passed = passed if isinstance(passed, bool) else None
            except RecordError as exc:
                problem = str(exc)
            out.append(
                JobSummary(
                    id=r["id"],
                    machine_id=r["machine_id"],
                    machine_name=name,
                    status=str(r["status"]),
                    started_at=str(r["started_at"]),
                    finished_at=r["finished_at"],
                    n_runs=r["n_runs"],
                    passed=passed,
                    problem=problem,
                )
            )
        return out

    @_locked
    def unfinished_jobs(self) -> list[JobSummary]:
        """Jobs still open (interrupted or in progress), newest first: offer to resume them.
        Each is checked through: one that cannot be resumed has ``problem`` set."""
        out = []
        for j in self.list_jobs(status="open"):
            if not j.problem:
                problem = self.job_problem(j.id)
                if problem:
                    j = JobSummary(**{**j.__dict__, "problem": problem})
            out.append(j)
        return out

    @_locked
    def machine_history(self, machine_id: int) -> list[JobSummary]:
        """Every job of a saved machine, newest first."""
        return self.list_jobs(machine_id=machine_id)

    @_locked
    def trend(self, machine_id: int) -> list[TrendPoint]:
        """The machine's finished jobs, oldest first: initial and final 1× and residual unbalance."""
        rows = self._db.execute(
            "SELECT id, started_at, result FROM jobs WHERE machine_id=? AND status != 'open' "
            "AND result IS NOT NULL ORDER BY id",
            (machine_id,),
        ).fetchall()
        points = []
        for r in rows:
            try:
                res = _json(r["result"], "jobs", r["id"])
            except RecordError:
                continue  # listed as unreadable by list_jobs; no point for the trend
            if not isinstance(res, dict):
                continue
            residual = _floats(res.get("residual_unbalance_gmm"))
            permissible = _floats(res.get("permissible_unbalance_gmm"))
            if len(residual) != len(permissible) or any(p <= 0 for p in permissible):
                residual, permissible = [], []  # a ratio of these would mean nothing
            passed = res.get("passed")
            speed = res.get("speed_rpm")
            points.append(
                TrendPoint(
                    job_id=r["id"],
                    date=str(r["started_at"]),
                    initial_amp_g=_floats(res.get("initial")),
                    final_amp_g=_floats(res.get("final")),
                    residual_unbalance_gmm=residual,
                    permissible_unbalance_gmm=permissible,
                    passed=passed if isinstance(passed, bool) else None,
                    speed_rpm=float(speed) if isinstance(speed, (int, float)) and math.isfinite(speed) else None,
                )
            )
        return points

    # -- runs and decisions ---------------------------------------------------------------------
    @_locked
    def add_run(
        self,
        job_id: int,
        kind: str,
        reading: RunReading,
        weights: Iterable[Weight],
        note: str = "",
        taken_at: str | None = None,
    ) -> RunRecord:
        """Record a taken reading with every weight present; committed before returning."""
        if kind not in RUN_KINDS:
            raise ValueError(f"run kind must be one of {RUN_KINDS}, got {kind!r}")
        weights = tuple(weights)
        _check_reading(reading)
        for w in weights:
            _check_run_weight(w)
        validation.text(note, "note", validation.MAX_NOTE_CHARS)
        n = self._db.execute("SELECT COUNT(*) FROM runs WHERE job_id=?", (job_id,)).fetchone()[0]
        if n >= validation.MAX_RUNS:
            raise validation.ValidationError(
                f"a job holds at most {validation.MAX_RUNS} runs; stop this job and start a new one")
        taken_at = taken_at or now_iso()
        cur = self._db.cursor()
        cur.execute("BEGIN IMMEDIATE")
        try:
            row = cur.execute("SELECT COALESCE(MAX(seq), 0) + 1 FROM runs WHERE job_id=?", (job_id,)).fetchone()
            seq = int(row[0])
            cur.execute(
                "INSERT INTO runs (job_id, seq, kind, taken_at, reading, weights, note) VALUES (?, ?, ?, ?, ?, ?, ?)",
                (
                    job_id,
                    seq,
                    kind,
                    taken_at,
                    json.dumps(reading.to_dict()),
                    json.dumps([w.to_dict() for w in weights]),
                    note,
                ),
            )
            run_id = cur.lastrowid
        except BaseException:
            cur.execute("ROLLBACK")
            raise
        cur.execute("COMMIT")
        return RunRecord(job_id, seq, kind, taken_at, reading, weights, note, id=run_id)

    @_locked
    def runs(self, job_id: int) -> list[RunRecord]:
        """A job's runs in the order taken."""
        rows = self._db.execute("SELECT * FROM runs WHERE job_id=? ORDER BY seq", (job_id,)).fetchall()
        out = []
        for r in rows:
            try:
                if r["kind"] not in RUN_KINDS:
                    raise ValueError(f"unknown run kind {str(r['kind'])[:20]!r}")
                reading = RunReading.from_dict(_json(r["reading"], "runs", r["id"]))
                weights = tuple(Weight.from_dict(w) for w in _json(r["weights"], "runs", r["id"]))
                _check_reading(reading)
                for w in weights:
                    _check_run_weight(w)
            except RecordError:
                raise
            except _LOAD_ERRORS as exc:
                raise RecordError("runs", r["id"], f"run {r['seq']} of job {job_id}: {_reason(exc)}") from None
            out.append(RunRecord(job_id=r["job_id"], seq=r["seq"], kind=r["kind"], taken_at=str(r["taken_at"]),
                                 reading=reading, weights=weights, note=str(r["note"]), id=r["id"]))
        return out

    @_locked
    def add_event(self, job_id: int, kind: str, data: dict[str, Any] | None = None) -> int:
        """Record a workflow decision (committed before returning); a chosen weight is checked
        against the limits first (``runtrue.validation``)."""
        _check_event(kind, data or {}, self._rotor_mass_kg(job_id))
        cur = self._write(
            "INSERT INTO events (job_id, kind, at, data) VALUES (?, ?, ?, ?)",
            (job_id, kind, now_iso(), json.dumps(data or {})),
        )
        return int(cur.lastrowid or 0)

    def _rotor_mass_kg(self, job_id: int) -> float | None:
        row = self._db.execute("SELECT machine FROM jobs WHERE id=?", (job_id,)).fetchone()
        try:
            mass = json.loads(row["machine"])["rotor_mass_kg"] if row else None
            return float(mass) if isinstance(mass, (int, float)) and math.isfinite(mass) and mass > 0 else None
        except _LOAD_ERRORS:
            return None

    @_locked
    def events(self, job_id: int, *, rotor_mass_kg: float | None = None) -> list[Event]:
        """A job's decisions in order; :class:`RecordError` for one that cannot be used."""
        mass = rotor_mass_kg if rotor_mass_kg is not None else self._rotor_mass_kg(job_id)
        rows = self._db.execute("SELECT * FROM events WHERE job_id=? ORDER BY id", (job_id,)).fetchall()
        out = []
        for r in rows:
            data = _json(r["data"], "events", r["id"])
            try:
                if not isinstance(data, dict):
                    raise TypeError("not an object")
                _check_event(str(r["kind"]), data, mass)
            except _LOAD_ERRORS as exc:
                raise RecordError("events", r["id"], f"{r['kind']} of job {job_id}: {_reason(exc)}") from None
            out.append(Event(str(r["kind"]), data, str(r["at"]), r["id"]))
        return out


def _load_machine(text: Any, machine_id: int | None, table: str, row_id: int) -> Machine:
    """A stored machine, checked against today's limits, or :class:`RecordError`."""
    data = _json(text, table, row_id)
    try:
        if not isinstance(data, dict):
            raise TypeError("not an object")
        machine = Machine.from_dict(data, id=machine_id)
        validation.check_machine(machine)
    except _LOAD_ERRORS as exc:
        raise RecordError(table, row_id, _reason(exc)) from None
    return machine


def _check_run_weight(w: Weight) -> None:
    """A weight recorded with a run: as a balance weight, or 0 g (a weight taken off)."""
    if w.mass_g == 0:
        validation.whole(w.plane, "weight plane", 1, validation.MAX_PLANES)
        return
    validation.check_weight(w)


def _check_event(kind: str, data: dict[str, Any], rotor_mass_kg: float | None) -> None:
    """The values inside a recorded decision (a chosen trial weight) within the limits."""
    if kind == "trial_set":
        w = Weight(int(validation.whole(data["plane"], "trial plane", 1, validation.MAX_PLANES)),
                   validation.number(data["mass_g"], "trial mass"),
                   validation.number(data["angle_deg"], "trial angle"),
                   validation.number(data["radius_mm"], "trial radius"))
        validation.check_weight(w, rotor_mass_kg=rotor_mass_kg)
