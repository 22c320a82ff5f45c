"""A whole balancing job on the simulator with nobody at the keyboard (``runtrue demo --auto``).

The same :class:`~runtrue.jobs.job.BalanceJob` the application uses, fed by the same
``MeterClient`` over ``SimTransport``: reference run, trial run(s), correction, trim runs until
the grade is met.  Every weight the workflow asks for is fitted to the virtual rotor by its
physical geometry (``machine.add_weight`` at the placement's angle, from the mark against
rotation, and radius), never by the convention under test; so a wrong angle convention anywhere
shows up as vibration that does not drop.

With ``amplitude_only=True`` the job is the four-run method (``runtrue.jobs.method_four_run``): the
simulator still has its reference sensor, but every reading is stripped to amplitudes before the
job sees it, so the job cannot use phase even by mistake.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from runtrue.jobs.job import BalanceJob
from runtrue.jobs.model import Machine, RunReading, Weight
from runtrue.jobs.store import JobStore

DEFAULT_REVS = 40  # revolutions averaged per reading (enough for steadiness on every scenario)
SETTLE_REVS = 4  # revolutions skipped after the weights change
#: The amplitude-only method has no phase to spot a stale reading and no trim runs to make up for
#: one, so after a weight change it skips more revolutions (the simulator's stream runs a few
#: dozen revolutions ahead of the host at 24000 rpm).
SETTLE_REVS_AMPLITUDE_ONLY = 40
MAX_SETTLE_REVS = 200
REL_CONFIDENCE = 0.05  # average more while a vector's 95 % radius exceeds this share of it
MORE_REVS_FACTOR = 8  # ... up to this many times the revolutions asked for  # at most this many revolutions waiting for steadiness
MAX_RUNS = 12  # the demo stops (not passed) after this many runs
MAX_RUNS_AMPLITUDE_ONLY = 21  # four-run method: the reference and five cycles of four runs


@dataclass
class DemoOutcome:
    """What ``runtrue demo --auto --json`` prints (``to_json``) plus the job for a caller."""

    scenario: str
    seed: int | None
    job: BalanceJob
    true_residual_gmm: list[float]
    wall_s: float
    max_runs: int
    stopped_reason: str = ""
    log: list[str] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        res = self.job.result()
        last = self.job.runs[-1] if self.job.runs else None
        final = [abs(c.mean) for c in last.reading.channels] if last else []
        return {
            "scenario": self.scenario,
            "seed": self.seed,
            "job_id": self.job.job_id,
            "runs": len(self.job.runs),
            "run_kinds": [r.kind for r in self.job.runs],
            "initial": [c.before_amp_g for c in res.channels],
            "final": final,
            "unit": "g",
            "grade": res.grade,
            "standard": res.standard,
            "permissible_unbalance_gmm": res.permissible_unbalance_gmm,
            "residual_unbalance_gmm": res.residual_unbalance_gmm,
            "residual_uncertainty_gmm": res.residual_uncertainty_gmm,
            "true_residual_unbalance_gmm": self.true_residual_gmm,
            "passed": bool(res.passed),
            "status": res.status,
            "max_runs": self.max_runs,
            "stopped_reason": self.stopped_reason,
            "weights_fitted": [w.to_dict() for w in res.weights_on],
            "wall_s": round(self.wall_s, 3),
            "method": res.method,
        }


class VirtualRotorFitter:
    """Keeps the virtual rotor's weights equal to a list of :class:`Weight` (planes from 1)."""

    def __init__(self, machine: Any) -> None:
        self.machine = machine
        self.fitted: list[tuple[Weight, int]] = []

    def fit(self, wanted: list[Weight]) -> None:
        remaining = list(wanted)
        keep: list[tuple[Weight, int]] = []
        for w, wid in self.fitted:
            if w in remaining:
                remaining.remove(w)
                keep.append((w, wid))
            else:
                self.machine.remove_weight(wid)
        for w in remaining:
            wid = self.machine.add_weight(w.plane - 1, w.mass_g, w.angle_deg, w.radius_mm)
            keep.append((w, wid))
        self.fitted = keep


def take_reading(client: Any, revs: int, settle_revs: int = SETTLE_REVS) -> Any:
    """Skip the revolutions in flight, wait until speed and vector are steady (at most
    :data:`MAX_SETTLE_REVS`), then vector-average ``revs`` usable revolutions."""
    from runtrue.readings import SteadinessDetector, vector_average

    client.discard_revolutions()
    client.revolutions(settle_revs)
    detector = SteadinessDetector()
    for _ in range(MAX_SETTLE_REVS):
        if detector.add(client.revolutions(1)[0]).steady:
            break
    taken = client.revolutions(revs, usable_only=True)
    reading = vector_average(taken, info=client.info)
    # A noisy machine: keep averaging until each 1x vector is known to within REL_CONFIDENCE
    # of its size (95 % radius), or MORE_REVS_FACTOR times the revolutions asked for.
    while len(taken) < MORE_REVS_FACTOR * revs and any(
        ch.confidence_g > REL_CONFIDENCE * ch.amp_g for ch in reading.channels
    ):
        taken += client.revolutions(revs, usable_only=True)
        reading = vector_average(taken, info=client.info)
    return reading


def run_demo(
    scenario: str,
    seed: int | None = None,
    *,
    store: JobStore | None = None,
    resume_job_id: int | None = None,
    revs: int = DEFAULT_REVS,
    max_runs: int = MAX_RUNS,
    on_run: Callable[[BalanceJob], None] | None = None,
    machine: Machine | None = None,
    trial_removed: bool = True,
    amplitude_only: bool = False,
) -> DemoOutcome:
    """Run (or resume) a whole job on simulator ``scenario``; returns the outcome.

    ``store`` defaults to an in-memory store (a demo does not fill the user's machine history).
    With ``resume_job_id`` the job is rebuilt from ``store`` and the weights of its last run are
    put back on a fresh virtual rotor (as they would still be on a real one).  ``machine``
    (default: the scenario's, see :func:`~runtrue.jobs.demo_machine.machine_for_scenario`) may be a
    saved machine with stored influence coefficients: the job then goes straight to the correction.
    ``amplitude_only``: the four-run method on a one-plane scenario, fed amplitudes only (a
    ``ValueError`` for a two-plane machine).
    """
    from runtrue.device import open_meter
    from runtrue.jobs.demo_machine import machine_for_scenario

    t0 = time.perf_counter()
    own_store = store is None
    store = store if store is not None else JobStore(":memory:")
    if resume_job_id is not None:
        job = BalanceJob.resume(store, resume_job_id)
    else:
        job = BalanceJob.start(
            store, machine or machine_for_scenario(scenario), trial_removed=trial_removed, amplitude_only=amplitude_only
        )
    no_phase = job.state.method == "four-run"
    client = open_meter("sim:" + scenario, seed=seed)
    stopped = ""
    try:
        client.identify()
        n_pickups = job.machine.n_pickups
        client.set_channels((1 << n_pickups) - 1)
        virtual = client.transport.machine  # type: ignore[attr-defined]  # a SimTransport
        fitter = VirtualRotorFitter(virtual)
        if job.runs:
            fitter.fit(list(job.runs[-1].weights))
        client.start()
        while job.step != "done":
            if len(job.runs) >= max_runs:
                stopped = f"run limit reached: the demo stops after {max_runs} runs"
                job.stop(stopped)
                break
            fitter.fit(job.planned_weights())
            reading = take_reading(client, revs, SETTLE_REVS_AMPLITUDE_ONLY if no_phase else SETTLE_REVS)
            if no_phase:
                reading = RunReading.from_reading(reading).amplitudes_only()
            job.record_run(reading)
            if on_run is not None:
                on_run(job)
        true_res = [float(x) for x in virtual.true_residual_unbalance_gmm()]
    finally:
        client.close()
    out = DemoOutcome(scenario, seed, job, true_res, time.perf_counter() - t0, max_runs, stopped)
    if own_store:
        pass  # the in-memory store lives as long as the job object refers to it
    return out
