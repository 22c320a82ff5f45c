"""Safety kept by the workflow: the force limit on weights and the rated speed of the machine
(invented machines and readings)."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from jobs_fakes import LinearRotor, polar

from runtrue.jobs import BalanceJob, JobStore, Machine, PlaneSpec
from runtrue.jobs.limits import ForceLimitExceeded, OverSpeed, force_limit_basis, force_limit_n

FAN_H = [[polar(2.0e-4, 63.0)]]


def fan(**kw: object) -> Machine:
    return Machine("fan 1", 14.0, 1470.0, [PlaneSpec(160.0, count=8)], **kw)  # type: ignore[arg-type]


@pytest.fixture
def store() -> Iterator[JobStore]:
    s = JobStore(":memory:")
    yield s
    s.close()


def test_the_force_limit_is_thirty_percent_of_the_rotor_weight_and_says_it_is_our_figure() -> None:
    m = fan()
    assert force_limit_n(m) == pytest.approx(0.3 * 14.0 * 9.80665)
    basis = force_limit_basis(m)
    assert "41.2 N" in basis and "30 %" in basis and "not from a standard" in basis
    assert "our choice" not in basis


def test_a_typed_trial_above_the_force_limit_needs_confirmation(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0)
    job = BalanceJob.start(store, fan())
    job.record_run(rotor.reading([]))
    with pytest.raises(ForceLimitExceeded) as err:
        job.set_trial(20.0, 0.0)  # 20 g at 160 mm, 1470 rpm: about 76 N, 1.8 times the 41 N limit
    assert err.value.multiple == pytest.approx(err.value.force_n / force_limit_n(job.machine))
    assert err.value.multiple > 1.5
    assert job.suggested_trial() is not None and job.suggested_trial().mass_g < 20.0  # nothing changed
    job.set_trial(20.0, 0.0, confirm_over_limit=True)
    assert job.suggested_trial().mass_g == 20.0
    assert job.forces_confirmed  # the confirmation covers the run that fits it


def test_a_larger_trial_after_a_weak_one_never_exceeds_the_limit_silently(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1470.0, noise_g=0.05)
    job = BalanceJob.start(store, fan())
    job.record_run(rotor.reading([]))
    job.set_trial(8.0, 0.0)  # 30 N: under the limit, but lost in 0.05 g of scatter
    job.record_run(rotor.reading(job.planned_weights()))
    assert job.step == "trial" and not job.state.last_trial_check.ok
    again = job.suggested_trial()
    limit = force_limit_n(job.machine)
    over = job.weights_over_limit()
    if over:  # the stock could only make a little more than the limit: it must be confirmed
        assert not job.forces_confirmed
    else:
        assert job.force_n(again) <= limit + 1e-9
    assert "force limit" in job.state.message


def test_a_correction_above_the_limit_is_listed_for_confirmation(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, [polar(30000.0, 117.0)], 1470.0)  # a badly unbalanced rotor
    job = BalanceJob.start(store, fan())
    job.record_run(rotor.reading([]))
    job.record_run(rotor.reading(job.planned_weights()))
    assert job.step == "correction"
    over = job.weights_over_limit()
    assert over and all(c.multiple > 1 for c in over)
    assert not job.forces_confirmed
    job.confirm_forces()
    assert job.forces_confirmed
    resumed = BalanceJob.resume(store, job.job_id)  # the confirmation is recorded with the job
    assert resumed.forces_confirmed


def test_a_run_above_the_rated_speed_is_refused_unless_confirmed(store: JobStore) -> None:
    rotor = LinearRotor(FAN_H, [polar(2400.0, 117.0)], 1510.0)
    job = BalanceJob.start(store, fan(rated_speed_rpm=1500.0))
    with pytest.raises(OverSpeed):
        job.record_run(rotor.reading([]))
    assert job.runs == [] and store.runs(job.job_id) == []
    run = job.record_run(rotor.reading([]), over_speed_confirmed=True)
    assert "above the rated speed" in run.note


def test_a_machine_cannot_be_described_running_above_its_rated_speed() -> None:
    with pytest.raises(ValueError, match="above the rated speed"):
        fan(rated_speed_rpm=1000.0)
    m = fan(rated_speed_rpm=1500.0)
    assert Machine.from_dict(m.to_dict()).rated_speed_rpm == 1500.0
    assert Machine.from_dict({k: v for k, v in m.to_dict().items() if k != "rated_speed_rpm"}).rated_speed_rpm is None


def test_a_correction_the_stock_cannot_make_is_predicted_not_to_pass_at_the_top(store: JobStore) -> None:
    from runtrue.jobs import StockPiece

    # only 20 g pieces for a fan whose correction is a few grams: the pieces cannot reach the grade
    m = fan(stock=[StockPiece(20.0, 2)], grade="G1")
    rotor = LinearRotor(FAN_H, [polar(700.0, 117.0)], 1470.0)
    job = BalanceJob.start(store, m)
    job.record_run(rotor.reading([]))
    job.set_trial(4.0, 0.0)
    job.record_run(rotor.reading(job.planned_weights()))
    assert job.step == "correction"
    poor = job.poor_prediction()
    assert poor.startswith("PREDICTED NOT TO PASS") and "stock" in poor
    assert job.instructions()[0] == poor
