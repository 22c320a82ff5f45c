"""Amplitude-only balancing as a job (the four-run method) on a linear rotor (invented numbers).

Method under test: the four-run method -- a reference run, then one trial weight moved to three
angles (classically 0, 120 and 240 deg), amplitudes only -- as taught in field balancing texts,
e.g. Wowk, *Machinery Vibration: Balancing*, McGraw-Hill 1995, "balancing without phase" (from
memory); the engine solves it in ``runtrue.balancing.four_run``.  A linear rotor is the model the
method assumes, so without noise the correction must be exact; with noise the job must end
within the grade in a few cycles, and the unbalance really left (which the test knows) too.
The trims by further four-run cycles are our choice (trims are not standard in this method).
"""

from __future__ import annotations

import cmath
import math
import random
from collections.abc import Iterator
from pathlib import Path

import pytest
from jobs_fakes import LinearRotor, polar

from runtrue.balancing import permissible_unbalance
from runtrue.jobs import BalanceJob, JobStore, Machine, Pickup, PlaneSpec, RunReading, StockPiece, Weight
from runtrue.jobs.export import job_json, runs_csv
from runtrue.jobs.job import AmplitudeOnlyJob
from runtrue.jobs.method_four_run import three_trial_angles_deg
from runtrue.jobs.model import ChannelValue
from runtrue.jobs.report import render_html

FAN_H = [[polar(2.0e-4, 63.0)]]
FAN_U0 = [polar(2400.0, 117.0)]


def groove_fan(**kw: object) -> Machine:
    return Machine("fan groove", 14.0, 1470.0, [PlaneSpec(160.0, continuous=True)], **kw)  # type: ignore[arg-type]


def holes_fan(**kw: object) -> Machine:
    return Machine("fan 8 holes", 14.0, 1470.0, [PlaneSpec(160.0, count=8)], **kw)  # type: ignore[arg-type]


def scrambled(reading: RunReading, rng: random.Random) -> RunReading:
    """The same amplitudes with a meaningless phase: a job that ignores phase cannot tell."""
    chans = tuple(
        ChannelValue(c.amp_g * cmath.exp(1j * rng.uniform(0, 2 * math.pi)), c.spread_g, c.confidence_g)
        for c in reading.channels
    )
    return RunReading(reading.speed_rpm, chans, n_revs=reading.n_revs)


def drive(job: BalanceJob, rotor: LinearRotor, max_runs: int = 30, rng: random.Random | None = None) -> list[str]:
    """Do what the job says until it is done; return the kinds of the runs taken."""
    while job.step != "done":
        assert len(job.runs) < max_runs, "job did not finish"
        reading = rotor.reading(job.planned_weights())
        job.record_run(scrambled(reading, rng) if rng else reading)
    return [r.kind for r in job.runs]


def permissible_gmm(m: Machine) -> float:
    return permissible_unbalance(float(m.grade[1:]), m.rotor_mass_kg, m.speed_rpm, planes=1).per_plane_gmm[0]


@pytest.fixture
def store() -> Iterator[JobStore]:
    s = JobStore(":memory:")
    yield s
    s.close()


def test_noise_free_rotor_is_corrected_exactly_in_one_cycle(store: JobStore) -> None:
    m = groove_fan()
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, m, amplitude_only=True)
    assert isinstance(job, AmplitudeOnlyJob) and job.state.method == "four-run"
    job.record_run(rotor.reading([]))
    job.set_trial(4.0, 0.0)  # 640 g.mm: a trial that moves the amplitude well over 25 %
    kinds = drive(job, rotor)
    assert kinds == ["reference", "trial", "trial", "trial", "correction"]
    assert [r.weights[0].angle_deg for r in job.runs[1:4]] == pytest.approx([0.0, 120.0, 240.0])
    assert len({r.weights[0].mass_g for r in job.runs[1:4]}) == 1, "the same trial weight, moved"
    left = rotor.unbalance_gmm(job.runs[-1].weights)[0]
    assert abs(left) < 1e-6 * abs(FAN_U0[0])
    assert not any(w.label.startswith("trial") for w in job.runs[-1].weights), "trial taken off for the correction"
    res = job.result()
    assert res.passed is True and res.method == "four-run"
    assert res.influence is None, "|H| alone is never offered as an influence coefficient"
    assert res.influence_magnitude == pytest.approx(abs(FAN_H[0][0]), rel=1e-9)
    assert res.to_dict()["method"] == "four-run"


def test_phase_from_the_meter_is_ignored(store: JobStore) -> None:
    m = holes_fan()
    plans = []
    for rng in (None, random.Random(5)):
        rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
        job = BalanceJob.start(store, m, amplitude_only=True)
        job.record_run(rotor.reading([]))
        job.set_trial(4.0, 0.0)
        for _ in range(3):
            r = rotor.reading(job.planned_weights())
            job.record_run(scrambled(r, rng) if rng else r)
        assert job.step == "correction" and job.state.plan is not None
        plans.append(job.state.plan.weights_to_fit())
    assert [(w.mass_g, w.angle_deg) for w in plans[0]] == pytest.approx([(w.mass_g, w.angle_deg) for w in plans[1]])


def test_fixed_holes_use_the_positions_nearest_120_and_240_at_their_true_angles(store: JobStore) -> None:
    m = holes_fan()
    assert three_trial_angles_deg(m, 1, 0.0) == pytest.approx([0.0, 135.0, 225.0])
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, m, amplitude_only=True)
    job.record_run(rotor.reading([]))
    job.set_trial(4.0, 0.0)
    text = " ".join(job.instructions())
    assert "chalk" in text.lower() and "0°" in text and "against the direction of rotation" in text
    assert "phase shown by the meter is ignored" in text
    kinds = drive(job, rotor)
    assert kinds == ["reference", "trial", "trial", "trial", "correction"]
    assert [r.weights[0].angle_deg for r in job.runs[1:4]] == pytest.approx([0.0, 135.0, 225.0])
    # No stock described: the correction is split between two holes, exactly.
    assert abs(rotor.unbalance_gmm(job.runs[-1].weights)[0]) < 1e-6 * abs(FAN_U0[0])


def test_amplitudes_typed_in_without_phase_balance_the_rotor(store: JobStore) -> None:
    m = groove_fan()
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, m, amplitude_only=True)
    while job.step != "done":
        amp = rotor.reading(job.planned_weights()).channels[0].amp_g
        reading = RunReading.manual([amp], None, 1470.0)
        assert reading.has_phase is False
        job.record_run(reading)
        assert len(job.runs) < 12
    assert job.result().passed is True
    assert abs(rotor.unbalance_gmm(job.runs[-1].weights)[0]) <= permissible_gmm(m)
    csv_text = runs_csv(store, job.job_id)
    assert "amplitude only" in csv_text
    assert all(ch["phase_deg"] is None for run in job_json(store, job.job_id)["runs"] for ch in run["channels"])


def test_weak_trial_asks_for_a_larger_one_and_keeps_the_runs(store: JobStore) -> None:
    m = groove_fan()
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, m, amplitude_only=True)
    job.record_run(rotor.reading([]))
    job.set_trial(0.5, 0.0)  # 80 g.mm against 2400 g.mm: 7 % effect
    for _ in range(3):
        job.record_run(rotor.reading(job.planned_weights()))
    chk = job.state.last_trial_check
    assert chk is not None and not chk.ok and chk.ratio == pytest.approx(80 / 2400, rel=1e-6)
    assert job.step == "trial" and job.state.trial_number == 1
    assert job.state.trial is not None and job.state.trial.mass_g >= 0.5 * 0.25 / chk.ratio
    assert "too small" in job.state.message
    kinds = drive(job, rotor)
    assert kinds == ["reference"] + ["trial"] * 6 + ["correction"]
    assert abs(rotor.unbalance_gmm(job.runs[-1].weights)[0]) < 1e-6 * abs(FAN_U0[0])


def test_weak_trial_can_be_accepted(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, groove_fan(), amplitude_only=True)
    job.record_run(rotor.reading([]))
    job.set_trial(0.5, 0.0)
    for _ in range(3):
        job.record_run(rotor.reading(job.planned_weights()))
    job.accept_trial_anyway()
    assert job.step == "correction"
    assert any("accepted by the user" in w for w in job.state.warnings)
    drive(job, rotor)
    assert job.result().passed is True  # noise-free: even a weak trial solves exactly


def test_failed_check_offers_another_cycle_from_the_corrected_state(store: JobStore) -> None:
    m = groove_fan()
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, m, amplitude_only=True)
    job.record_run(rotor.reading([]))
    job.set_trial(4.0, 0.0)
    for _ in range(3):
        job.record_run(rotor.reading(job.planned_weights()))
    assert job.state.plan is not None
    (c,) = job.state.plan.weights_to_fit()
    half = Weight(1, c.mass_g / 2, c.angle_deg, c.radius_mm, c.label)  # the fitter fits only half
    check = job.record_run(rotor.reading([half]), weights_present=[half])
    left = abs(rotor.unbalance_gmm([half])[0])
    res = job.result()
    # U_res ~ amplitude / |H|: on a linear rotor exactly the unbalance left.
    assert res.residual_unbalance_gmm == pytest.approx([left], rel=1e-9)
    assert res.passed is False and check.kind == "correction"
    assert job.step == "trial" and job.state.cycle == 2 and job.state.trial_number == 1
    msg = job.state.message
    assert "not standard" in msg and "stop" in msg and "estimated" in msg and "without phase" in msg
    planned = job.planned_weights()
    assert half in planned and sum(w.label.startswith("trial") for w in planned) == 1
    kinds = drive(job, rotor)
    assert kinds == ["reference", "trial", "trial", "trial", "correction", "trial", "trial", "trial", "trim"]
    assert abs(rotor.unbalance_gmm(job.runs[-1].weights)[0]) < 1e-6 * abs(FAN_U0[0])
    assert half in job.runs[-1].weights, "the first correction stays on"


def test_user_may_stop_instead_of_another_cycle(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0)
    job = BalanceJob.start(store, groove_fan(), amplitude_only=True)
    job.record_run(rotor.reading([]))
    job.set_trial(4.0, 0.0)
    for _ in range(3):
        job.record_run(rotor.reading(job.planned_weights()))
    job.record_run(rotor.reading([]), weights_present=[])  # the correction was not fitted at all
    assert job.step == "trial" and job.state.cycle == 2
    job.stop()
    res = job.result()
    assert job.step == "done" and res.status == "stopped" and res.passed is False


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_noisy_rotor_passes_within_a_few_cycles(store: JobStore, seed: int) -> None:
    m = holes_fan(stock=[StockPiece(1.0, 12), StockPiece(2.0, 12), StockPiece(5.0, 8), StockPiece(10.0, 4)])
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0, noise_g=0.01, seed=seed)
    job = BalanceJob.start(store, m, amplitude_only=True)
    kinds = drive(job, rotor, max_runs=1 + 4 * 4, rng=random.Random(seed))
    res = job.result()
    assert res.passed is True, res.warnings
    assert kinds[-1] in ("correction", "trim")
    assert abs(rotor.unbalance_gmm(job.runs[-1].weights)[0]) <= permissible_gmm(m)
    assert res.channels[0].after_amp_g is not None and res.channels[0].after_amp_g < 0.3 * res.channels[0].before_amp_g


def test_two_plane_machine_is_refused_with_a_clear_message(store: JobStore) -> None:
    roll = Machine(
        "roll 2", 38.0, 980.0, [PlaneSpec(95.0, count=6), PlaneSpec(95.0, count=6, first_angle_deg=30.0)],
        pickups=[Pickup("drive end"), Pickup("far end")],
    )
    with pytest.raises(ValueError, match="one plane.*2 correction planes"):
        BalanceJob.start(store, roll, amplitude_only=True)
    assert store.list_jobs() == []


def test_phase_method_is_unchanged_by_default(store: JobStore) -> None:
    job = BalanceJob.start(store, holes_fan())
    assert type(job) is BalanceJob and job.state.method == "influence-coefficient"
    assert job.result().to_dict()["method"] == "influence-coefficient"


@pytest.mark.slow
@pytest.mark.parametrize("stop_after", [0, 1, 3, 4])
def test_store_round_trip_resumes_the_same_step(tmp_path: Path, stop_after: int) -> None:
    db = tmp_path / "jobs.sqlite"
    m = holes_fan(stock=[StockPiece(1.0, 12), StockPiece(2.0, 12), StockPiece(5.0, 8), StockPiece(10.0, 4)])
    rotor = LinearRotor(FAN_H, FAN_U0, 1470.0, noise_g=0.002, seed=4)
    with JobStore(db) as store:
        store.save_machine(m)
        job = BalanceJob.start(store, m, amplitude_only=True)
        for _ in range(stop_after):
            job.record_run(rotor.reading(job.planned_weights()))
        before = (job.step, job.state.cycle, job.state.trial_number, job.state.trial, job.state.trial_angles_deg,
                  job.planned_weights(), job.instructions())
        job_id = job.job_id
    with JobStore(db) as store:  # a new process would see exactly this
        again = BalanceJob.resume(store, job_id)
        assert isinstance(again, AmplitudeOnlyJob)
        after = (again.step, again.state.cycle, again.state.trial_number, again.state.trial,
                 again.state.trial_angles_deg, again.planned_weights(), again.instructions())
        assert after == before
        drive(again, rotor)
        res = again.result()
        assert res.passed is True
        finished = BalanceJob.resume(store, job_id)
        assert finished.result().to_dict() == res.to_dict()
        assert store.get_job(job_id).result["method"] == "four-run"  # type: ignore[union-attr]
        html = render_html(store, job_id)
        assert "four-run" in html and "phase not used" in html and 'aria-label="polar diagram' not in html
        assert "estimate without phase" in html and "chalk mark" in html and "from the reference mark" not in html
        assert job_json(store, job_id)["job"]["method"] == "four-run"
        saved = store.get_machine(m.name)
        assert saved is not None and saved.influence is None, "|H| is not stored as coefficients"


class _Crash(Exception):
    pass


@pytest.mark.slow
def test_demo_job_interrupted_mid_cycle_resumes_on_the_simulator(tmp_path: Path) -> None:
    from runtrue.jobs.headless import run_demo

    def crash_after_three(job: BalanceJob) -> None:
        if len(job.runs) == 3:
            raise _Crash

    with JobStore(tmp_path / "jobs.sqlite") as store:
        with pytest.raises(_Crash):
            run_demo("fan", 3, store=store, amplitude_only=True, max_runs=21, on_run=crash_after_three)
        (summary,) = store.unfinished_jobs()
        kept = store.runs(summary.id)
        assert [r.kind for r in kept] == ["reference", "trial", "trial"]
        out = run_demo("fan", 4, store=store, resume_job_id=summary.id, max_runs=21)
        assert isinstance(out.job, AmplitudeOnlyJob)
        assert out.job.runs[:3] == kept, "every taken reading intact"
        d = out.to_json()
        assert d["method"] == "four-run" and d["passed"] is True
        assert all(t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
        assert all(not r.reading.has_phase for r in out.job.runs)


def test_trial_angles_skip_blocked_positions_and_need_three() -> None:
    twelve = Machine("spindle", 1.6, 24000.0, [PlaneSpec(22.0, count=12, excluded=[5])])
    # 120 deg is position 5, blocked: the nearest free position (90 or 150 deg) is used instead.
    first, second, third = three_trial_angles_deg(twelve, 1, 0.0)
    assert (first, third) == (0.0, 240.0) and second in (90.0, 150.0)
    two_holes = Machine("pulley", 3.0, 1500.0, [PlaneSpec(60.0, angles_deg=[0.0, 180.0])])
    with pytest.raises(ValueError, match="three different angles"):
        three_trial_angles_deg(two_holes, 1, 0.0)
    with JobStore(":memory:") as store:
        job = BalanceJob.start(store, two_holes, amplitude_only=True)
        job.record_run(RunReading.manual([0.3], None, 1500.0))
        assert len(job.runs) == 1 and job.step == "reference", "the run is kept; the job says why it cannot go on"
        assert "three different angles" in job.state.message


def test_a_weak_first_trial_run_is_judged_at_once_and_a_larger_trial_can_be_fitted() -> None:
    """The four-run method needs three trial runs for its answer, but the first already bounds the
    trial's effect from below: a small change says so after one run, not three."""
    from runtrue.jobs import BalanceJob, JobStore, Machine, PlaneSpec, RunReading

    with JobStore(":memory:") as store:
        m = Machine("sander drum", 9.0, 2900.0, [PlaneSpec(110.0, continuous=True)])
        job = BalanceJob.start(store, m, amplitude_only=True)
        job.record_run(RunReading.manual([0.50], None, 2900.0))
        job.record_run(RunReading.manual([0.52], None, 2900.0))  # 4 %: small so far
        assert job.state.trial_number == 2
        text = " ".join(job.instructions())
        assert "SMALL SO FAR" in text and "amplitude +4 %" in text and "common practice" in text
        larger = job.early_larger_trial
        assert larger is not None and larger.mass_g > job.runs[1].weights[0].mass_g
        job.set_trial(larger.mass_g, larger.angle_deg)  # fitted now instead of two more runs
        assert job.state.trial_number == 1 and job.suggested_trial().mass_g == larger.mass_g
        job.record_run(RunReading.manual([0.70], None, 2900.0))  # 40 %: large enough
        assert "GOOD" in " ".join(job.instructions()) and job.early_larger_trial is None
