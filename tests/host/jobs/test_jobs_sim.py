"""The workflow on the simulator (real firmware behind the link, weights fitted by geometry)."""

from __future__ import annotations

import pytest

from runtrue.jobs import JobStore
from runtrue.jobs.demo_machine import machine_for_scenario
from runtrue.jobs.headless import run_demo


@pytest.mark.slow
def test_two_plane_roll_with_trials_left_on_is_balanced() -> None:
    out = run_demo("roller", 11, trial_removed=False)
    d = out.to_json()
    assert d["passed"] is True
    assert all(t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
    # the trials were never taken off: the correction was net of them
    assert sum(w["label"].startswith("trial") for w in d["weights_fitted"]) == 2


@pytest.mark.slow
def test_second_balance_of_a_saved_machine_takes_one_run() -> None:
    with JobStore(":memory:") as store:
        machine = machine_for_scenario("fan")
        store.save_machine(machine)
        first = run_demo("fan", 21, store=store, machine=machine)
        assert first.to_json()["passed"] is True
        saved = store.get_machine(machine.id)  # type: ignore[arg-type]
        assert saved is not None and saved.influence is not None
        # Same fan, a new day (the simulator starts again from its as-found unbalance).
        again = run_demo("fan", 22, store=store, machine=saved).to_json()
        assert again["run_kinds"] == ["reference", "correction"]
        assert again["passed"] is True
        assert all(t <= p for t, p in zip(again["true_residual_unbalance_gmm"], again["permissible_unbalance_gmm"]))
        assert [j.id for j in store.machine_history(saved.id)] == [again["job_id"], first.job.job_id]  # type: ignore[arg-type]
        assert len(store.trend(saved.id)) == 2  # type: ignore[arg-type]


def test_scenario_machines_describe_the_virtual_rotor() -> None:
    from runtrue.sim.scenarios import SCENARIOS

    for name, sc in SCENARIOS.items():
        m = machine_for_scenario(name)
        assert m.n_planes == len(sc.planes) and m.n_pickups == len(sc.pickups)
        assert [p.radius_mm for p in m.planes] == [p.radius_mm for p in sc.planes]
        assert m.speed_rpm == sc.speed_rpm and m.rotor_mass_kg == sc.rotor_mass_kg
        assert m.stock, "every demo scenario has a shop stock"
