"""Child process for the kill test: headless simulator jobs, one after another, as fast as it can.

``python jobs_kill_child.py DB [--finish]``: first resumes every unfinished job in DB, then (unless
``--finish``) starts new ones forever.  After each run is recorded it prints one JSON line
``{"job", "seq", "reading"}`` — printed only once ``record_run`` has returned, so every printed run
must survive a SIGKILL.
"""

from __future__ import annotations

import itertools
import json
import sys

from runtrue.jobs import BalanceJob, JobStore
from runtrue.jobs.headless import run_demo

SCENARIOS = ("fan", "roller", "sander")


def report(job: BalanceJob) -> None:
    run = job.runs[-1]
    print(json.dumps({"job": job.job_id, "seq": run.seq, "reading": run.reading.to_dict()}), flush=True)


def scenario_of(store: JobStore, job_id: int) -> str:
    rec = store.get_job(job_id)
    assert rec is not None
    return rec.machine.name.removeprefix("demo: ")


def main() -> None:
    db = sys.argv[1]
    finish_only = "--finish" in sys.argv
    store = JobStore(db)
    for summary in store.unfinished_jobs():
        run_demo(scenario_of(store, summary.id), summary.id, store=store, resume_job_id=summary.id,
                 revs=20, on_run=report)
    if finish_only:
        return
    for k in itertools.count():
        run_demo(SCENARIOS[k % len(SCENARIOS)], 100 + k, store=store, revs=20, on_run=report)


if __name__ == "__main__":
    main()
