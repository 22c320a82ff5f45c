"""The balancing workflow driven like a technician would, on a linear rotor (invented numbers).

A linear rotor is the model the influence-coefficient method assumes, so on it every job must
end within the grade, and the unbalance actually left on the rotor (which the test knows) must be
within the permissible value too.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator

import pytest
from jobs_fakes import LinearRotor, polar

from runtrue.balancing import permissible_unbalance
from runtrue.jobs import BalanceJob, JobStore, Machine, Pickup, PlaneSpec, StockPiece, StoredInfluence


def fan(**kw: object) -> Machine:
    return Machine("fan 1", 14.0, 1470.0, [PlaneSpec(160.0, count=8)], **kw)  # type: ignore[arg-type]


def roll(**kw: object) -> Machine:
    return Machine(
        "roll 2", 38.0, 980.0,
        [PlaneSpec(95.0, count=6), PlaneSpec(95.0, count=6, first_angle_deg=30.0)],
        pickups=[Pickup("drive end"), Pickup("far end")],
        **kw,  # type: ignore[arg-type]
    )


FAN_H = [[polar(2.0e-4, 63.0)]]
ROLL_H = [[polar(1.1e-4, 20.0), polar(3.5e-5, 75.0)], [polar(2.8e-5, 300.0), polar(1.0e-4, 35.0)]]


def drive(job: BalanceJob, rotor: LinearRotor, max_runs: int = 15) -> list[str]:
    """Do what the job says until it is done; return the kinds of the runs taken."""
    while job.step != "done":
        assert len(job.runs) < max_runs, "job did not finish"
        job.record_run(rotor.reading(job.planned_weights()))
    return [r.kind for r in job.runs]


def true_residual_within_grade(machine: Machine, rotor: LinearRotor, job: BalanceJob) -> bool:
    tol = permissible_unbalance(float(machine.grade[1:]), machine.rotor_mass_kg, machine.speed_rpm, planes=machine.n_planes)
    left = rotor.unbalance_gmm(job.runs[-1].weights)
    return all(abs(u) <= p for u, p in zip(left, tol.per_plane_gmm))


@pytest.fixture
def store() -> Iterator[JobStore]:
    s = JobStore(":memory:")
    yield s
    s.close()


def test_single_plane_job_reaches_grade_in_three_runs(store: JobStore) -> None:
    m = fan()
    store.save_machine(m)
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.002)
    job = BalanceJob.start(store, m)
    assert drive(job, rotor) == ["reference", "trial", "correction"]
    res = job.result()
    assert res.passed is True and res.status == "passed"
    assert res.channels[0].after_amp_g < 0.2 * res.channels[0].before_amp_g
    assert true_residual_within_grade(m, rotor, job)
    assert store.get_job(job.job_id).status == "passed"  # type: ignore[union-attr]


@pytest.mark.parametrize("trial_removed", [True, False])
def test_two_plane_job_reaches_grade_with_trials_removed_or_left_on(store: JobStore, trial_removed: bool) -> None:
    m = roll()
    rotor = LinearRotor(ROLL_H, [polar(3600.0, 40.0), polar(2800.0, 250.0)], 980.0, noise_g=0.001)
    job = BalanceJob.start(store, m, trial_removed=trial_removed)
    kinds = drive(job, rotor)
    assert kinds[:4] == ["reference", "trial", "trial", "correction"]
    trial_runs = [r for r in job.runs if r.kind == "trial"]
    planes_with_trials = [sorted({w.plane for w in r.weights}) for r in trial_runs]
    assert planes_with_trials == ([[1], [2]] if trial_removed else [[1], [1, 2]])
    assert job.result().passed is True
    assert true_residual_within_grade(m, rotor, job)
    if not trial_removed:  # the trials stay on: the correction is net of them
        assert any(w.label.startswith("trial") for w in job.runs[-1].weights)


def test_too_small_trial_is_flagged_and_a_larger_one_suggested(store: JobStore) -> None:
    m = fan()
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.01)
    job = BalanceJob.start(store, m)
    job.record_run(rotor.reading([]))
    job.set_trial(0.05, 45.0)  # 8 g·mm: its effect, 0.0016 g, is lost in 0.01 g of scatter
    job.record_run(rotor.reading(job.planned_weights()))
    chk = job.state.last_trial_check
    assert job.step == "trial" and chk is not None and not chk.ok
    bigger = job.suggested_trial()
    assert bigger is not None and bigger.mass_g >= 0.05 * chk.suggested_scale * 0.99
    assert "TOO SMALL" in " ".join(job.instructions()) and "g instead" in " ".join(job.instructions())
    drive(job, rotor)
    assert job.result().passed is True
    assert [r.kind for r in job.runs][:3] == ["reference", "trial", "trial"]


def test_stored_coefficients_go_straight_to_the_correction(store: JobStore) -> None:
    m = fan()
    store.save_machine(m)
    first = BalanceJob.start(store, m)
    drive(first, LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.002))
    saved = store.get_machine(m.id)  # type: ignore[arg-type]
    assert saved is not None and saved.influence is not None and saved.influence.job_id == first.job_id
    assert saved.influence.coefficients[0][0] == pytest.approx(FAN_H[0][0], rel=0.05)
    # Months later the fan has picked up dirt: a new job goes reference -> correction.
    again = BalanceJob.start(store, saved)
    assert "next step is the correction" in " ".join(again.instructions())
    rotor = LinearRotor(FAN_H, [polar(1900.0, 250.0)], 1470.0, noise_g=0.002)
    assert drive(again, rotor) == ["reference", "correction"]
    assert again.result().passed is True
    assert true_residual_within_grade(saved, rotor, again)


def test_wrong_stored_coefficients_are_refitted_by_trim_runs(store: JobStore) -> None:
    # Stored coefficients 35° and 40 % off (measured at another speed, say): the correction
    # misses, and trim runs, each refitting the coefficients, bring it within the grade.
    wrong = StoredInfluence([[FAN_H[0][0] * polar(0.6, 35.0)]], 1470.0)
    m = fan(influence=wrong, grade="G2.5")
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.0005)
    job = BalanceJob.start(store, m)
    kinds = drive(job, rotor)
    assert kinds[:3] == ["reference", "correction", "trim"]
    assert job.result().passed is True
    assert job.influence is not None
    assert job.influence[0][0] == pytest.approx(FAN_H[0][0], rel=0.05)
    assert true_residual_within_grade(m, rotor, job)


def test_resumed_job_is_in_the_same_state_and_finishes(tmp_path: object) -> None:
    path = f"{tmp_path}/jobs.sqlite"
    rotor = LinearRotor(ROLL_H, [polar(3600.0, 40.0), polar(2800.0, 250.0)], 980.0, noise_g=0.001)
    with JobStore(path) as s1:
        job = BalanceJob.start(s1, roll())
        job.record_run(rotor.reading([]))
        job.set_trial(30.0, 90.0)
        job.record_run(rotor.reading(job.planned_weights()))
        before = (job.step, job.state.plane, job.planned_weights(), job.instructions())
        job_id = job.job_id
    with JobStore(path) as s2:  # the program was killed and started again
        back = BalanceJob.resume(s2, job_id)
        assert (back.step, back.state.plane, back.planned_weights(), back.instructions()) == before
        assert back.runs[1].weights[0].mass_g == 30.0
        drive(back, rotor)
        assert back.result().passed is True
        assert [r.seq for r in s2.runs(job_id)] == list(range(1, len(back.runs) + 1))


def test_every_step_states_the_convention_and_the_cautions(store: JobStore) -> None:
    m = fan(rotation="cw")
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.002)
    job = BalanceJob.start(store, m)
    seen = []
    while job.step != "done":
        text = " ".join(job.instructions())
        seen.append(job.step)
        assert "against the direction of rotation" in text
        if job.step != "reference":
            assert "lock it out" in text and "never above the rated speed" in text
            assert "counter-clockwise (against the direction of rotation)" in text
            assert re.search(r"secure (it )?for \d+ N", text, re.IGNORECASE)
        job.record_run(rotor.reading(job.planned_weights()))
    assert seen == ["reference", "trial", "correction"]
    assert any("lock" in c for c in job.cautions())


def test_a_reading_with_the_wrong_channels_is_refused_and_nothing_is_lost(store: JobStore) -> None:
    rotor1 = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0)
    job = BalanceJob.start(store, roll())
    with pytest.raises(ValueError, match="2 pickups"):
        job.record_run(rotor1.reading([]))
    assert store.runs(job.job_id) == [] and job.step == "reference"


def test_stopping_keeps_the_runs_and_closes_the_job(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0)
    job = BalanceJob.start(store, fan())
    job.record_run(rotor.reading([]))
    job.stop("customer called it off")
    assert job.step == "done" and job.result().status == "stopped"
    rec = store.get_job(job.job_id)
    assert rec is not None and rec.status == "stopped" and len(store.runs(job.job_id)) == 1
    assert BalanceJob.resume(store, job.job_id).step == "done"
    with pytest.raises(ValueError, match="finished"):
        job.record_run(rotor.reading([]))


def test_stock_pieces_are_what_gets_fitted(store: JobStore) -> None:
    m = fan(stock=[StockPiece(1.0, 12), StockPiece(2.0, 12), StockPiece(5.0, 8)])
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.002)
    job = BalanceJob.start(store, m)
    drive(job, rotor)
    assert job.result().passed is True
    for run in job.runs:
        for w in run.weights:
            assert w.mass_g == pytest.approx(round(w.mass_g)), "stock pieces are whole grams here"
            assert any(math.isclose(w.angle_deg, 45.0 * k) for k in range(8)), "weights go in the 8 holes"





def test_pieces_on_the_rotor_never_exceed_the_stock(store: JobStore) -> None:
    # Two planes draw on one small stock; trims (wrong stored coefficients force them) draw on
    # what is left, never on pieces already bolted on.
    stock = [StockPiece(5.0, 6), StockPiece(10.0, 3), StockPiece(2.0, 8)]
    h = [[c * polar(0.8, -20.0) for c in row] for row in ROLL_H]
    m = roll(stock=stock, influence=StoredInfluence(h, 980.0))
    rotor = LinearRotor(ROLL_H, [polar(3600.0, 40.0), polar(2800.0, 250.0)], 980.0, noise_g=0.0005)
    job = BalanceJob.start(store, m)
    drive(job, rotor)
    counts = {p.mass_g: p.count for p in stock}
    for run in job.runs:
        used: dict[float, int] = {}
        for w in run.weights:
            if not w.pieces:  # the stock ran out: exact masses, and the user is told
                assert any("stock cannot make" in x for x in job.state.warnings)
                continue
            assert sum(w.pieces) == pytest.approx(w.mass_g)
            for piece in w.pieces:
                used[piece] = used.get(piece, 0) + 1
        assert all(used[k] <= counts[k] for k in used), f"run {run.seq} uses {used}"


def test_a_run_the_maths_cannot_use_is_kept_and_the_job_waits(store: JobStore) -> None:
    # The second trial run is taken with no weight in plane 2 (forgotten); accepting it anyway
    # leaves the planes inseparable: the engine refuses, the run is kept, the job stays put.
    rotor = LinearRotor(ROLL_H, [polar(3600.0, 40.0), polar(2800.0, 250.0)], 980.0, noise_g=0.001)
    job = BalanceJob.start(store, roll())
    job.record_run(rotor.reading([]))
    job.record_run(rotor.reading(job.planned_weights()))
    assert job.step == "trial" and job.state.plane == 2
    job.record_run(rotor.reading([]), weights_present=[])
    assert job.step == "trial" and job.state.last_trial_check is not None and not job.state.last_trial_check.ok
    job.accept_trial_anyway()
    assert job.step == "trial" and "separate the planes" in job.state.message
    assert len(store.runs(job.job_id)) == 3
    back = BalanceJob.resume(store, job.job_id)
    assert back.step == "trial" and back.state.plane == 2
    drive(back, rotor)
    assert back.result().passed is True


def test_stored_coefficients_of_another_layout_are_refused(store: JobStore) -> None:
    m = roll(influence=StoredInfluence([[2e-4j]], 980.0))  # 1 x 1, but the roll has 2 pickups x 2 planes
    with pytest.raises(ValueError, match="measure them again"):
        BalanceJob.start(store, m)
    assert BalanceJob.start(store, m, use_stored_influence=False).step == "reference"


def test_a_run_at_another_speed_is_flagged(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.002)
    job = BalanceJob.start(store, fan())
    job.record_run(rotor.reading([]))
    rotor.speed_rpm = 1300.0  # the belt slipped
    job.record_run(rotor.reading(job.planned_weights()))
    assert any("1300 rpm" in w and "same speed" in w for w in job.state.warnings)


def test_a_repeated_trial_from_stock_is_never_lighter_than_asked(store: JobStore) -> None:
    # One weight per hole, pieces of 1 g and 3 g: a trial 1.5 times 1 g is nearer 1 g than 3 g,
    # but a repeat of a trial that was too small must not be as small again: 3 g.
    m = Machine("fan 1", 14.0, 1470.0, [PlaneSpec(160.0, count=8, max_pieces_per_position=1)],
                stock=[StockPiece(1.0, 10), StockPiece(3.0, 3)])
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.003)
    job = BalanceJob.start(store, m)
    job.record_run(rotor.reading([]))
    job.set_trial(1.0, 0.0)
    job.record_run(rotor.reading(job.planned_weights()))
    chk = job.state.last_trial_check
    assert chk is not None and not chk.ok and chk.suggested_scale * 1.2 < 2.0
    again = job.suggested_trial()
    assert again is not None and again.pieces == (3.0,)


def test_nonsense_readings_and_weights_are_refused_before_anything_is_written(store: JobStore) -> None:
    from runtrue.jobs import RunReading, Weight

    job = BalanceJob.start(store, fan())
    from runtrue.jobs import ChannelValue

    with pytest.raises(ValueError, match="amplitude must be"):
        RunReading.manual([float("nan")], [10.0], 1470.0)
    with pytest.raises(ValueError, match="not a number"):
        job.record_run(RunReading(1470.0, (ChannelValue(complex(float("nan"), 0.0)),)))
    with pytest.raises(ValueError, match="speed"):
        job.record_run(RunReading.manual([0.4], [10.0], 0.0))
    with pytest.raises(ValueError, match="mass"):
        job.record_run(RunReading.manual([0.4], [10.0], 1470.0), weights_present=[Weight(1, -3.0, 0.0, 160.0)])
    assert store.runs(job.job_id) == []


def test_weights_left_by_the_last_job_are_offered_and_can_stay_or_be_combined(store: JobStore) -> None:
    """The repeat job on a machine: what the last job left on the rotor is known; kept on, the
    reference run includes it; combined, the correction replaces it with fewer pieces."""
    from runtrue.jobs.report import render_html
    from runtrue.jobs.weights import weights_left_on

    m = fan(stock=[StockPiece(1.0, 12), StockPiece(2.0, 12), StockPiece(5.0, 8), StockPiece(10.0, 4)])
    m.id = store.save_machine(m)
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0)
    first = BalanceJob.start(store, m)
    drive(first, rotor)
    left = weights_left_on(store, m)
    assert left is not None and left[0] == first.job_id
    on_rotor = left[2]
    assert on_rotor == list(first.runs[-1].weights) and on_rotor
    # the machine later picks up more unbalance elsewhere: the repeat job
    rotor.u0 = [rotor.u0[0] + polar(900.0, 300.0)]
    m2 = store.get_machine(m.id)
    for combine in (False, True):
        job = BalanceJob.start(store, m2, weights_at_start=on_rotor, combine_at_start=combine)
        assert "left by the last job still on" in " ".join(job.instructions())
        assert job.planned_weights() == on_rotor
        kinds = drive(job, rotor)
        assert kinds[0] == "reference" and job.result().passed is True
        assert true_residual_within_grade(m2, rotor, job)
        first_correction = next(r for r in job.runs if r.kind == "correction")
        still_on = [w for w in first_correction.weights if w in on_rotor]
        assert (still_on == []) if combine else (still_on == on_rotor)
        html = render_html(store, job.job_id)
        assert "already on the rotor" in html and "On the rotor at the end" in html


def test_a_weight_left_on_at_the_wrong_place_is_moved_where_the_correction_needs_it(store: JobStore) -> None:
    """Move: the last job's 10 g sits at position 1 (0°); the rotor now needs 10 g at position 3
    (90°) and the stock has only two 1 g pieces: the correction moves the old weight there
    (the allocator's refitting of weights already on) and the job passes."""
    from runtrue.jobs.model import Weight

    m = fan(stock=[StockPiece(1.0, 2)])
    old = Weight(1, 10.0, 0.0, 160.0, "left by job 1")
    rotor = LinearRotor(FAN_H, [polar(1600.0, 270.0)], 1470.0)
    # the rotor's own unbalance is 1600 g·mm at 270°: 10 g at 90° (position 3) cancels it
    job = BalanceJob.start(store, m, weights_at_start=[old], move_at_start=True)
    assert job.options["move_at_start"] is True and job.planned_weights() == [old]
    while job.step != "correction":
        job.record_run(rotor.reading(job.planned_weights()))
        assert len(job.runs) < 6
    plan = job.state.plan
    assert old in plan.remove                                     # off position 1 ...
    moved = [w for w in plan.weights_to_fit() if "moved here" in w.label]
    assert moved and moved[0].angle_deg == pytest.approx(90.0)    # ... onto position 3
    assert "10.0 g from position 1 moved here" in moved[0].label
    assert any("moved here" in row.what for pc in plan.planes for row in pc.sheet)
    assert old not in job.planned_weights()
    drive(job, rotor)
    assert job.result().passed is True and true_residual_within_grade(m, rotor, job)
    # a resumed job plans the same move
    again = BalanceJob.resume(store, job.job_id)
    assert again.result().passed is True


def test_weights_left_on_are_combined_or_moved_not_both(store: JobStore) -> None:
    from runtrue.jobs.model import Weight

    with pytest.raises(ValueError, match="not both"):
        BalanceJob.start(store, fan(), weights_at_start=[Weight(1, 10.0, 0.0, 160.0)],
                         combine_at_start=True, move_at_start=True)
