"""The job store: machines, jobs, runs and workflow decisions in one SQLite file.

Every write is its own committed transaction, made before the call returns, with SQLite's
write-ahead log and ``synchronous=FULL``: a crash, a ``kill -9`` or a pulled cable loses at most a
call that had not returned, and never tears a row (a run is one row, written in one
transaction).  A job's state is rebuilt from its runs and decisions (see
``runtrue.jobs.workflow.BalanceJob.resume``).

Where the file lives: ``$RUNTRUE_DATA_DIR/runtrue.sqlite`` when that variable is set, else
``platformdirs.user_data_dir("runtrue")/runtrue.sqlite``.
"""

from __future__ import annotations

import json
import os
import sqlite3
import threading
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Callable, Iterable, TypeVar

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
        if str(self.path) != ":memory:":
            self.path.parent.mkdir(parents=True, exist_ok=True)
        self._lock = threading.RLock()
        self._db = sqlite3.connect(str(self.path), isolation_level=None, timeout=10.0, check_same_thread=False)
        self._db.row_factory = sqlite3.Row
        self._db.execute("PRAGMA journal_mode=WAL")
        self._db.execute("PRAGMA synchronous=FULL")
        self._db.execute("PRAGMA foreign_keys=ON")
        self._db.executescript(_SCHEMA)
        self._db.execute(f"PRAGMA user_version={SCHEMA_VERSION}")

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
        return Machine.from_dict(json.loads(row["data"]), id=row["id"]) if row else None

    @_locked
    def list_machines(self) -> list[Machine]:
        rows = self._db.execute("SELECT id, data FROM machines ORDER BY name COLLATE NOCASE").fetchall()
        return [Machine.from_dict(json.loads(r["data"]), id=r["id"]) for r in rows]

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
        cur = self._write(
            "INSERT INTO jobs (machine_id, machine, options, status, started_at) VALUES (?, ?, ?, 'open', ?)",
            (machine.id, json.dumps(machine.to_dict()), json.dumps(options or {}), now_iso()),
        )
        return int(cur.lastrowid or 0)

    @_locked
    def get_job(self, job_id: int) -> JobRecord | None:
        row = self._db.execute("SELECT * FROM jobs WHERE id=?", (job_id,)).fetchone()
        if row is None:
            return None
        return JobRecord(
            id=row["id"],
            machine_id=row["machine_id"],
            machine=Machine.from_dict(json.loads(row["machine"]), id=row["machine_id"]),
            options=json.loads(row["options"]),
            status=row["status"],
            started_at=row["started_at"],
            finished_at=row["finished_at"],
            result=json.loads(row["result"]) if row["result"] else None,
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
            result = json.loads(r["result"]) if r["result"] else None
            out.append(
                JobSummary(
                    id=r["id"],
                    machine_id=r["machine_id"],
                    machine_name=json.loads(r["machine"])["name"],
                    status=r["status"],
                    started_at=r["started_at"],
                    finished_at=r["finished_at"],
                    n_runs=r["n_runs"],
                    passed=result.get("passed") if result else None,
                )
            )
        return out

    @_locked
    def unfinished_jobs(self) -> list[JobSummary]:
        """Jobs still open (interrupted or in progress), newest first: offer to resume them."""
        return self.list_jobs(status="open")

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
            res = json.loads(r["result"])
            points.append(
                TrendPoint(
                    job_id=r["id"],
                    date=r["started_at"],
                    initial_amp_g=list(res.get("initial", [])),
                    final_amp_g=list(res.get("final", [])),
                    residual_unbalance_gmm=list(res.get("residual_unbalance_gmm", [])),
                    permissible_unbalance_gmm=list(res.get("permissible_unbalance_gmm", [])),
                    passed=res.get("passed"),
                    speed_rpm=res.get("speed_rpm"),
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
        return [
            RunRecord(
                job_id=r["job_id"],
                seq=r["seq"],
                kind=r["kind"],
                taken_at=r["taken_at"],
                reading=RunReading.from_dict(json.loads(r["reading"])),
                weights=tuple(Weight.from_dict(w) for w in json.loads(r["weights"])),
                note=r["note"],
                id=r["id"],
            )
            for r in rows
        ]

    @_locked
    def add_event(self, job_id: int, kind: str, data: dict[str, Any] | None = None) -> int:
        """Record a workflow decision (committed before returning)."""
        cur = self._write(
            "INSERT INTO events (job_id, kind, at, data) VALUES (?, ?, ?, ?)",
            (job_id, kind, now_iso(), json.dumps(data or {})),
        )
        return int(cur.lastrowid or 0)

    @_locked
    def events(self, job_id: int) -> list[Event]:
        rows = self._db.execute("SELECT * FROM events WHERE job_id=? ORDER BY id", (job_id,)).fetchall()
        return [Event(r["kind"], json.loads(r["data"]), r["at"], r["id"]) for r in rows]
