"""The job store: machines, jobs, runs and workflow decisions in one SQLite file.

Every write is its own committed transaction, made before the call returns, with SQLite's
write-ahead log and ``synchronous=FULL``: a crash, a ``kill -9`` or a pulled cable loses at most a
call that had not returned, and never tears a row (a run is one row, written in one
transaction).  A job's state is rebuilt from its runs and decisions (see
``runtrue.jobs.job.BalanceJob.resume``).

Where the file lives: ``$RUNTRUE_DATA_DIR/runtrue.sqlite`` when that variable is set, else
``platformdirs.user_data_dir("runtrue")/runtrue.sqlite``.

Defensive on both sides.  Every value is checked (``runtrue.validation``) before it is written,
so nothing absurd is saved.  Every record is checked again when it is read: a row the code
cannot use (damaged, written by hand, or by an older version with other limits) raises
:class:`RecordError` ("unreadable record #N: reason") for that record only; lists show it as a
row with ``problem`` set, and :meth:`JobStore.set_aside` closes such a job so it no longer
waits to be resumed (the records and the checks: ``runtrue.jobs.store_rows``).  A file that is
not a job database, or one from a newer runtrue, raises :class:`StoreError` when opened; a file
from an older runtrue is upgraded when opened (``runtrue.jobs.schema``).
"""

from __future__ import annotations

import json
import math
import os
import sqlite3
import threading
from collections.abc import Callable, Iterable
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, TypeVar

from runtrue import validation
from runtrue.jobs import schema, store_queries
from runtrue.jobs.model import RUN_KINDS, Machine, RunReading, RunRecord, StoredInfluence, Weight
from runtrue.jobs.schema import SCHEMA_VERSION
from runtrue.jobs.store_rows import (
    LOAD_ERRORS,
    Event,
    JobRecord,
    JobSummary,
    RecordError,
    StoreError,
    TrendPoint,
    check_event,
    check_reading,
    check_run_weight,
    load_json,
    load_machine,
    reason,
)

__all__ = ["DB_FILENAME", "JOB_STATUSES", "SCHEMA_VERSION", "Event", "JobRecord", "JobStore", "JobSummary",
           "RecordError", "StoreError", "TrendPoint", "default_db_path", "now_iso"]

DB_FILENAME = "runtrue.sqlite"

JOB_STATUSES = ("open", "passed", "stopped")

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
            schema.refuse_newer(self._db, where)  # before anything is written to it
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.execute("PRAGMA foreign_keys=ON")
            schema.upgrade(self._db, where, schema.MIGRATIONS)
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
        return load_machine(row["data"], row["id"], "machines", row["id"]) if row else None

    @_locked
    def list_machines(self) -> list[Machine]:
        """The saved machines that can be used, by name (see :meth:`unreadable_machines`)."""
        rows = self._db.execute("SELECT id, data FROM machines ORDER BY name COLLATE NOCASE").fetchall()
        out = []
        for r in rows:
            try:
                out.append(load_machine(r["data"], r["id"], "machines", r["id"]))
            except RecordError:
                continue
        return out

    @_locked
    def unreadable_machines(self) -> list[RecordError]:
        """The saved machines that cannot be used, each with its reason."""
        out = []
        for r in self._db.execute("SELECT id, data FROM machines ORDER BY id").fetchall():
            try:
                load_machine(r["data"], r["id"], "machines", r["id"])
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
        options = load_json(row["options"], "jobs", job_id)
        result = load_json(row["result"], "jobs", job_id) if row["result"] else None
        if not isinstance(options, dict) or not (result is None or isinstance(result, dict)):
            raise RecordError("jobs", job_id, "its options or result are not a JSON object")
        if row["status"] not in JOB_STATUSES:
            raise RecordError("jobs", job_id, f"unknown status {str(row['status'])[:20]!r}")
        return JobRecord(
            id=row["id"],
            machine_id=row["machine_id"],
            machine=load_machine(row["machine"], row["machine_id"], "jobs", job_id),
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
        return store_queries.list_jobs(self._db, machine_id, status)

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
        """The machine's finished jobs, oldest first: initial and final 1x and residual unbalance."""
        return store_queries.trend(self._db, machine_id)

    @_locked
    def schema_history(self) -> list[dict[str, Any]]:
        """When the file was upgraded to each format and by which runtrue, oldest first."""
        return store_queries.schema_history(self._db)

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
        check_reading(reading)
        for w in weights:
            check_run_weight(w)
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
                reading = RunReading.from_dict(load_json(r["reading"], "runs", r["id"]))
                weights = tuple(Weight.from_dict(w) for w in load_json(r["weights"], "runs", r["id"]))
                check_reading(reading)
                for w in weights:
                    check_run_weight(w)
            except RecordError:
                raise
            except LOAD_ERRORS as exc:
                raise RecordError("runs", r["id"], f"run {r['seq']} of job {job_id}: {reason(exc)}") from None
            out.append(RunRecord(job_id=r["job_id"], seq=r["seq"], kind=r["kind"], taken_at=str(r["taken_at"]),
                                 reading=reading, weights=weights, note=str(r["note"]), id=r["id"]))
        return out

    @_locked
    def add_event(self, job_id: int, kind: str, data: dict[str, Any] | None = None) -> int:
        """Record a workflow decision (committed before returning); a chosen weight is checked
        against the limits first (``runtrue.validation``)."""
        check_event(kind, data or {}, self._rotor_mass_kg(job_id))
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
        except LOAD_ERRORS:
            return None

    @_locked
    def events(self, job_id: int, *, rotor_mass_kg: float | None = None) -> list[Event]:
        """A job's decisions in order; :class:`RecordError` for one that cannot be used."""
        mass = rotor_mass_kg if rotor_mass_kg is not None else self._rotor_mass_kg(job_id)
        rows = self._db.execute("SELECT * FROM events WHERE job_id=? ORDER BY id", (job_id,)).fetchall()
        out = []
        for r in rows:
            data = load_json(r["data"], "events", r["id"])
            try:
                if not isinstance(data, dict):
                    raise TypeError("not an object")
                check_event(str(r["kind"]), data, mass)
            except LOAD_ERRORS as exc:
                raise RecordError("events", r["id"], f"{r['kind']} of job {job_id}: {reason(exc)}") from None
            out.append(Event(str(r["kind"]), data, str(r["at"]), r["id"]))
        return out
