"""Each screen driven with Textual's pilot at 80x24."""

from __future__ import annotations

import cmath
import math
from pathlib import Path
from typing import Any

import pytest
from textual.widgets import Input, OptionList
from tui_fakes import FakeRotor, fake_opener
from tui_helpers import FAN_FIELDS, fill, key, screen_name, screen_text, wait_until

from runtrue.tui import make_app

SIZE = (80, 24)


async def test_connect_lists_simulated_machines_and_manual_entry() -> None:
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        ol = app.screen.query_one("#sources", OptionList)
        await wait_until(pilot, lambda: ol.option_count > 3, what="sources listed")
        text = screen_text(app)
        assert "fan:" in text and "roller:" in text and "manual entry" in text
        ol.highlighted = ol.get_option_index("manual")
        await pilot.press("enter")
        assert app.session.port == "manual"
        assert "Manual entry" in screen_text(app)
        await pilot.press("n")
        assert screen_name(app) == "MachineScreen"


async def test_connect_shows_device_self_test_and_signal_check(monkeypatch: pytest.MonkeyPatch) -> None:
    import runtrue.tui.screens.connect as connect

    monkeypatch.setattr(connect, "CHECK_S", 0.2)
    app = make_app("sim:fan", seed=1, realtime=False, max_revs_per_s=300, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="connected")
        await key(pilot, "t")
        await wait_until(pilot, lambda: app.session.self_test is not None, what="self-test")
        await wait_until(pilot, lambda: "usable" in screen_text(app), what="signal check")
        text = screen_text(app)
        assert "board    sim" in text
        assert "Self-test PASSED" in text and "reference" in text
        assert "rpm" in text and "rest" in text
        await wait_until(pilot, lambda: not app.session.link.streaming, what="streaming stopped")


async def test_machine_form_names_the_wrong_field_and_starts_a_job() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        screen = app.screen
        fill(screen, dict(FAN_FIELDS, mass="heavy"))
        await pilot.press("f2")
        assert screen_name(app) == "MachineScreen"
        assert app.focused is screen.query_one("#f_mass", Input)
        assert app.session.job is None
        fill(screen, {"mass": "14"})
        await pilot.pause()
        assert "Permissible residual unbalance" in screen_text(app)
        await pilot.press("f2")
        await pilot.pause()
        assert screen_name(app) == "RunsScreen"
        job = app.session.job
        assert job is not None and job.state.step == "reference"
        assert app.session.store.get_machine("Boiler-house fan 2") is not None


async def test_grade_table_picks_a_grade() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n", "f3")
        assert "ISO 21940-11:2016" in screen_text(app)
        await pilot.press(*["down"] * 7, "enter")  # 8th row: motors above 950 rpm
        assert app.screen.query_one("#f_grade", Input).value == "G2.5"


async def test_live_screen_shows_readings_and_takes_one(tmp_path: Path) -> None:
    app = make_app("sim:fake", opener=fake_opener(), realtime=False, revs_per_reading=12,
                   post_interval_s=0.05, report_dir=str(tmp_path))
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected")
        from runtrue.tui.screens.live import LiveScreen

        taken: list[Any] = []
        app.push_screen(LiveScreen("test"), taken.append)
        await wait_until(pilot, lambda: app.session.live.total_revs > 20, what="revolutions")
        await pilot.pause(0.3)
        text = screen_text(app)
        assert "rpm" in text and "mm/s rms" in text and "phase" in text
        assert "0\N{DEGREE SIGN} up, lag cw" in text
        await key(pilot, "space")
        await wait_until(pilot, lambda: bool(taken), what="reading taken")
        reading = taken[0]
        expected = FakeRotor().expected_1x()[0]
        assert reading.n_revs == 12
        assert abs(reading.channels[0].mean - expected) < 0.01


def _typed(app: object, amp: float, phase: float) -> dict[str, str]:
    return {"speed": "1470", "amp0": f"{amp:.5f}", "phase0": f"{phase:.3f}"}


async def test_manual_job_reference_trial_correction_result(tmp_path: Path) -> None:
    """Readings typed in from another instrument, on a linear rotor we know: the correction the
    application asks for is the one that cancels the unbalance."""
    rotor = FakeRotor()
    influence = rotor.influence[0][0]
    u0 = rotor.initial_gmm[0]

    def reading_for(weights: list[complex]) -> tuple[float, float]:
        v = influence * (u0 + sum(weights))
        return abs(v), math.degrees(cmath.phase(v)) % 360

    app = make_app("manual", report_dir=str(tmp_path))
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2")
        assert "Reference run" in screen_text(app)
        # reference
        await pilot.press("r")
        fill(app.screen, _typed(app, *reading_for([])), prefix="#")
        await pilot.press("enter")
        job = app.session.job
        assert job.state.step == "trial"
        trial = job.suggested_trial()
        # fitting screen: the trial weight with its force
        await pilot.press("f")
        text = screen_text(app)
        assert "FIT" in text and "secure for" in text and "MARK" in text
        await pilot.press("space")  # tick it off
        assert app.ticked
        await pilot.press("escape")
        # trial run
        await pilot.press("r")
        fill(app.screen, _typed(app, *reading_for([trial.unbalance_gmm])), prefix="#")
        await pilot.press("enter")
        assert job.state.step == "correction", screen_text(app)
        plan = job.state.plan
        fitted = sum(w.unbalance_gmm for w in plan.weights_to_fit())
        # the allocation cancels the unbalance within its stated residual (plus the rounding of
        # the typed readings: 5 decimals of amplitude, 3 of phase)
        assert abs(u0 + fitted) <= plan.planes[0].residual_gmm + 0.01 * abs(u0)
        assert abs(u0 + fitted) < 0.05 * abs(u0)
        assert "Correction" in screen_text(app)
        # what the runs screen says the pieces will leave is what the linear rotor then reads
        from runtrue.tui.screens.runs import expected_after_fitting

        expected = expected_after_fitting(job)[0]
        actual = influence * (u0 + fitted)
        assert abs(expected - actual) < 0.02 * abs(influence * u0)
        # correction run: the allocated weights (trial removed)
        await pilot.press("r")
        if job.weights_over_limit():  # a correction pulling over the force limit is confirmed first
            assert screen_name(app) == "ConfirmDialog" and "x the limit" in screen_text(app)
            await pilot.press("y")
        fill(app.screen, _typed(app, *reading_for([fitted])), prefix="#")
        await pilot.press("enter")
        await pilot.pause()
        assert screen_name(app) == "ResultScreen"
        text = screen_text(app)
        assert "PASS" in text and "permissible" in text
        await pilot.press("h", "e")
        names = sorted(p.name for p in tmp_path.iterdir())
        assert any(n.endswith(".html") for n in names)
        assert any(n.endswith("-runs.csv") for n in names) and any(n.endswith(".json") for n in names)
        html = next(tmp_path.glob("*.html")).read_text()
        assert "Boiler-house fan 2" in html


async def test_bad_typed_reading_is_refused_and_nothing_is_lost() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "lots", "phase0": "10"}, prefix="#")
        await pilot.press("enter")
        assert screen_name(app) == "ManualReadingForm"
        await pilot.press("escape")
        assert app.session.job.runs == []
        assert app.session.job.state.step == "reference"


async def test_pulled_cable_shows_a_message_keeps_the_job_and_reconnects() -> None:
    rotor = FakeRotor()
    opened: list[object] = []

    def opener(port: str, seed: object = None, realtime: bool = False) -> object:
        from tui_fakes import FakeMeter

        m = FakeMeter(rotor)
        if not opened:
            m.fail_after = 40
        opened.append(m)
        return m

    # a reading longer than the cable lasts: it is still being taken when the cable is pulled
    app = make_app("sim:fake", opener=opener, realtime=False, revs_per_reading=48, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected")
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2")
        await key(pilot, "r")
        await wait_until(pilot, lambda: "LOST" in app.session.meter_state, what="cable pulled")
        assert "LOST" in screen_text(app)
        assert app.session.job is not None and app.session.job.state.step == "reference"
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="reconnected")
        await key(pilot, "space")
        await wait_until(pilot, lambda: app.session.job.runs != [], what="reading after reconnect")
        assert app.session.job.state.step == "trial"


async def test_saved_machine_keeps_its_coefficients_and_goes_straight_to_the_correction(tmp_path: Path) -> None:
    rotor = FakeRotor()
    influence, u0 = rotor.influence[0][0], rotor.initial_gmm[0]

    def typed(total_gmm: complex) -> dict[str, str]:
        v = influence * total_gmm
        return {"speed": "1470", "amp0": f"{abs(v):.5f}", "phase0": f"{math.degrees(cmath.phase(v)) % 360:.3f}"}

    app = make_app("manual", report_dir=str(tmp_path))
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2")
        job = app.session.job
        for _ in range(5):  # reference, trial, correction (and trims if needed)
            if job.state.step == "done":
                break
            total = u0 + sum(w.unbalance_gmm for w in job.planned_weights())
            await pilot.press("r")
            if screen_name(app) == "ConfirmDialog":  # a correction over the force limit
                await pilot.press("y")
            fill(app.screen, typed(total), prefix="#")
            await pilot.press("enter")
        assert job.result().passed
        # the next job on the same machine: pick it from the saved list
        await pilot.press("n")
        assert screen_name(app) == "MachineScreen"
        ol = app.screen.query_one("#machines", OptionList)
        saved = next(i for i in range(ol.option_count) if "Boiler-house fan 2" in str(ol.get_option_at_index(i).prompt))
        assert str(ol.get_option_at_index(saved).prompt).endswith("*")  # has stored coefficients
        ol.focus()
        ol.highlighted = saved
        await pilot.press("enter")
        assert "Stored influence coefficients" in screen_text(app), screen_text(app)
        await pilot.press("f6")  # the machine's history: the job just done, and its coefficients
        text = screen_text(app)
        assert "passed" in text and "Kept from job 1" in text
        await pilot.press("escape")
        await pilot.press("f2")
        # the weights the first job left are offered: still on, combine, or taken off
        assert screen_name(app) == "WeightsLeftDialog"
        text = screen_text(app)
        assert "Job 1" in text and "left these on the rotor" in text and "position" in text
        assert "m: still on, the correction may move them" in text
        await pilot.press("k")
        job2 = app.session.job
        assert job2 is not job and job2.planned_weights() == list(job.runs[-1].weights)
        assert "left by the last job still on" in app.screen.todo_text
        await pilot.press("r")
        fill(app.screen, typed(u0 + 1500), prefix="#")  # the machine has changed since
        await pilot.press("enter")
        assert job2.state.step == "correction"
        assert [r.kind for r in job2.runs] == ["reference"]


async def test_typed_velocity_reading_is_converted_to_g() -> None:
    """1x velocity typed in mm/s: a = v * omega, and the acceleration leads by 90 deg (its lag is
    90 deg less) - the integration rule for a sinusoid."""
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "unit": "mm/s", "amp0": "10", "phase0": "120"}, prefix="#")
        await pilot.press("enter")
        ch = app.session.job.runs[0].reading.channels[0]
        omega = 2 * math.pi * 1470 / 60
        assert ch.amp_g == pytest.approx(10e-3 * omega / 9.80665, rel=1e-4)
        assert ch.phase_deg == pytest.approx(30.0, abs=1e-6)
        assert app.session.manual_unit == "mm/s"


async def test_an_interrupted_job_resumes_with_its_runs(tmp_path: Path) -> None:
    db = str(tmp_path / "jobs.sqlite")
    app = make_app("manual", store_path=db)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "0.48", "phase0": "152"}, prefix="#")
        await pilot.press("enter")
        job_id = app.session.job.job_id
    # a new session (the first one was closed mid-job): the job is offered for resuming
    app = make_app("manual", store_path=db)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        ol = app.screen.query_one("#machines", OptionList)
        index = ol.get_option_index(f"j{job_id}")
        ol.focus()
        ol.highlighted = index
        await pilot.press("enter")
        assert screen_name(app) == "RunsScreen"
        job = app.session.job
        assert job.job_id == job_id and [r.kind for r in job.runs] == ["reference"]
        assert job.state.step == "trial"
        from runtrue.readings.numbers import vib_number

        assert vib_number(0.48, job.runs[0].reading.speed_rpm) in screen_text(app)  # 1x in mm/s rms


async def test_live_view_from_connect_only_looks() -> None:
    app = make_app("sim:fake", opener=fake_opener(), realtime=False, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected")
        await key(pilot, "l")
        await wait_until(pilot, lambda: app.session.live.total_revs > 10, what="revolutions")
        await wait_until(pilot, lambda: "Looking only" in screen_text(app), what="live view")
        assert "Take reading" not in screen_text(app)
        await key(pilot, "escape")
        await wait_until(pilot, lambda: screen_name(app) == "ConnectScreen", what="back")
        await wait_until(pilot, lambda: not app.session.link.streaming, what="streaming stopped")


async def test_choose_the_trial_weight_then_stop_the_job() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "0.48", "phase0": "152"}, prefix="#")
        await pilot.press("enter", "w")
        fill(app.screen, {"mass": "12", "angle": "45"}, prefix="#")
        await pilot.press("enter")
        assert screen_name(app) == "ConfirmDialog"  # 12 g pulls 45 N, over the fan's 41 N force limit
        await pilot.press("y")
        trial = app.session.job.suggested_trial()
        assert (trial.mass_g, trial.angle_deg) == (12, 45)
        todo = str(app.screen.query_one("#todo").render())
        assert "Fit 12.0 g at position 2 (45.0\N{DEGREE SIGN})" in todo
        await pilot.press("x")
        assert screen_name(app) == "RunsScreen"  # asks once more before stopping
        await pilot.press("x")
        assert screen_name(app) == "ResultScreen"
        job = app.session.job
        assert job.state.status == "stopped" and len(job.runs) == 1
        assert "NOT CHECKED" in screen_text(app)


async def test_help_states_the_conventions_and_cautions() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("f1")
        from textual.widgets import Static

        text = " ".join(str(app.screen.query_one(Static).render()).split())  # the whole page, scrolled or not
        assert "against the" in text and "drive end" in text and "CONVENTIONS" in text and "SAFETY" in text
        await pilot.press("escape")
        assert screen_name(app) == "ConnectScreen"


async def test_switching_meters_keeps_readings_flowing() -> None:
    app = make_app("sim:fake", opener=fake_opener(), realtime=False, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected")
        first = app.session.link
        await key(pilot, "l")
        await wait_until(pilot, lambda: app.session.live.total_revs > 5, what="revolutions")
        epoch = first.call(lambda client: None)  # a change on the first meter
        await wait_until(pilot, lambda: first.epoch >= epoch, what="change applied")
        await key(pilot, "escape")
        app.use_port("sim:other")
        assert app.session.link is not first
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="second meter")
        before = app.session.live.total_revs
        await key(pilot, "l")
        await wait_until(pilot, lambda: app.session.live.total_revs > before + 5, what="revolutions again")
        assert app.session.live.recent


async def test_first_meter_found_is_used_by_default(monkeypatch: pytest.MonkeyPatch) -> None:
    import runtrue.tui.screens.connect as connect

    monkeypatch.setattr(connect, "find_sources", lambda: (
        [("/dev/ttyUSB7", "USB serial adapter"), ("/dev/ttyACM3", "meter? MicroPython board")],
        [("sim:fan", "extraction fan")],
    ))
    app = make_app(opener=fake_opener(), realtime=False)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="auto connect")
        assert app.session.port == "/dev/ttyACM3"  # the likely meter, not the first port listed


async def test_without_a_likely_meter_the_picker_waits(monkeypatch: pytest.MonkeyPatch) -> None:
    import runtrue.tui.screens.connect as connect

    monkeypatch.setattr(connect, "find_sources", lambda: ([], [("sim:fan", "extraction fan")]))
    app = make_app(opener=fake_opener(), realtime=False)
    async with app.run_test(size=SIZE) as pilot:
        ol = app.screen.query_one("#sources", OptionList)
        await wait_until(pilot, lambda: ol.option_count > 3, what="sources listed")
        assert app.session.port is None and app.session.link is None
        assert ol.highlighted is not None and ol.get_option_at_index(ol.highlighted).id == "sim:fan"


async def test_larger_terminal_uses_the_room() -> None:
    app = make_app("manual")
    async with app.run_test(size=(132, 43)) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "0.48", "phase0": "152"}, prefix="#")
        await pilot.press("enter", "f")
        await pilot.pause()
        dial = app.screen.query_one("#fit-dial")
        assert dial.size.width > 40 and dial.size.height > 25
        text = screen_text(app)
        assert "MARK" in text and "secure for" in text and "Quit" in text.splitlines()[-1]


async def test_live_screen_says_when_line_hum_sits_on_an_order() -> None:
    meters: list[Any] = []

    def opener(port: str, seed: int | None = None, realtime: bool = False) -> Any:
        m = fake_opener()(port, seed, realtime)
        m.line_collisions = ((100.0, 4, 2.0),)
        meters.append(m)
        return m

    app = make_app("sim:fake", opener=opener, realtime=False, revs_per_reading=12, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected")
        from runtrue.tui.screens.live import LiveScreen

        app.push_screen(LiveScreen("test"), lambda _r: None)
        await wait_until(pilot, lambda: app.session.live.total_revs > 20, what="revolutions")
        await pilot.pause(0.3)
        text = screen_text(app)
        assert "Hum: line hum at 100 Hz is within 2.0 % of 4x:" in text  # wrapped on the 80x24 screen
        assert "average longer or change speed." in text


async def test_a_typed_trial_above_the_force_limit_asks_before_it_is_used(tmp_path: Any) -> None:
    from tui_helpers import FAN_FIELDS, fill

    from runtrue.tui import make_app
    from runtrue.tui.screens.dialogs import ConfirmDialog

    app = make_app("manual", store_path=str(tmp_path / "db.sqlite"))
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "0.412", "phase0": "208"}, prefix="#")
        await pilot.press("enter")
        await pilot.pause()
        job = app.session.job
        assert job.step == "trial"
        await pilot.press("w")
        fill(app.screen, {"mass": "30", "angle": "0"}, prefix="#")
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmDialog)
        text = "\n".join(app.screen.lines)
        assert "x the limit" in text and "N at 1470 rpm" in text
        await pilot.press("n")
        await pilot.pause()
        assert job.suggested_trial().mass_g != 30.0
        await pilot.press("w")
        fill(app.screen, {"mass": "30", "angle": "0"}, prefix="#")
        await pilot.press("enter", "y")
        await pilot.pause()
        assert job.suggested_trial().mass_g == 30.0


async def test_the_result_screen_and_the_report_print_the_same_digits(tmp_path: Any) -> None:
    """Before/after vibration, residual, permissible and ratio: the same text on the screen and
    in the HTML report (both format through runtrue.readings.numbers)."""
    import html as htmlmod
    import re

    from runtrue.readings.numbers import grade_row, vib_number

    app = make_app("manual", report_dir=str(tmp_path))
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1466", "amp0": "0.412", "phase0": "208"}, prefix="#")
        await pilot.press("enter", "r")
        job = app.session.job
        if screen_name(app) == "ConfirmDialog":
            await pilot.press("y")
        fill(app.screen, {"speed": "1472", "amp0": "0.371", "phase0": "238"}, prefix="#")
        await pilot.press("enter", "r")
        if screen_name(app) == "ConfirmDialog":
            await pilot.press("y")
        fill(app.screen, {"speed": "1475", "amp0": "0.0061", "phase0": "331"}, prefix="#")
        await pilot.press("enter")
        await pilot.pause()
        assert screen_name(app) == "ResultScreen"
        screen = str(app.screen.query_one("#result-text").render())
        await pilot.press("h")
        report = htmlmod.unescape(next(tmp_path.glob("*.html")).read_text())
        res = job.result()
        for ch in res.channels:
            before = vib_number(abs(ch.before), 1466.0)
            after = vib_number(abs(ch.after), 1475.0)
            assert before in screen and after in screen
            assert re.search(rf"<td>{re.escape(before)}</td>", report) and re.search(rf"<td>{re.escape(after)}</td>", report)
        row = grade_row(res.residual_unbalance_gmm[0], res.residual_uncertainty_gmm[0], res.permissible_unbalance_gmm[0])
        for key in ("residual", "permissible", "ratio"):
            assert row[key] in screen and f"<td>{row[key]}</td>" in report, key


async def test_help_on_the_connect_screen_says_how_to_mount_the_pickup_and_the_tape() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        await pilot.press("f1")
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert "MOUNTING THE PICKUP" in text and "REFERENCE TAPE" in text
        await pilot.press("escape", "n", "f1")
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert "DESCRIBING THE MACHINE" in text and "MOUNTING THE PICKUP" not in text


async def test_report_details_are_typed_on_the_result_screen_and_printed_in_the_report(tmp_path: Any) -> None:
    from runtrue.jobs.report import render_html

    app = make_app("manual", report_dir=str(tmp_path))
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "0.412", "phase0": "208"}, prefix="#")
        await pilot.press("enter", "x", "x")
        assert screen_name(app) == "ResultScreen"
        await pilot.press("i")
        fill(app.screen, {"technician": "A. Fitter", "site": "Boiler house", "asset": "FAN-0042",
                          "work_order": "WO 1187", "notes": "bearing noisy, replace at next stop"}, prefix="#")
        await pilot.press("enter")
        html = render_html(app.session.store, app.session.job.job_id)
        for text in ("A. Fitter", "Boiler house", "FAN-0042", "WO 1187", "bearing noisy"):
            assert text in html


async def test_the_resume_list_says_when_each_job_started_its_runs_and_the_weights_on(tmp_path: Any) -> None:
    from textual.widgets import OptionList

    app = make_app("manual", store_path=str(tmp_path / "db.sqlite"))
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2", "r")
        fill(app.screen, {"speed": "1470", "amp0": "0.412", "phase0": "208"}, prefix="#")
        await pilot.press("enter")
        job_id = app.session.job.job_id
        app.session.job = None
        app.show_machine()
        await pilot.pause()
        ol = app.screen.query_one("#machines", OptionList)
        prompt = str(ol.get_option(f"j{job_id}").prompt)
        assert f"job {job_id}" in prompt and "1r" in prompt and "0w on" in prompt
        assert prompt.splitlines()[1].strip()[:2].isdigit()  # month-day of the start, local time


async def test_weights_left_on_can_be_moved_by_the_correction(monkeypatch: pytest.MonkeyPatch) -> None:
    import runtrue.tui.screens.machine as machine_screen
    from runtrue.jobs.model import Weight

    left = Weight(1, 10.0, 45.0, 160.0, "left by job 7")
    monkeypatch.setattr(machine_screen, "weights_left_on", lambda store, machine: (7, "2026-11-30T10:00:00Z", [left]))
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.press("f2")
        assert screen_name(app) == "WeightsLeftDialog"
        await pilot.press("m")
        job = app.session.job
        assert screen_name(app) == "RunsScreen"
        assert job.options["move_at_start"] is True and job.planned_weights() == [left]
