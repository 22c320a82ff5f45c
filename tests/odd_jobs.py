"""A job database holding the stopped, empty and odd records a user's database can end up with:
a job stopped before any reading, an absurd trial mass saved by an older version, records with a
missing field or bad JSON.  Used by the command and application tests."""

from __future__ import annotations

import json
from pathlib import Path

from runtrue.jobs.demo_machine import machine_for_scenario
from runtrue.jobs.job import BalanceJob
from runtrue.jobs.model import RunReading
from runtrue.jobs.store import JobStore


def make_odd_database(path: str | Path) -> dict[str, int]:
    """Fill ``path`` with odd records; returns the ids of each kind of job."""
    ids: dict[str, int] = {}
    with JobStore(path) as store:
        machine = machine_for_scenario("fan")
        store.save_machine(machine)
        # stopped before any reading
        job = BalanceJob.start(store, machine)
        job.stop("stopped before any reading")
        ids["stopped_empty"] = job.job_id
        # open with no runs at all
        ids["open_empty"] = BalanceJob.start(store, machine).job_id
        # an absurd trial mass saved by a version that did not check it
        job = BalanceJob.start(store, machine)
        job.record_run(RunReading.manual([0.41], [207.0], 1470.0, [0.002]))
        ids["huge_trial"] = job.job_id
        db = store._db
        db.execute("INSERT INTO events (job_id, kind, at, data) VALUES (?, 'trial_set', '2026-01-01T00:00:00Z', ?)",
                   (job.job_id, json.dumps({"plane": 1, "mass_g": 1e9, "angle_deg": 0, "radius_mm": 160, "n_runs": 1})))
        # a job whose stored machine lacks a field
        m = machine.to_dict()
        del m["speed_rpm"]
        cur = db.execute("INSERT INTO jobs (machine_id, machine, options, status, started_at) "
                         "VALUES (?, ?, '{}', 'open', '2026-01-02T00:00:00Z')", (machine.id, json.dumps(m)))
        ids["missing_field"] = int(cur.lastrowid)
        # a finished job whose result is not JSON
        cur = db.execute("INSERT INTO jobs (machine_id, machine, options, status, started_at, result) "
                         "VALUES (?, ?, '{}', 'passed', '2026-01-03T00:00:00Z', '{not json')",
                         (machine.id, json.dumps(machine.to_dict())))
        ids["bad_result"] = int(cur.lastrowid)
        # a machine row that is not a machine
        cur = db.execute("INSERT INTO machines (name, data, created_at, updated_at) "
                         "VALUES ('Broken record', '[1, 2]', '2026-01-01T00:00:00Z', '2026-01-01T00:00:00Z')")
        ids["bad_machine"] = int(cur.lastrowid)
    return ids
