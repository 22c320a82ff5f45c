"""Child process for the kill test: headless simulator jobs, one after another, as fast as it can.

``python jobs_kill_child.py DB [--finish]``: first resumes every unfinished job in DB, then (unless
``--finish``) starts new ones forever.  After each run is recorded it prints one JSON line
``{"job", "seq", "reading"}`` — printed only once ``record_run`` has returned, so every printed run
must survive a SIGKILL.
"""

from __future__ import annotations

import itertools
import json
import os
import sys
from pathlib import Path

from runtrue import plugins
from runtrue.jobs import BalanceJob, JobStore
from runtrue.jobs.headless import run_demo

plugins.load()  # the sim:NAME ports

SCENARIOS = ("fan", "roller", "sander")


def report(job: BalanceJob) -> None:
    run = job.runs[-1]
    print(json.dumps({"job": job.job_id, "seq": run.seq, "reading": run.reading.to_dict()}), flush=True)


def seeds_file(db: str) -> Path:
    """Job id -> the simulator seed it was started with, so a resumed job meets the same rotor."""
    return Path(db + ".seeds.json")


def load_seeds(db: str) -> dict[str, int]:
    try:
        return json.loads(seeds_file(db).read_text())
    except (OSError, ValueError):
        return {}


def remember_seed(db: str, job_id: int, seed: int) -> None:
    seeds = load_seeds(db)
    if str(job_id) in seeds:
        return
    seeds[str(job_id)] = seed
    tmp = seeds_file(db).with_suffix(".tmp")
    tmp.write_text(json.dumps(seeds))
    os.replace(tmp, seeds_file(db))  # atomic: a kill leaves the old file or the new one


def scenario_of(store: JobStore, job_id: int) -> str:
    rec = store.get_job(job_id)
    assert rec is not None
    return rec.machine.name.removeprefix("demo: ")


def main() -> None:
    db = sys.argv[1]
    finish_only = "--finish" in sys.argv
    store = JobStore(db)
    seeds = load_seeds(db)
    for summary in store.unfinished_jobs():
        # the same virtual rotor as before the kill (a job with no run yet may start on any)
        seed = seeds.get(str(summary.id), summary.id)
        run_demo(scenario_of(store, summary.id), seed, store=store, resume_job_id=summary.id,
                 revs=20, on_run=report)
    if finish_only:
        return
    for k in itertools.count():
        seed = 100 + k

        def on_run(job: BalanceJob, seed: int = seed) -> None:
            remember_seed(db, job.job_id, seed)
            report(job)

        run_demo(SCENARIOS[k % len(SCENARIOS)], seed, store=store, revs=20, on_run=on_run)


if __name__ == "__main__":
    main()
