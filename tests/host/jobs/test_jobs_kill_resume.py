"""A headless job killed with SIGKILL at random moments loses no taken reading and resumes.

A child process runs simulator jobs back to back (``jobs_kill_child.py``), printing each run only
after it is recorded.  It is killed at random times, several times over; after every kill the
database must be intact, hold every printed run exactly, and every unfinished job must resume.
Finally a child resumes all unfinished jobs and each must end within its grade.
"""

from __future__ import annotations

import json
import os
import random
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from runtrue.jobs import BalanceJob, JobStore, RunReading

CHILD = Path(__file__).with_name("jobs_kill_child.py")
KILLS = 8


def start_child(db: Path, *extra: str) -> subprocess.Popen[str]:
    return subprocess.Popen([sys.executable, str(CHILD), str(db), *extra], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def wait_for_first_run(proc: subprocess.Popen[str], timeout_s: float = 60.0) -> str:
    """Block until the child has printed its first recorded run (so it is past start-up)."""
    assert proc.stdout is not None
    deadline = time.monotonic() + timeout_s
    line = proc.stdout.readline()
    assert line, f"child printed nothing: {proc.stderr.read() if proc.stderr else ''}"
    assert time.monotonic() < deadline
    return line


def check_store(db: Path, printed: list[dict]) -> int:
    """Invariants after a kill; returns the number of runs stored."""
    raw = sqlite3.connect(db)
    assert raw.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    raw.close()
    with JobStore(db) as store:
        total = 0
        for summary in store.list_jobs():
            runs = store.runs(summary.id)
            assert [r.seq for r in runs] == list(range(1, len(runs) + 1)), "no gaps, no torn rows"
            total += len(runs)
            if summary.status == "open":
                job = BalanceJob.resume(store, summary.id)
                assert len(job.runs) == len(runs)
        for p in printed:
            runs = {r.seq: r for r in store.runs(p["job"])}
            assert p["seq"] in runs, f"job {p['job']} run {p['seq']} was taken but is lost"
            assert runs[p["seq"]].reading == RunReading.from_dict(p["reading"])
        return total


@pytest.mark.slow
def test_killed_jobs_keep_every_taken_reading_and_resume(tmp_path: Path) -> None:
    db = tmp_path / "jobs.sqlite"
    rng = random.Random(20261201)
    printed: list[dict] = []
    stored_before = 0
    cut_off = 0
    for _ in range(KILLS):
        proc = start_child(db)
        lines = [wait_for_first_run(proc)]
        time.sleep(rng.uniform(0.0, 0.6))
        os.kill(proc.pid, signal.SIGKILL)
        out, _err = proc.communicate(timeout=30)
        assert proc.returncode == -signal.SIGKILL
        lines += out.splitlines()
        printed += [json.loads(x) for x in lines if x.strip()]
        stored = check_store(db, printed)
        assert stored > stored_before, "the child made progress between kills"
        stored_before = stored
        with JobStore(db) as store:
            cut_off += bool(store.unfinished_jobs())
    # A job is open for most of a child's life, so some kills must have cut one off mid-job.
    assert cut_off >= 1
    # Resume everything that was cut off and finish it.
    proc = start_child(db, "--finish")
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err
    printed += [json.loads(x) for x in out.splitlines() if x.strip()]
    check_store(db, printed)
    with JobStore(db) as store:
        jobs = store.list_jobs()
        # how many jobs the children got to start depends on the machine's speed (a child first
        # resumes what the last one left open); the invariants are the runs and the endings
        assert jobs
        assert store.unfinished_jobs() == []
        for j in jobs:
            assert j.status == "passed", f"job {j.id} ended {j.status}"
            kinds = [r.kind for r in store.runs(j.id)]
            assert kinds[0] == "reference" and kinds[-1] in ("correction", "trim")
