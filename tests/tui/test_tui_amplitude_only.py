"""Amplitude-only (four-run) jobs in the application, and the static/couple view of a two-plane
correction.

The four-run method (reference run, one trial weight at three angles, correction, check) is
``runtrue.jobs.method_four_run``; the application chooses it with F7 on the machine screen when the
rotor has no usable reference mark.  The whole job runs on the simulator, whose virtual rotor
carries each weight by its geometry, so the simulator's own residual unbalance is the check.
"""

from __future__ import annotations

from pathlib import Path

from textual.widgets import Input, OptionList
from tui_helpers import FAN_FIELDS, fill, key, screen_name, screen_text, wait_until

from runtrue.tui import make_app
from runtrue.tui.screens.runs import RunsScreen

SIZE = (80, 24)
MAX_RUNS = 14  # one four-run cycle is 5 runs; a weak trial repeats its 3 runs; a second cycle is 4 more


async def test_whole_amplitude_only_job_on_the_simulated_fan_meets_the_grade(tmp_path: Path) -> None:
    app = make_app("sim:fan", seed=5, realtime=False, revs_per_reading=24,
                   post_interval_s=0.05, report_dir=str(tmp_path), max_revs_per_s=400)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="simulator connected")
        await key(pilot, "n")
        await wait_until(pilot, lambda: screen_name(app) == "MachineScreen", what="machine screen")
        await key(pilot, "f7")  # no reference mark
        await wait_until(pilot, lambda: app.amplitude_only, what="amplitude-only chosen")
        await wait_until(pilot, lambda: "amplitude-only (four-run)" in screen_text(app), what="method shown")
        await key(pilot, "f2")
        await wait_until(pilot, lambda: screen_name(app) == "RunsScreen", what="job started")
        job = app.session.job
        assert job.state.method == "four-run"
        runs_screen = app.screen
        assert isinstance(runs_screen, RunsScreen)
        await wait_until(pilot, lambda: "chalk" in runs_screen.todo_text.lower(), what="chalk mark instructions")
        # the step bar shows the three trial runs
        await wait_until(pilot, lambda: "trial 3" in screen_text(app), what="four-run steps")
        saw_live_amplitude_view = False
        for _ in range(MAX_RUNS):
            if screen_name(app) != "RunsScreen":
                break
            n_runs = len(job.runs)
            if job.state.step == "trial":
                assert f"trial run {job.state.trial_number} of 3" in runs_screen.todo_text
            await key(pilot, "r")
            await wait_until(pilot, lambda: screen_name(app) == "LiveScreen", what="live readings")
            if not saw_live_amplitude_view:
                await wait_until(pilot, lambda: "phase not used" in screen_text(app), what="live amplitudes")
                text = screen_text(app)
                assert "phase not used" in text and "mm/s rms" in text
                saw_live_amplitude_view = True
            await wait_until(pilot, lambda n_runs=n_runs: len(job.runs) > n_runs, timeout_s=30, what="reading taken")
            await wait_until(pilot, lambda: screen_name(app) != "LiveScreen", what="back from live")
        await wait_until(pilot, lambda: screen_name(app) == "ResultScreen", what="result")
        kinds = [r.kind for r in job.runs]
        # reference, the trial weight at three angles (again, larger, if its effect was too
        # small to trust), the correction's check run, and any further cycles
        n_trials = kinds.index("correction") - 1
        assert kinds[0] == "reference" and n_trials in (3, 6)
        assert kinds[1 : 1 + n_trials] == ["trial"] * n_trials
        # every recorded reading is an amplitude without phase
        assert all(not r.reading.has_phase for r in job.runs)
        result = job.result()
        assert result.method == "four-run" and result.passed is True
        await wait_until(pilot, lambda: "PASS: estimated residual" in screen_text(app), what="PASS shown")
        assert "four-run" in screen_text(app)
        # what the simulator knows is left on the rotor is within the grade
        rotor = app.session.link.client.transport.machine
        left = rotor.true_residual_unbalance_gmm()[0]
        assert left <= result.permissible_unbalance_gmm[0]
        assert abs(result.channels[0].after) < 0.3 * abs(result.channels[0].before)


async def test_amplitude_only_is_refused_for_two_planes() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, {**FAN_FIELDS, "planes": "2"})
        await pilot.press("f7")
        assert app.amplitude_only is False
        assert any("one plane only" in n.message for n in app._notifications)
        # chosen for one plane, then the form says two: the job is not started
        app.screen.query_one("#f_planes", Input).value = "1"
        await pilot.press("f7")
        assert app.amplitude_only is True
        app.screen.query_one("#f_planes", Input).value = "2"
        await pilot.press("f2")
        assert screen_name(app) == "MachineScreen" and app.session.job is None


async def test_typed_amplitudes_without_phase_and_resume_from_the_machine_screen(tmp_path: Path) -> None:
    db = str(tmp_path / "jobs.sqlite")
    app = make_app("manual", store_path=db)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f7", "f2", "r")
        form = app.screen
        assert type(form).__name__ == "ManualReadingForm"
        assert not form.query("#phase0")  # no phase is asked for
        fill(form, {"speed": "1470", "amp0": "0.48"}, prefix="#")
        await pilot.press("enter")
        job = app.session.job
        assert job.state.step == "trial" and job.state.trial_number == 1
        await pilot.press("r")
        fill(app.screen, {"speed": "1470", "amp0": "0.61"}, prefix="#")
        await pilot.press("enter")
        assert job.state.trial_number == 2
        assert not job.runs[0].reading.has_phase
        # fitting: the trial weight moves from the first angle to the second, from the chalk mark
        await pilot.press("f")
        text = screen_text(app)
        second = job.state.trial_angles_deg[1]
        assert "CHALK" in text and "chalk mark" in text and "TAKE OFF" in text and f"at {second:.1f}" in text
        await pilot.press("escape")
        job_id = job.job_id
    app = make_app("manual", store_path=db)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        ol = app.screen.query_one("#machines", OptionList)
        assert "4-run" in str(ol.get_option(f"j{job_id}").prompt)  # the list says which method
        ol.focus()
        ol.highlighted = ol.get_option_index(f"j{job_id}")
        await pilot.press("enter")
        assert screen_name(app) == "RunsScreen"
        job = app.session.job
        assert job.job_id == job_id and job.state.method == "four-run"
        assert job.state.step == "trial" and job.state.trial_number == 2
        text = screen_text(app)
        from runtrue.readings.numbers import vib_number

        speed = job.runs[0].reading.speed_rpm  # the runs pane shows 1x in mm/s rms
        assert vib_number(0.48, speed) in text and vib_number(0.61, speed) in text and "trial 2" in text
        assert isinstance(app.screen, RunsScreen) and "trial run 2 of 3" in app.screen.todo_text
        # lock-out is said once on the screen: in the bottom line, not again in the instructions
        assert "lock it out" not in app.screen.todo_text.lower()
        text = screen_text(app).lower()
        assert text.count("lock out") + text.count("lock it out") == 1
        # the second trial run, typed, and the job goes on to the third
        await pilot.press("r")
        fill(app.screen, {"speed": "1470", "amp0": "0.33"}, prefix="#")
        await pilot.press("enter")
        assert len(job.runs) == 3 and job.state.trial_number == 3
