"""``runtrue demo``: the application on the built-in simulator, or a whole job headless.

``runtrue demo [--scenario NAME] [--seed N]`` opens the terminal application on the simulator.
``runtrue demo --auto --json [--scenario NAME] [--seed N]`` runs a whole balancing job with no
interaction and prints ONE JSON object (a contract other tools rely on; keys are only added):
``runs``, ``initial`` and ``final`` (1x amplitude per channel, g), ``grade``,
``permissible_unbalance_gmm`` and ``residual_unbalance_gmm`` (per correction plane; the residual
as the engine estimates it), ``true_residual_unbalance_gmm`` (per plane, what the simulator
knows is left) and ``passed``; also ``method`` (``"influence-coefficient"`` or ``"four-run"``).
``--no-phase`` runs the amplitude-only four-run method instead (one-plane scenarios): the job is
fed amplitudes only, though the simulator has a reference sensor.
"""

from __future__ import annotations

import argparse
import json
from typing import Any

from runtrue import validation as v
from runtrue.cli import checked

DEFAULT_SCENARIO = "fan"
MAX_DEMO_RUNS = 20
#: Revolutions per reading in a headless demo: with MAX_DEMO_RUNS, at most 20,000 simulated
#: revolutions, about 20 s at worst on a 2-core machine (the roller, two channels).
MAX_DEMO_REVS = 1_000


def _demo_revs(text: str) -> int:
    return v.whole(text, "--revs", 2, MAX_DEMO_REVS)


def _max_runs(text: str) -> int:
    return v.whole(text, "--max-runs", 2, MAX_DEMO_RUNS)


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "demo",
        help="the application on the built-in simulator (--auto: a whole job, headless)",
        description="Balance a virtual machine. Without --auto the terminal application opens on the "
        "simulator; with --auto a whole job (reference, trial, correction, trims) runs headless. "
        f"Limits: --seed 0-{v.MAX_SEED}, --revs 2-{MAX_DEMO_REVS}, --max-runs 2-{MAX_DEMO_RUNS}, "
        f"--resume a job number 1-{v.MAX_JOB_ID}.",
    )
    p.add_argument("--scenario", default=DEFAULT_SCENARIO, metavar="NAME",
                   help=f"simulator scenario (default {DEFAULT_SCENARIO}; `runtrue scenarios` lists them), or a "
                   "scenario file PATH.toml / PATH.json")
    p.add_argument("--seed", type=checked(v.seed), default=None, metavar="N", help="random seed: the same seed gives the same job")
    p.add_argument("--auto", action="store_true", help="run a whole job with no interaction")
    p.add_argument("--plain", action="store_true", default=None,
                   help="draw plots and the fitting dial with plain characters, for terminals without braille "
                   "(automatic on the Linux console, TERM=linux; or set RUNTRUE_PLAIN=1)")
    p.add_argument("--json", action="store_true", help="with --auto: print one JSON object")
    p.add_argument("--revs", type=checked(_demo_revs), default=None, metavar="N",
                   help="with --auto: revolutions averaged per reading (default 40)")
    p.add_argument("--max-runs", type=checked(_max_runs), default=None, metavar="N",
                   help="with --auto: stop after this many runs (default 12)")
    p.add_argument("--no-phase", action="store_true",
                   help="with --auto: balance by amplitudes only (the four-run method; one-plane scenarios)")
    p.add_argument("--db", default=None, metavar="FILE",
                   help="with --auto: record the job in this job database (default: kept in memory only)")
    p.add_argument("--resume", type=checked(v.job_id), default=None, metavar="JOB",
                   help="with --auto and --db: carry on with an unfinished job of that database")


def _check_args(args: argparse.Namespace) -> None:
    from runtrue.cli import UsageError
    from runtrue.transport import scenario_names

    names = scenario_names()
    if args.scenario not in names:
        from runtrue.sim.scenario_file import ScenarioFileError, load_scenario_file, looks_like_file

        if not looks_like_file(args.scenario):
            raise UsageError(f"unknown scenario {args.scenario!r}; choose one of: {', '.join(names) or 'none installed'}, "
                             "or give a scenario file (PATH.toml or PATH.json)")
        try:
            load_scenario_file(args.scenario)
        except ScenarioFileError as exc:
            raise UsageError(str(exc)) from None
    if not args.auto and (args.json or args.revs or args.max_runs or args.db or args.resume or args.no_phase):
        raise UsageError("--json, --revs, --max-runs, --no-phase, --db and --resume go with --auto")
    if args.no_phase:
        from runtrue.sim.scenarios import SCENARIOS, get_scenario

        n_planes = len(get_scenario(args.scenario).planes)
        if n_planes != 1:
            one = ", ".join(n for n, sc in sorted(SCENARIOS.items()) if len(sc.planes) == 1)
            raise UsageError(
                f"--no-phase balances one plane, but scenario {args.scenario!r} has {n_planes}: choose one of {one}"
            )
    if args.resume is not None and args.db is None:
        raise UsageError("--resume needs --db FILE (the database holding the job)")


def run(args: argparse.Namespace) -> int:
    _check_args(args)
    if not args.auto:
        from runtrue.cli.app import check_job_database
        from runtrue.tui import make_app  # the Textual application, only when asked for

        check_job_database()

        app = make_app(port="sim:" + args.scenario, seed=args.seed, plain=args.plain)
        app.run()
        return 2 if getattr(app, "failure", "") or getattr(app, "return_code", 0) else 0
    return _run_auto(args)


def _run_auto(args: argparse.Namespace) -> int:
    from runtrue.cli import UsageError
    from runtrue.cli.jobs import open_store
    from runtrue.device import MeterError
    from runtrue.jobs.headless import DEFAULT_REVS, MAX_RUNS, MAX_RUNS_AMPLITUDE_ONLY, run_demo
    from runtrue.jobs.store import RecordError

    store = open_store(args.db, create=args.resume is None) if args.db else None
    try:
        if args.resume is not None:
            assert store is not None
            rec = store.get_job(args.resume)
            if rec is None:
                raise UsageError(f"there is no job {args.resume} in {args.db}")
            if rec.status != "open":
                raise UsageError(f"job {args.resume} is already finished ({rec.status}); nothing to resume")
        on_run = None if args.json else _print_progress
        outcome = run_demo(
            args.scenario,
            args.seed,
            store=store,
            resume_job_id=args.resume,
            revs=args.revs or DEFAULT_REVS,
            max_runs=args.max_runs or (MAX_RUNS_AMPLITUDE_ONLY if args.no_phase else MAX_RUNS),
            on_run=on_run,
            amplitude_only=args.no_phase,
        )
        data = outcome.to_json()
    except RecordError as exc:
        raise UsageError(f"{exc}; this job cannot be resumed, start a new one") from None
    except MeterError as exc:
        where = f" (the job so far is kept in {args.db}; --resume carries on)" if args.db else ""
        raise UsageError(f"the simulated meter could not give a reading: {exc}{where}") from None
    finally:
        if store is not None:
            store.close()
    if args.json:
        print(json.dumps(data))
    else:
        _print_summary(data)
    return 0


def _print_progress(job: Any) -> None:
    run = job.runs[-1]
    if run.reading.has_phase:
        amps = ", ".join(f"{c.amp_g:.4f} g @ {c.phase_deg:.0f}°" for c in run.reading.channels)
    else:
        amps = ", ".join(f"{c.amp_g:.4f} g (amplitude only)" for c in run.reading.channels)
    print(f"run {run.seq} ({run.kind}): {amps}", flush=True)


def _print_summary(d: dict[str, Any]) -> None:
    print(f"scenario {d['scenario']}: {d['runs']} runs, method {d['method']}, grade {d['grade']} ({d['standard']})")
    for i, (a, b) in enumerate(zip(d["initial"], d["final"]), start=1):
        print(f"  pickup {i}: 1x {a:.4f} g -> {b:.4f} g")
    for i, (r, t, p) in enumerate(
        zip(d["residual_unbalance_gmm"] or [], d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]), start=1
    ):
        print(f"  plane {i}: residual {r:.1f} g.mm estimated, {t:.1f} g.mm true, {p:.1f} g.mm permissible")
    print("PASSED" if d["passed"] else f"NOT PASSED {d['stopped_reason']}".rstrip())
