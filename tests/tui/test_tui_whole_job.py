"""A whole balancing job driven through the application with the keyboard, on the simulator
(the real firmware logic on a virtual machine, running faster than real time): connect,
describe the machine, reference, trial(s), correction, trims, result and report.

The application fits each weight to the virtual rotor by its geometry (plane, mass, angle from
the mark against rotation, radius), so a wrong angle convention anywhere shows up here as
vibration that does not drop.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from tui_helpers import key, screen_name, screen_text, wait_until

from runtrue.tui import make_app
from runtrue.tui.unbalance_split import static_couple_lines

MAX_RUNS = 8


@pytest.mark.parametrize("scenario, seed", [("fan", 7), ("roller", 3)])
async def test_whole_job_on_the_simulator_meets_the_grade(scenario: str, seed: int, tmp_path: Path) -> None:
    app = make_app(f"sim:{scenario}", seed=seed, realtime=False, revs_per_reading=24,
                   post_interval_s=0.05, report_dir=str(tmp_path), max_revs_per_s=400)
    async with app.run_test(size=(80, 24)) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="simulator connected")
        await key(pilot, "n")
        await wait_until(pilot, lambda: screen_name(app) == "MachineScreen", what="machine screen")
        await key(pilot, "f2")  # the simulated machine's description is filled in
        await wait_until(pilot, lambda: screen_name(app) == "RunsScreen", what="job started")
        job = app.session.job
        split_seen = False
        for _ in range(MAX_RUNS):
            if screen_name(app) != "RunsScreen":
                break
            n_runs = len(job.runs)
            if job.machine.n_planes == 2 and job.state.step in ("correction", "trim"):
                # the technician's check: the two-plane correction split into static and couple
                split = static_couple_lines(job.state.plan)
                await wait_until(pilot, lambda split=split: split[0] in screen_text(app), what="static/couple shown")
                text = screen_text(app)
                assert all(line in text for line in split)
                split_seen = True
            await key(pilot, "r")
            await wait_until(pilot, lambda: screen_name(app) == "LiveScreen", what="live readings")
            await wait_until(pilot, lambda n_runs=n_runs: len(job.runs) > n_runs, timeout_s=30, what="reading taken")
            await wait_until(pilot, lambda: screen_name(app) != "LiveScreen", what="back from live")
        await wait_until(pilot, lambda: screen_name(app) == "ResultScreen", what="result")
        assert split_seen == (job.machine.n_planes == 2)
        result = job.result()
        kinds = [r.kind for r in job.runs]
        assert kinds[0] == "reference" and "trial" in kinds and kinds[-1] in ("correction", "trim")
        assert result.passed is True
        await wait_until(pilot, lambda: "PASS" in screen_text(app), what="PASS shown")
        # what the simulator knows is left on the rotor, per plane, is within the grade too
        rotor = app.session.link.client.transport.machine
        true_residual = rotor.true_residual_unbalance_gmm()
        for left, allowed in zip(true_residual, result.permissible_unbalance_gmm):
            assert left <= allowed
        # and the vibration really dropped at every pickup
        for ch in result.channels:
            assert abs(ch.after) < 0.3 * abs(ch.before)
        await key(pilot, "h")
        await wait_until(pilot, lambda: bool(list(tmp_path.glob("*.html"))), what="report written")


async def test_a_one_plane_job_with_the_fitting_list_takes_at_most_twelve_keys(tmp_path: Path) -> None:
    """The technician's way on the simulated fan: n (machine), F2 (start), r (reference, taken
    when steady), then for each run f (fitting list), Space per item (ticks and moves down), r
    (run, taken when steady); y where a weight over the force limit must be confirmed."""
    app = make_app("sim:fan", seed=7, realtime=False, revs_per_reading=24, post_interval_s=0.05,
                   report_dir=str(tmp_path), max_revs_per_s=400, store_path=str(tmp_path / "db.sqlite"))
    keys: list[str] = []

    async def press(name: str) -> None:
        keys.append(name)
        await key(pilot, name)

    async with app.run_test(size=(80, 24)) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="simulator connected")
        await press("n")
        await wait_until(pilot, lambda: screen_name(app) == "MachineScreen", what="machine screen")
        await press("f2")
        await wait_until(pilot, lambda: screen_name(app) == "RunsScreen", what="job started")
        job = app.session.job
        await press("r")
        await wait_until(pilot, lambda: len(job.runs) == 1, timeout_s=30, what="reference taken")
        for _ in range(4):
            await wait_until(pilot, lambda: screen_name(app) in ("RunsScreen", "ResultScreen"), what="back")
            if screen_name(app) == "ResultScreen":
                break
            n_runs = len(job.runs)
            await press("f")
            await wait_until(pilot, lambda: hasattr(app.screen, "items"), what="fitting list")
            for _item in app.screen.items:
                await press("space")
            await press("r")
            await pilot.pause(0.2)
            if screen_name(app) == "ConfirmDialog":
                await press("y")
            await wait_until(pilot, lambda n_runs=n_runs: len(job.runs) > n_runs, timeout_s=30, what="run taken")
        await wait_until(pilot, lambda: screen_name(app) == "ResultScreen", what="result")
        assert job.result().passed is True
        assert len(keys) <= 12, keys
