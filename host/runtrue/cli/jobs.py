"""``runtrue jobs``: the recorded balancing jobs: list, show, report (HTML), export (CSV/JSON).

    runtrue jobs list [--machine NAME] [--open]
    runtrue jobs show JOB
    runtrue jobs report JOB [-o FILE]          (default: runtrue-job-JOB.html here)
    runtrue jobs export JOB [--format csv|json] [-o FILE]   (default: standard output)

``--db FILE`` picks a job database other than the default (``$RUNTRUE_DATA_DIR`` or the user's
data directory).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from runtrue import validation as v
from runtrue.cli import UsageError, checked


def register(subparsers: Any) -> None:
    p = subparsers.add_parser("jobs", help="recorded balancing jobs: list, show, report, export",
                              description="The balancing jobs recorded in the job database. "
                              f"JOB is a job number, 1-{v.MAX_JOB_ID}. A record the program cannot "
                              "read is listed as unreadable, with the reason, and skipped.")
    p.add_argument("--db", default=None, metavar="FILE", help="job database (default: the user's data directory)")
    sub = p.add_subparsers(dest="jobs_command", metavar="ACTION")
    ls = sub.add_parser("list", help="jobs, newest first")
    ls.add_argument("--machine", default=None, metavar="NAME", help="only this machine's jobs")
    ls.add_argument("--open", action="store_true", help="only unfinished jobs (to resume)")
    sh = sub.add_parser("show", help="one job: machine, runs and result")
    sh.add_argument("job", type=checked(v.job_id), metavar="JOB")
    rp = sub.add_parser("report", help="write the HTML report of a job")
    rp.add_argument("job", type=checked(v.job_id), metavar="JOB")
    rp.add_argument("-o", "--output", default=None, metavar="FILE", help="where to write it (- for standard output)")
    ex = sub.add_parser("export", help="export a job's runs as CSV or JSON")
    ex.add_argument("job", type=checked(v.job_id), metavar="JOB")
    ex.add_argument("--format", choices=("csv", "json"), default="csv")
    ex.add_argument("-o", "--output", default=None, metavar="FILE", help="where to write it (default standard output)")


def open_store(path: str | None, *, create: bool = False) -> Any:
    """The job store at ``path`` (default: the user's), or UsageError saying why it cannot be used."""
    from runtrue.jobs.store import JobStore, StoreError

    if path is not None:
        p = Path(path)
        if p.is_dir():
            raise UsageError(f"{path} is a folder; give the job database file (e.g. {p / 'runtrue.sqlite'})")
        if not create and not p.exists():
            raise UsageError(f"no job database at {path}; check the path")
    try:
        return JobStore(path)
    except StoreError as exc:
        raise UsageError(str(exc)) from None


def _open_store(args: argparse.Namespace) -> Any:
    return open_store(args.db)


def _job_or_fail(store: Any, job_id: int) -> Any:
    from runtrue.jobs.store import RecordError

    try:
        rec = store.get_job(job_id)
    except RecordError as exc:
        raise UsageError(f"{exc}; the other jobs are unaffected (`runtrue jobs list`)") from None
    if rec is None:
        raise UsageError(f"there is no job {job_id}; `runtrue jobs list` shows the jobs")
    return rec


def _write(text: str, output: str | None) -> None:
    if output is None or output == "-":
        sys.stdout.write(text)
        return
    try:
        Path(output).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise UsageError(f"cannot write {output}: {exc.strerror or exc}") from None
    print(output)


def run(args: argparse.Namespace) -> int:
    if args.jobs_command is None:
        raise UsageError("say what to do: list, show JOB, report JOB or export JOB")
    from runtrue.jobs.store import RecordError

    store = _open_store(args)
    try:
        return _run(store, args)
    except RecordError as exc:
        raise UsageError(f"{exc}; the other jobs are unaffected (`runtrue jobs list`)") from None
    finally:
        store.close()


def _run(store: Any, args: argparse.Namespace) -> int:
    if args.jobs_command == "list":
        return _list(store, args)
    rec = _job_or_fail(store, args.job)
    if args.jobs_command == "show":
        return _show(store, rec)
    if args.jobs_command == "report":
        from runtrue.jobs.report import render_html

        out = args.output or f"runtrue-job-{rec.id}.html"
        _write(render_html(store, rec.id), out)
        return 0
    if args.jobs_command == "export":
        from runtrue.jobs.export import job_json, runs_csv

        text = runs_csv(store, rec.id) if args.format == "csv" else json.dumps(job_json(store, rec.id), indent=1) + "\n"
        _write(text, args.output)
        return 0
    return 0


def _list(store: Any, args: argparse.Namespace) -> int:
    machine_id = None
    if args.machine is not None:
        m = store.get_machine(args.machine)
        if m is None:
            names = ", ".join(x.name for x in store.list_machines()) or "none saved"
            raise UsageError(f"no machine named {args.machine!r} (saved: {names})")
        machine_id = m.id
    jobs = store.list_jobs(machine_id=machine_id, status="open" if args.open else None)
    if not jobs:
        print("no jobs recorded" if not args.open else "no unfinished jobs")
        return 0
    print(f"{'job':>5}  {'started':20}  {'status':8}  {'runs':>4}  machine")
    for j in jobs:
        problem = j.problem or (store.job_problem(j.id) if j.status == "open" else "")
        print(f"{j.id:>5}  {j.started_at[:20]:20}  {j.status:8}  {j.n_runs:>4}  {problem or j.machine_name}")
    if machine_id is not None:
        trend = store.trend(machine_id)
        if trend:
            from runtrue.readings.numbers import DEFAULT_VIB_UNIT, ratio_text, vib_number

            print(f"trend (finished jobs, oldest first): 1x before -> after ({DEFAULT_VIB_UNIT} at the machine's "
                  "running speed, worst pickup), residual / permissible unbalance (worst plane)")
            for t in trend:
                before = max(t.initial_amp_g, default=0.0)
                after = max((a for a in t.final_amp_g if a is not None), default=0.0)
                ratio = max((r / p for r, p in zip(t.residual_unbalance_gmm or [], t.permissible_unbalance_gmm or []) if p),
                            default=float("nan"))
                print(f"{t.job_id:>5}  {t.date[:10]}  {vib_number(before, m.speed_rpm)} -> "
                      f"{vib_number(after, m.speed_rpm)} {DEFAULT_VIB_UNIT}  residual {ratio_text(ratio)} of permissible"
                      f"  {'passed' if t.passed else 'not passed'}")
    return 0


def _show(store: Any, rec: Any) -> int:
    from runtrue.jobs.export import weights_text

    m = rec.machine
    print(f"job {rec.id}: {m.name}, {rec.status}, started {rec.started_at}"
          + (f", finished {rec.finished_at}" if rec.finished_at else ""))
    print(f"machine: {m.rotor_mass_kg:g} kg, {m.speed_rpm:g} rpm, {m.rotation} seen from the drive end, grade {m.grade}")
    for i, p in enumerate(m.planes, start=1):
        print(f"  plane {i}: {p.describe()}")
    from runtrue.readings.numbers import DEFAULT_VIB_UNIT, phase_text, unbalance_text, vib_text

    print(f"runs (1x in {DEFAULT_VIB_UNIT} at the run's speed, phase lag after the mark; "
          "weights from the mark against rotation):")
    for run in store.runs(rec.id):
        amps = "  ".join(f"{vib_text(c.amp_g, run.reading.speed_rpm)} {phase_text(c.phase_deg)}"
                         for c in run.reading.channels)
        ws = weights_text(run.weights) or "no weights"
        print(f"  {run.seq:>2} {run.kind:10} {run.reading.speed_rpm:7.0f} rpm  {amps}  [{ws}]")
    res = rec.result
    if res:
        def gmm(values: Any) -> str:
            try:
                return " + ".join(unbalance_text(float(u)) for u in values) or "-"
            except (TypeError, ValueError):
                return "-"

        passed = {True: "passed", False: "not passed"}.get(res.get("passed"), "not checked")
        print(f"result: {passed}, residual {gmm(res.get('residual_unbalance_gmm') or [])}, "
              f"permissible {gmm(res.get('permissible_unbalance_gmm') or [])} "
              f"({res.get('standard', '')} {res.get('grade', '')})")
    return 0
