"""The diagnosis screen at 80x24, driven with Textual's pilot on the simulator."""

from __future__ import annotations

from pathlib import Path

from tui_helpers import key, screen_text, wait_until

from runtrue.tui import make_app

SIZE = (80, 24)
RESONANT = f"sim:{Path(__file__).resolve().parents[2] / 'examples' / 'scenarios' / 'resonant_fan.toml'}"


async def test_diagnosis_screen_shows_verdict_zone_spectrum_and_the_coast_down_warning() -> None:
    from runtrue.tui.screens.diagnosis import DiagnosisScreen

    app = make_app(RESONANT, seed=1, realtime=False, max_revs_per_s=300, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="connected")
        screen = DiagnosisScreen()
        app.push_screen(screen)
        await wait_until(pilot, lambda: screen.diagnosis is not None and "Hann window" in screen_text(app),
                         what="diagnosis on screen")
        text = screen_text(app)
        assert "Hann window" in text and "zone" in text and "mm/s rms" in text
        assert screen.diagnosis.channels[0].severity.zone in "ABCD"
        await key(pilot, "g")
        await wait_until(pilot, lambda: screen.machine_class == "class-II" and "class II" in screen_text(app),
                         what="class II")
        await key(pilot, "o")
        await wait_until(pilot, lambda: screen.speed is not None and "WARNING" in screen_text(app), timeout_s=60,
                         what="coast-down on screen")
        text = screen_text(app)
        assert "WARNING" in text and "above the balancing speed" in text
        assert "polar" in text
        await key(pilot, "escape")
        await wait_until(pilot, lambda: type(app.screen).__name__ != "DiagnosisScreen", what="back from the diagnosis")


async def test_the_one_line_binding_reaches_the_screen_and_keeps_before_and_after() -> None:
    """The hook the live and machine screens use: Binding(key, "app.push_screen('diagnosis')", ...),
    with the screen installed under that name once (App.SCREENS)."""
    app = make_app("sim:fan", seed=2, realtime=False, max_revs_per_s=300, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="connected")
        await app.run_action("app.push_screen('diagnosis')")
        await wait_until(pilot, lambda: len(getattr(app.session, "diagnoses", [])) == 1, what="diagnosis")
        await key(pilot, "d")
        await wait_until(pilot, lambda: len(app.session.diagnoses) == 2, what="second diagnosis")
        assert "zone" in screen_text(app)


async def test_d_on_the_reading_screen_diagnoses_and_each_opening_takes_a_fresh_one() -> None:
    app = make_app("sim:fan", seed=3, realtime=False, max_revs_per_s=300, post_interval_s=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="connected")
        await key(pilot, "l")
        await wait_until(pilot, lambda: type(app.screen).__name__ == "LiveScreen", what="LiveScreen")
        await wait_until(pilot, lambda: "d Diagnose" in screen_text(app), what="the key in the bottom bar")
        await key(pilot, "d")
        await wait_until(pilot, lambda: type(app.screen).__name__ == "DiagnosisScreen", what="DiagnosisScreen")
        await wait_until(pilot, lambda: len(app.session.diagnoses) == 1, what="diagnosis")
        await key(pilot, "escape")
        await wait_until(pilot, lambda: type(app.screen).__name__ == "LiveScreen", what="LiveScreen")
        await key(pilot, "d")
        await wait_until(pilot, lambda: len(app.session.diagnoses) == 2, what="second diagnosis")
        assert "zone" in screen_text(app)
        await key(pilot, "escape")
        await wait_until(pilot, lambda: type(app.screen).__name__ == "LiveScreen", what="LiveScreen")
        revs = app.session.live.total_revs
        await wait_until(pilot, lambda: app.session.live.total_revs > revs + 5, what="live readings go on")


async def test_f10_on_the_machine_screen_diagnoses_and_the_job_keeps_it_for_the_report() -> None:
    app = make_app("sim:fan", seed=4, realtime=False, max_revs_per_s=300, post_interval_s=0.05,
                   store_path=":memory:")
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="connected")
        await key(pilot, "n")
        await wait_until(pilot, lambda: type(app.screen).__name__ == "MachineScreen", what="machine screen")
        await key(pilot, "f10")
        await wait_until(pilot, lambda: len(app.session.diagnoses) == 1, what="diagnosis")
        await key(pilot, "escape")
        # the next key only once the machine screen is back on top (a loaded machine is slow)
        await wait_until(pilot, lambda: type(app.screen).__name__ == "MachineScreen", what="machine screen")
        await key(pilot, "f2")
        await wait_until(pilot, lambda: app.session.job is not None, what="job started")
        job = app.session.job
        events = [e.kind for e in job.store.events(job.job_id)]
        assert events.count("diagnosis") == 1             # the diagnosis before the job is its "before"
