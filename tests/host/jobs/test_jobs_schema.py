"""Upgrading a technician's job database: a file written by every earlier format opens with
today's store and gives back every machine, job, run and decision it held; an upgrade that
fails or is cut off leaves the file exactly as it was; a file from a newer runtrue is refused
untouched."""

from __future__ import annotations

import importlib.util
import json
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path
from typing import Any

import pytest

from runtrue.jobs import schema
from runtrue.jobs.schema import MIGRATIONS, SCHEMA_VERSION, Migration
from runtrue.jobs.store import JobStore, StoreError

FIXTURES = Path(__file__).resolve().parents[2] / "fixtures"
V1_SQL = (FIXTURES / "store_v1.sql").read_text(encoding="utf-8")
V1_READS = json.loads((FIXTURES / "store_v1_reads.json").read_text(encoding="utf-8"))


def _fixture_maker() -> Any:
    spec = importlib.util.spec_from_file_location("make_store_fixtures", FIXTURES / "make_store_fixtures.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def format_1_file(path: Path) -> Path:
    """A file as the format-1 store left it: its tables and rows, WAL, stamped 1."""
    with sqlite3.connect(path) as db:
        db.execute("PRAGMA journal_mode=WAL")
        db.executescript(V1_SQL)
        db.execute("PRAGMA user_version=1")
    return path


def format_0_file(path: Path) -> Path:
    """A file of format 0: the same tables and rows with no stamp (the first stores created the
    tables and stamped the file in two steps; a file can hold the first without the second)."""
    with sqlite3.connect(path) as db:
        db.executescript(V1_SQL)
        assert db.execute("PRAGMA user_version").fetchone()[0] == 0
    return path


def snapshot(path: Path) -> tuple[int, str]:
    """The format stamp and every table, index and row of the file, as SQL."""
    with sqlite3.connect(path) as db:
        return db.execute("PRAGMA user_version").fetchone()[0], "\n".join(db.iterdump())


def as_json(value: Any) -> Any:
    return json.loads(json.dumps(value, sort_keys=True))


@pytest.mark.parametrize("make, upgrades", [(format_0_file, [1, 2]), (format_1_file, [2])], ids=["format 0", "format 1"])
def test_every_earlier_format_opens_and_reads_back_every_record_the_same(tmp_path: Path, make: Any,
                                                                         upgrades: list[int]) -> None:
    db = make(tmp_path / "runtrue.sqlite")
    reads = _fixture_maker().reads(db)  # through today's JobStore, which upgrades the file first
    assert as_json(reads) == V1_READS
    assert reads["machines"] and reads["jobs"] and any(j.get("runs") for j in reads["jobs"])
    assert any(j.get("events") for j in reads["jobs"])
    with JobStore(db) as store:
        assert [h["version"] for h in store.schema_history()] == upgrades
        assert all(h["runtrue"] and h["applied_at"].endswith("Z") for h in store.schema_history())
    assert snapshot(db)[0] == SCHEMA_VERSION == 2


def test_an_upgraded_file_keeps_working_and_is_not_upgraded_twice(tmp_path: Path) -> None:
    db = format_1_file(tmp_path / "runtrue.sqlite")
    with JobStore(db) as store:
        history = store.schema_history()
        machine = store.list_machines()[0]
        job_id = store.new_job(machine)
        store.finish_job(job_id, "stopped", None)
    with JobStore(db) as store:
        assert store.schema_history() == history
        assert store.list_jobs(status="stopped")[0].id == job_id
        assert [j.id for j in store.unfinished_jobs()] == [j["id"] for j in V1_READS["unfinished"]]


def test_a_new_file_is_created_at_the_current_format(tmp_path: Path) -> None:
    with JobStore(tmp_path / "new.sqlite") as store:
        assert [h["version"] for h in store.schema_history()] == [1, 2]
        assert store.list_jobs() == [] and store.list_machines() == []
    assert snapshot(tmp_path / "new.sqlite")[0] == SCHEMA_VERSION


def test_an_upgrade_that_fails_halfway_leaves_the_file_as_it_was(tmp_path: Path,
                                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    db = format_1_file(tmp_path / "runtrue.sqlite")
    before = snapshot(db)

    def half_then_fail(con: sqlite3.Connection) -> None:
        MIGRATIONS[1].apply(con)  # the real step 2, then a failure before it is done
        con.execute("DELETE FROM runs")
        raise RuntimeError("disk full")

    monkeypatch.setattr(schema, "MIGRATIONS", (MIGRATIONS[0], Migration(2, "fails", half_then_fail)))
    with pytest.raises(StoreError, match=r"could not be upgraded to format 2 \(disk full\); it is unchanged, at format 1"):
        JobStore(db)
    assert snapshot(db) == before
    monkeypatch.undo()
    with JobStore(db) as store:  # the next start upgrades it
        assert [h["version"] for h in store.schema_history()] == [2]
        assert len(store.runs(6)) == 3


def test_a_process_killed_during_an_upgrade_leaves_the_file_as_it_was(tmp_path: Path) -> None:
    db = format_1_file(tmp_path / "runtrue.sqlite")
    before = snapshot(db)
    code = textwrap.dedent(f"""
        import os, sqlite3
        from runtrue.jobs import schema

        def killed(con):
            schema.MIGRATIONS[1].apply(con)
            con.execute("UPDATE machines SET updated_at = 'half done'")
            os._exit(9)  # the power goes: no rollback, no close

        con = sqlite3.connect({str(db)!r}, isolation_level=None)
        con.execute("PRAGMA journal_mode=WAL")
        schema.upgrade(con, "test", (schema.MIGRATIONS[0], schema.Migration(2, "killed", killed)))
    """)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert done.returncode == 9, done.stderr
    assert snapshot(db) == before


def test_a_file_from_a_newer_runtrue_is_refused_untouched(tmp_path: Path) -> None:
    db = format_1_file(tmp_path / "runtrue.sqlite")
    with sqlite3.connect(db) as con:
        con.execute(f"PRAGMA user_version={SCHEMA_VERSION + 1}")
    before = snapshot(db)
    with pytest.raises(StoreError, match=f"newer runtrue \\(format {SCHEMA_VERSION + 1}, this one reads 2\\)"):
        JobStore(db)
    assert snapshot(db) == before


def test_the_steps_go_one_format_at_a_time_from_1() -> None:
    assert [m.version for m in MIGRATIONS] == list(range(1, SCHEMA_VERSION + 1))
    assert all(m.what for m in MIGRATIONS)


def test_a_script_is_split_into_whole_statements() -> None:
    parts = schema.statements("CREATE TABLE a (x TEXT DEFAULT ';');\nCREATE INDEX i ON a(x);\n")
    assert parts == ["CREATE TABLE a (x TEXT DEFAULT ';');", "CREATE INDEX i ON a(x);"]
    with pytest.raises(ValueError, match="not complete"):
        schema.statements("CREATE TABLE b (x")


def test_the_list_of_unfinished_jobs_uses_the_status_index(tmp_path: Path) -> None:
    with JobStore(tmp_path / "runtrue.sqlite") as store:
        plan = store._db.execute("EXPLAIN QUERY PLAN SELECT id FROM jobs j WHERE j.status = ? ORDER BY j.id DESC",
                                 ("open",)).fetchall()
    assert any("jobs_by_status" in str(tuple(row)) for row in plan)
