"""The job database's schema and its upgrades, one version at a time.

SQLite keeps the format number of a file in ``PRAGMA user_version``.  :data:`MIGRATIONS` lists
every step from one format to the next, in order; opening a file runs the steps it lacks, each
in one transaction that also stamps the new number, so a step that fails (or a process that dies
halfway) leaves the file as it was, at the format before.  A file stamped with a higher number
than :data:`SCHEMA_VERSION` was written by a newer runtrue and is refused, untouched.

Formats:

* 0 -- no stamp: a new, empty file; or the tables of format 1 written before the stamp was (the
  first stores created the tables and stamped the file in two steps).
* 1 -- machines, jobs, runs and events (workflow decisions), each record a JSON column.
* 2 -- a ``schema_history`` table: which format each upgrade reached, when, and by which runtrue
  (what support needs to know about a user's file); and an index of jobs by status for the
  list of unfinished jobs offered at every start.

Nothing is ever removed from a stored row by an upgrade: a file keeps every record it had.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable
from dataclasses import dataclass
from datetime import datetime, timezone

from runtrue import __version__
from runtrue.jobs.store_rows import StoreError

#: The tables of format 1, as the format-1 store created them (``IF NOT EXISTS``: a file of
#: format 0 may already have them).
SCHEMA_1 = """
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

SCHEMA_2 = """
CREATE TABLE schema_history (
    version     INTEGER PRIMARY KEY,
    applied_at  TEXT NOT NULL,
    runtrue     TEXT NOT NULL,
    what        TEXT NOT NULL
);
CREATE INDEX jobs_by_status ON jobs(status, id);
"""


@dataclass(frozen=True)
class Migration:
    """One step: from format ``version - 1`` to ``version``; ``what`` says what it does."""

    version: int
    what: str
    apply: Callable[[sqlite3.Connection], None]


def run_script(script: str) -> Callable[[sqlite3.Connection], None]:
    """A step that runs the statements of ``script`` one by one (``executescript`` would commit
    the step's transaction before it starts)."""

    def apply(db: sqlite3.Connection) -> None:
        for statement in statements(script):
            db.execute(statement)

    return apply


def statements(script: str) -> list[str]:
    """The SQL statements of ``script``, each whole."""
    out: list[str] = []
    pending = ""
    for line in script.splitlines(keepends=True):
        pending += line
        if sqlite3.complete_statement(pending):
            out.append(pending.strip())
            pending = ""
    if pending.strip():
        raise ValueError(f"an SQL statement is not complete: {pending.strip()[:60]!r}")
    return out


MIGRATIONS: tuple[Migration, ...] = (
    Migration(1, "machines, jobs, runs and job decisions", run_script(SCHEMA_1)),
    Migration(2, "schema history; jobs indexed by status", run_script(SCHEMA_2)),
)

#: The format this runtrue writes: the last step's.
SCHEMA_VERSION = MIGRATIONS[-1].version


def _now_iso() -> str:
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def file_version(db: sqlite3.Connection) -> int:
    """The format number stamped on the open file (0: none)."""
    return int(db.execute("PRAGMA user_version").fetchone()[0])


def refuse_newer(db: sqlite3.Connection, where: str) -> None:
    """:class:`StoreError` when the file was written by a newer runtrue."""
    version = file_version(db)
    if version > SCHEMA_VERSION:
        raise StoreError(
            f"the job database {where} was written by a newer runtrue (format {version}, this one "
            f"reads {SCHEMA_VERSION}); update runtrue, or use another file"
        )


def upgrade(db: sqlite3.Connection, where: str, migrations: tuple[Migration, ...] = MIGRATIONS) -> int:
    """Bring the file open on ``db`` (autocommit mode) to the last format of ``migrations``.

    Each step runs in its own ``BEGIN IMMEDIATE`` transaction, which re-reads the stamp first
    (another process may have upgraded the file meanwhile), records itself (and the steps of this
    upgrade that ran before there was one) in ``schema_history`` once that table exists, stamps
    its number and commits.  Returns the format the file had.
    Raises :class:`StoreError` for a file from a newer runtrue or a step that failed (the file
    is then left at the format before that step).
    """
    refuse_newer(db, where)
    start = file_version(db)
    unrecorded: list[tuple[int, str, str]] = []  # steps run before there was a history to record them in
    for step in migrations:
        if step.version <= start:
            continue
        db.execute("BEGIN IMMEDIATE")
        try:
            now = file_version(db)
            if now < step.version:
                if now != step.version - 1:
                    raise StoreError(f"the job database {where} is at format {now}, which no step upgrades")
                step.apply(db)
                unrecorded.append((step.version, _now_iso(), step.what))
                if _has_history(db):
                    db.executemany("INSERT OR REPLACE INTO schema_history (version, applied_at, runtrue, what) "
                                   "VALUES (?, ?, ?, ?)", [(v, at, __version__, what) for v, at, what in unrecorded])
                db.execute(f"PRAGMA user_version={int(step.version)}")
        except BaseException as exc:
            db.execute("ROLLBACK")
            if isinstance(exc, (StoreError, sqlite3.DatabaseError)) or not isinstance(exc, Exception):
                raise
            raise StoreError(
                f"the job database {where} could not be upgraded to format {step.version} ({exc}); "
                f"it is unchanged, at format {file_version(db)}"
            ) from exc
        db.execute("COMMIT")
        if _has_history(db):
            unrecorded.clear()
    refuse_newer(db, where)
    return start


def _has_history(db: sqlite3.Connection) -> bool:
    row = db.execute("SELECT 1 FROM sqlite_master WHERE type='table' AND name='schema_history'").fetchone()
    return row is not None
