"""Benchmark: how often reference + trial + one correction reaches the target grade.

Run: ``.venv/bin/python tests/bench/bench_balancing.py [--rotors N] [--seed S] [--part P]``
(``--part``: ``grade`` this table, ``amplitude`` the amplitude-only figures, ``jobs`` amplitude-only
demo jobs, ``solve`` the time of ``runtrue solve`` on 5,000 runs, ``all`` (default) every part).

Amplitude-only part (``--part amplitude``): random linear single-plane rotors (invented):
``|u|`` log-uniform 100-10,000 g*mm at any angle, ``|a|`` log-uniform e^-8..e^-4 per g*mm, trial
weight at 0/120/240 deg from a random start with 0.7-2 times ``|u|`` (log-uniform); each amplitude
multiplied by (1 + noise * N(0, 1)) for noise 2, 5, 10 %, the engine told that noise.  Prints the
relative error of the correction (median / 90th percentile) of the linear solution on V^2 and
of the maximum-likelihood fit the engine uses, the share the linear solution fails on, and the
coverage of the stated 95 % intervals (mass and angle) with a 3 % + 1 % floor reading error.

Jobs part (``--part jobs``): ``run_demo(scenario, seed, amplitude_only=True)`` on every
one-plane scenario, seeds 1..N (default 200): passes, false passes (declared passed with the
simulator's true residual above the permissible), runs taken.

Solve part (``--part solve``): ``runtrue solve`` (in process, JSON in and out) on 5,000 runs,
two planes, three pickups, every reading with a spread; prints the wall time.

Model that runs (printed at the top):
* the physics of the simulator's virtual machines (``runtrue.sim.machine.VirtualMachine``:
  rigid rotor on flexible damped supports, each demo scenario's geometry, rotation direction,
  pickups and front-end filter), noise-free 1x from ``expected_1x()``; if ``runtrue.sim`` is
  missing, a random linear model (complex influence matrix) instead;
* randomised per rotor: initial unbalance in every plane (size log-uniform from 3x to 30x the
  plane's ISO 21940-11 allowance, any angle), the trial angle, and the running speed of each run
  (+/- 0.3 % around nominal, so the response changes a little between runs);
* measurement error per reading: complex Gaussian with spread = 3 % of the amplitude (run-to-run
  repeatability, our assumption) combined with an absolute floor: background vibration of 1 %
  of the pickup's initial reading, and the pickup's noise averaged over 10 s at 5 kHz; the
  engine is given those spreads;
* trial weight from ``suggest_trial_weight``: A/B the 10 % rotor-weight force rule alone
  (common practice), C with the target grade's floor (5x allowance, our choice); in B and C a
  trial lost in the scatter (``check_trial_effect``) is repeated larger, up to twice (each step
  at most 5x); the correction is fitted exactly as computed (continuous radius; no rounding to
  holes or stock).  Each table also shows one further trim run (least squares over every run).
Target: the scenario's grade; pass if every plane's true residual unbalance is within its
allocation (``permissible_unbalance(grade, mass, speed, planes)``).
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import time
from pathlib import Path

import numpy as np

from runtrue.balancing import (
    BalancingError,
    Run,
    Weight,
    check_trial_effect,
    net_correction,
    permissible_unbalance,
    solve,
    suggest_trial_weight,
)

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from random_rotors import amplitude_only_rotor  # noqa: E402

REPEATABILITY = 0.03
SPEED_JITTER = 0.003
NOISE_AVERAGING_SAMPLES = 10 * 5000
#: One resize of a trial may multiply it by at most this (a safety cap of our own).
MAX_TRIAL_SCALE = 5.0
#: A trial run is repeated larger at most this many times in all.
MAX_TRIAL_ATTEMPTS = 3
#: Initial unbalance per plane, as a multiple of its allowance: log-uniform in this range.
INITIAL_MIN = 3.0
#: Background vibration (other machines, the floor) as a fraction of the initial reading: an
#: absolute floor on every reading's error, however small the reading (our assumption).
BACKGROUND = 0.01
INITIAL_MAX = 30.0


@dataclasses.dataclass
class Result:
    name: str
    reached: bool  # after reference + trial(s) + one correction
    ratio: float  # remaining / initial vibration (RMS over pickups), after one correction
    reached_trim: bool  # after one further trim run and correction
    ratio_trim: float
    resized: bool  # a trial was repeated larger after the trial-effect check


def _noisy(rng: np.random.Generator, clean: list[complex], floor: list[float]) -> tuple[list[complex], list[float]]:
    spreads = [math.hypot(REPEATABILITY * abs(z), f) for z, f in zip(clean, floor)]
    noisy = [z + s / math.sqrt(2) * complex(rng.normal(), rng.normal()) for z, s in zip(clean, spreads)]
    return noisy, spreads


def run_sim(n_rotors: int, seed: int, resize_trials: bool, use_grade: bool) -> list[Result]:
    from runtrue.sim.machine import VirtualMachine
    from runtrue.sim.scenarios import SCENARIOS

    rng = np.random.default_rng(seed)
    results = []
    names = sorted(SCENARIOS)
    for k in range(n_rotors):
        base = SCENARIOS[names[k % len(names)]]
        n_planes = len(base.planes)
        tol = permissible_unbalance(base.grade, base.rotor_mass_kg, base.speed_rpm, planes=min(n_planes, 2))
        planes = tuple(
            dataclasses.replace(
                p,
                initial_unbalance_gmm=tol.per_plane_gmm[i]
                * math.exp(rng.uniform(math.log(INITIAL_MIN), math.log(INITIAL_MAX)))
                * complex(math.cos(a := rng.uniform(0, 2 * math.pi)), math.sin(a)),
            )
            for i, p in enumerate(base.planes)
        )
        sc = dataclasses.replace(base, planes=planes)
        vm = VirtualMachine(sc, seed=int(rng.integers(2**31)))
        vm.set_speed_rpm(sc.speed_rpm)
        initial_amp = [abs(z) for z in vm.expected_1x()]
        floor = [math.hypot(pk.noise_g * math.sqrt(2.0 / NOISE_AVERAGING_SAMPLES), BACKGROUND * a0)
                 for pk, a0 in zip(sc.pickups, initial_amp)]

        def read(vm: VirtualMachine = vm, sc=sc, floor: list[float] = floor) -> tuple[list[complex], list[float]]:
            vm.set_speed_rpm(sc.speed_rpm * (1 + rng.uniform(-SPEED_JITTER, SPEED_JITTER)))
            return _noisy(rng, vm.expected_1x(), floor)

        vm.set_speed_rpm(sc.speed_rpm)
        before = np.array(vm.expected_1x())
        y0, s0 = read()
        runs = [Run([], y0, s0)]
        resized = False
        for p, plane in enumerate(sc.planes):
            trial = suggest_trial_weight(sc.rotor_mass_kg, sc.speed_rpm, plane.radius_mm, n_planes,
                                         grade=sc.grade if use_grade else None)
            angle = float(rng.uniform(0, 360))
            mass = trial.mass_g
            for attempt in range(MAX_TRIAL_ATTEMPTS):
                w = Weight(p + 1, mass, angle, plane.radius_mm)
                wid = vm.add_weight(p, w.mass_g, w.angle_deg, w.radius_mm)
                y, s = read()
                vm.remove_weight(wid)
                verdicts = [check_trial_effect(y0[i], y[i], s0[i], s[i]) for i in range(len(y))]
                best = max(verdicts, key=lambda v: v.ratio)
                if best.ok or not resize_trials or attempt == MAX_TRIAL_ATTEMPTS - 1:
                    break
                resized = True
                mass *= min(best.suggested_scale * 1.2, MAX_TRIAL_SCALE)
            runs.append(Run([w], y, s))
        try:
            sol = solve(runs)
        except BalancingError:
            results.append(Result(sc.name, False, 1.0, False, 1.0, resized))
            continue
        for c in sol.corrections:
            vm.add_weight(c.plane - 1, c.mass_g, c.angle_deg, c.radius_mm)
        vm.set_speed_rpm(sc.speed_rpm)
        after = np.array(vm.expected_1x())
        ok = all(r <= t for r, t in zip(vm.true_residual_unbalance_gmm(), tol.per_plane_gmm))
        ratio = float(np.linalg.norm(after) / np.linalg.norm(before))
        # One trim run: read with the correction on, refit on every run (least squares), add the difference.
        y, s = read()
        runs.append(Run(list(sol.corrections), y, s))
        try:
            sol2 = solve(runs, {c.plane: c.radius_mm for c in sol.corrections})
            for c in net_correction(sol2.corrections, sol.corrections):
                if c.mass_g > 0:
                    vm.add_weight(c.plane - 1, c.mass_g, c.angle_deg, c.radius_mm)
        except BalancingError:
            pass
        vm.set_speed_rpm(sc.speed_rpm)
        trimmed = np.array(vm.expected_1x())
        ok2 = all(r <= t for r, t in zip(vm.true_residual_unbalance_gmm(), tol.per_plane_gmm))
        results.append(Result(sc.name, ok, ratio, ok2, float(np.linalg.norm(trimmed) / np.linalg.norm(before)), resized))
    return results


def run_linear(n_rotors: int, seed: int) -> list[Result]:
    rng = np.random.default_rng(seed)
    results = []
    for k in range(n_rotors):
        n_planes = 1 + k % 2
        a = (rng.normal(size=(n_planes, n_planes)) + 1j * rng.normal(size=(n_planes, n_planes))) * 1e-3
        a += np.eye(n_planes) * 2e-3
        tol = permissible_unbalance(6.3, 50, 1500, planes=n_planes)
        u = np.array([tol.per_plane_gmm[i] * math.exp(rng.uniform(math.log(3), math.log(100)))
                      * np.exp(1j * rng.uniform(0, 2 * math.pi)) for i in range(n_planes)])

        def read(total: np.ndarray, a: np.ndarray = a, n_planes: int = n_planes) -> tuple[list[complex], list[float]]:
            return _noisy(rng, list(a @ total), [1e-5] * n_planes)

        y, s = read(u)
        runs = [Run([], y, s)]
        for p in range(n_planes):
            trial = suggest_trial_weight(50, 1500, 100, n_planes)
            w = Weight(p + 1, trial.mass_g, float(rng.uniform(0, 360)), 100)
            t = u.copy()
            t[p] += w.unbalance_gmm
            y, s = read(t)
            runs.append(Run([w], y, s))
        try:
            sol = solve(runs)
        except BalancingError:
            results.append(Result(f"linear-{n_planes}", False, 1.0, False, 1.0, False))
            continue
        final = u + np.array(sol.correction_gmm)
        ok = all(abs(final[i]) <= tol.per_plane_gmm[i] for i in range(n_planes))
        r = float(np.linalg.norm(a @ final) / np.linalg.norm(a @ u))
        results.append(Result(f"linear-{n_planes}", ok, r, ok, r, False))
    return results


def _table(title: str, results: list[Result]) -> None:
    print(title)
    print(f"  {'scenario':<10} {'rotors':>6} {'reach grade':>11} {'median after/before':>19} "
          f"{'+1 trim: reach':>14} {'median':>7} {'trial resized':>13}")
    for name in sorted({r.name for r in results}) + ["all"]:
        sub = [r for r in results if name in ("all", r.name)]
        print(f"  {name:<10} {len(sub):>6} {np.mean([r.reached for r in sub]):>11.1%} "
              f"{np.median([r.ratio for r in sub]):>19.3f} {np.mean([r.reached_trim for r in sub]):>14.1%} "
              f"{np.median([r.ratio_trim for r in sub]):>7.3f} {np.mean([r.resized for r in sub]):>13.1%}")


def bench_amplitude(n: int, seed: int) -> None:
    from runtrue.balancing.amplitude_fit import linear_solution
    from runtrue.balancing.four_run import Z95, amplitude_only, fit_amplitudes

    print(f"amplitude-only, {n} random rotors per noise level, trial at 0/120/240 deg (seed {seed}):")
    print(f"  {'noise':>5} {'linear median/p90':>18} {'fails':>6} {'fit median/p90':>15} {'ms per fit':>10}")
    for noise in (0.02, 0.05, 0.10):
        rng = np.random.default_rng(seed)
        lin, ml, fails, t_fit = [], [], 0, 0.0
        for _ in range(n):
            u, a, t = amplitude_only_rotor(rng)
            true = a * np.abs(u + t)
            v = np.abs(true * (1 + noise * rng.normal(size=4)))
            ls = linear_solution(v, t)
            if ls is None:
                fails += 1
                lin.append(math.inf)
            else:
                lin.append(abs(ls[0] - u) / abs(u))
            t0 = time.perf_counter()
            f = fit_amplitudes(v, t, noise * true)
            t_fit += time.perf_counter() - t0
            ml.append(abs(f.unbalance_gmm - u) / abs(u))
        print(f"  {noise:>5.0%} {np.median(lin):>8.3f} / {np.percentile(lin, 90):<7.3f} {fails / n:>6.1%} "
              f"{np.median(ml):>6.3f} / {np.percentile(ml, 90):<6.3f} {1000 * t_fit / n:>10.2f}")
    rng = np.random.default_rng(seed + 1)
    hit_m = hit_a = 0
    for _ in range(n):
        u, a, t = amplitude_only_rotor(rng)
        true = a * np.abs(u + t)
        sd = np.hypot(0.03 * true, 0.01 * true[0])
        v = np.abs(true + sd * rng.normal(size=4))
        sol = amplitude_only(v, t, 100.0, amp_sd=sd)
        c = sol.corrections[0]
        hit_m += abs(c.mass_g - abs(u) / 100.0) <= Z95 * sol.mass_sd_g[0]  # type: ignore[index]
        d = (c.angle_deg - math.degrees(np.angle(-u)) + 180.0) % 360.0 - 180.0
        hit_a += abs(d) <= Z95 * sol.angle_sd_deg[0]  # type: ignore[index]
    print(f"  stated 95 % intervals (3 % + 1 % floor reading error, {n} rotors): mass covers {hit_m / n:.1%}, "
          f"angle covers {hit_a / n:.1%}")


def bench_jobs(n: int) -> None:
    from runtrue import plugins
    from runtrue.jobs.headless import run_demo
    from runtrue.sim.scenarios import SCENARIOS

    plugins.load()  # the sim:NAME ports

    print(f"amplitude-only demo jobs (run_demo(..., amplitude_only=True)), seeds 1..{n}:")
    print(f"  {'scenario':<9} {'passed':>8} {'false passes':>12} {'runs <= 5':>9} {'runs median/max':>15} {'s':>6}")
    for name in sorted(SCENARIOS):
        if len(SCENARIOS[name].planes) != 1:
            continue
        t0 = time.perf_counter()
        passed = false = 0
        runs = []
        for seed in range(1, n + 1):
            d = run_demo(name, seed, amplitude_only=True).to_json()
            truly = all(t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
            passed += bool(d["passed"])
            false += bool(d["passed"]) and not truly
            runs.append(int(d["runs"]))
        print(f"  {name:<9} {passed:>4}/{n:<3} {false:>12} {np.mean(np.array(runs) <= 5):>9.0%} "
              f"{np.median(runs):>7.0f}/{max(runs):<7} {time.perf_counter() - t0:>6.1f}")


def solve_input(n_runs: int, seed: int = 1) -> dict:
    """A ``runtrue solve`` input: two planes, three pickups, ``n_runs`` runs with spreads."""
    rng = np.random.default_rng(seed)
    a = (rng.normal(size=(3, 2)) + 1j * rng.normal(size=(3, 2))) * 1e-3
    u = np.array([800 * np.exp(1j * 1.0), 500 * np.exp(2j)])
    runs = []
    for k in range(n_runs):
        ws = [] if k == 0 else [{"plane": 1 + (k - 1) % 2, "mass": 10.0, "angle": float(rng.uniform(0, 360)),
                                 "radius": 100.0}]
        tot = u.copy()
        for w in ws:
            tot[w["plane"] - 1] += w["mass"] * w["radius"] * np.exp(1j * math.radians(w["angle"]))
        y = a @ tot
        s = 0.02 * np.abs(y) + 1e-4
        y = y + s / math.sqrt(2) * (rng.normal(size=3) + 1j * rng.normal(size=3))
        runs.append({"weights": ws, "readings": [
            {"amp": float(abs(z)), "phase": float(math.degrees(np.angle(z)) % 360), "spread": float(sd)}
            for z, sd in zip(y, s)]})
    return {"runs": runs}


def bench_solve(n_runs: int = 5000) -> None:
    import contextlib
    import io
    import json
    import os
    import tempfile

    from runtrue.cli import main as cli_main

    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "runs.json")
        with open(path, "w") as f:
            json.dump(solve_input(n_runs), f)
        out = io.StringIO()
        t0 = time.perf_counter()
        with contextlib.redirect_stdout(out):
            rc = cli_main(["solve", path])
        dt = time.perf_counter() - t0
    unc = json.loads(out.getvalue())["uncertainty"]
    print(f"runtrue solve, {n_runs} runs x 3 pickups, 2 planes, with spreads: {dt:.2f} s (exit {rc}); "
          f"uncertainty {unc}")
    # The former method (one refit per reading part, finite differences), on fewer runs.
    from runtrue.balancing import influence as infl
    from runtrue.balancing.uncertainty import propagate
    from runtrue.cli.solve import parse_runs

    for n in (250, 1000):
        runs, _radius, _amp = parse_runs(solve_input(n))
        x = infl._design(runs, 2)
        y = np.array([[complex(z) for z in r.readings] for r in runs])
        wts = infl._row_weights(runs)
        sd = np.array([r.spreads for r in runs], dtype=float)

        def refit(yy: np.ndarray, x: np.ndarray = x, wts: np.ndarray = wts) -> np.ndarray:
            rr, aa = infl._fit(x, yy, wts)
            return infl._correct(aa, rr)

        t0 = time.perf_counter()
        propagate(refit, y, sd, refit(y))
        t_old = time.perf_counter() - t0
        rr, aa = infl._fit(x, y, wts)
        t0 = time.perf_counter()
        infl._propagate_closed_form(x, wts, aa, rr, sd)
        t_new = time.perf_counter() - t0
        print(f"  uncertainty alone, {n} runs: refit per reading {t_old:.2f} s, closed form {t_new:.4f} s")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rotors", type=int, default=1000)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--part", choices=("grade", "amplitude", "jobs", "solve", "all"), default="all")
    ap.add_argument("--amplitude-rotors", type=int, default=3000)
    ap.add_argument("--jobs", type=int, default=200)
    args = ap.parse_args(argv)
    if args.part in ("solve", "all"):
        bench_solve()
    if args.part in ("amplitude", "all"):
        bench_amplitude(args.amplitude_rotors, args.seed)
    if args.part in ("jobs", "all"):
        bench_jobs(args.jobs)
    if args.part not in ("grade", "all"):
        return 0
    t0 = time.perf_counter()
    try:
        import runtrue.sim.machine  # noqa: F401
    except ImportError:
        print("model: linear model (random complex influence matrix) + 3 % repeatability (runtrue.sim not found)")
        results = run_linear(args.rotors, args.seed)
        _table("trial by the rule:", results)
    else:
        print("model: runtrue.sim VirtualMachine physics (expected_1x) + 3 % repeatability + 1 % background + pickup noise")
        strict = run_sim(args.rotors, args.seed, resize_trials=False, use_grade=False)
        _table("A. trial exactly as the 10 %-force rule sizes it (reference + trial per plane + one correction):",
               strict)
        resized = run_sim(args.rotors, args.seed, resize_trials=True, use_grade=False)
        _table("B. as A, trial repeated larger when check_trial_effect says it was lost in the scatter:", resized)
        results = run_sim(args.rotors, args.seed, resize_trials=True, use_grade=True)
        _table("C. as B, first trial also at least 5x the grade allowance (suggest_trial_weight(grade=...)):",
               results)
    print(f"rotors: {args.rotors}  seed: {args.seed}  time: {time.perf_counter() - t0:.1f} s")
    share = float(np.mean([r.reached for r in results]))
    med = float(np.median([r.ratio for r in results]))
    print("headline (C, the engine as the workflow is meant to use it):")
    print(f"share reaching the target grade after reference + trial + one correction: {share:.1%}")
    print(f"median remaining vibration after one correction / initial: {med:.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
