"""Benchmark: the headless demo job (``runtrue demo --auto``) on every scenario.

Prints, per scenario and revolutions per reading: the share of seeds that pass, the runs taken,
the true residual unbalance as a fraction of the permissible one (median and worst), the 1x
vibration left (final / initial, worst pickup, median) and the wall time per job (median, max).
Run: ``.venv/bin/python tests/bench/bench_jobs_demo.py [SEEDS]`` (default 20 seeds).
"""

from __future__ import annotations

import statistics
import sys
import time

from runtrue import plugins
from runtrue.jobs.headless import run_demo
from runtrue.sim.scenarios import SCENARIOS


def main() -> None:
    plugins.load()  # the sim:NAME ports
    seeds = int(sys.argv[1]) if len(sys.argv) > 1 else 20
    print(f"{'scenario':9} {'revs':>4} {'passed':>7} {'runs':>9} {'true/perm':>15} {'left 1x':>8} {'wall s':>13}")
    print(f"{'':9} {'':>4} {'':>7} {'med/max':>9} {'median/worst':>15} {'median':>8} {'median/max':>13}")
    for name in sorted(SCENARIOS):
        for revs in (20, 40, 80):
            passed, runs, ratio, left, wall = 0, [], [], [], []
            for seed in range(1, seeds + 1):
                t0 = time.perf_counter()
                d = run_demo(name, seed, revs=revs).to_json()
                wall.append(time.perf_counter() - t0)
                ok = d["passed"] and all(
                    t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"])
                )
                passed += ok
                runs.append(d["runs"])
                ratio.append(max(t / p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"])))
                left.append(max(f / i for f, i in zip(d["final"], d["initial"])))
            print(
                f"{name:9} {revs:>4} {passed:>3}/{seeds:<3} {statistics.median(runs):>4.0f}/{max(runs):<4}"
                f" {statistics.median(ratio):>7.2f}/{max(ratio):<7.2f} {statistics.median(left):>8.3f}"
                f" {statistics.median(wall):>6.3f}/{max(wall):<6.3f}"
            )


if __name__ == "__main__":
    main()
