"""Amplitude-only jobs on the simulator never claim a pass the rotor does not have.

Model that runs: the headless demo job (``runtrue.jobs.headless.run_demo(..., amplitude_only=True)``)
on every one-plane scenario (invented machines), the real firmware's readings with their phase
thrown away.  The truth is the simulator's residual unbalance.  The benchmark
(``tests/bench/bench_balancing.py --part jobs``) runs 200 seeds per scenario; this test a few.
"""

from __future__ import annotations

import pytest

from runtrue.jobs.headless import run_demo
from runtrue.sim.scenarios import SCENARIOS

pytestmark = pytest.mark.slow

ONE_PLANE = sorted(name for name, sc in SCENARIOS.items() if len(sc.planes) == 1)


@pytest.mark.parametrize("scenario", ONE_PLANE)
def test_amplitude_only_job_passes_only_when_the_rotor_is_within_grade(scenario: str) -> None:
    for seed in range(1, 6):
        d = run_demo(scenario, seed, amplitude_only=True).to_json()
        truly = all(t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
        if d["passed"]:
            assert truly, f"seed {seed}: declared passed with {d['true_residual_unbalance_gmm']} g·mm left"
        # and it gets there (the benchmark: every seed passes, at most 9 runs on these scenarios)
        assert d["passed"] and d["runs"] <= 13, f"seed {seed}: {d['runs']} runs, passed {d['passed']}"
