"""The application on a database holding odd records: a job stopped before any reading, an
absurd trial mass saved by an older version, a record with a missing field, a machine record
that is not a machine.  Nothing is fatal; each unreadable record is shown with its reason and a
job that cannot be resumed can be set aside.  And an unexpected error is logged, shown in one
line, and ends the application with exit status 2, never a traceback."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest
from textual.widgets import Input, OptionList, Static
from tui_helpers import FAN_FIELDS, fill, screen_text

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from odd_jobs import make_odd_database  # noqa: E402

from runtrue.tui import make_app  # noqa: E402


def _option_ids(app) -> list[str]:
    ol = app.screen.query_one("#machines", OptionList)
    return [ol.get_option_at_index(i).id for i in range(ol.option_count)]


async def _select(app, pilot, oid: str) -> None:
    ol = app.screen.query_one("#machines", OptionList)
    ol.highlighted = _option_ids(app).index(oid)
    ol.action_select()
    await pilot.pause()


async def test_the_machine_screen_lists_unreadable_records_and_sets_a_bad_job_aside(tmp_path: Path) -> None:
    db = tmp_path / "odd.sqlite"
    ids = make_odd_database(db)
    app = make_app("manual", store_path=str(db), realtime=False)
    async with app.run_test(size=(80, 24)) as pilot:
        app.show_machine()
        await pilot.pause()
        options = _option_ids(app)
        assert f"u{ids['bad_machine']}" in options  # the machine record that is not a machine
        assert f"x{ids['huge_trial']}" in options and f"x{ids['missing_field']}" in options
        assert f"j{ids['open_empty']}" in options  # the good unfinished job is still offered
        # The saved machine with a job stopped before any reading: its history line, no crash.
        await _select(app, pilot, "m1")
        assert "job(s) before" in str(app.screen.query_one("#hint", Static).render())
        # The absurd trial: shown with its reason; Enter again sets the job aside.
        await _select(app, pilot, f"x{ids['huge_trial']}")
        hint = str(app.screen.query_one("#hint", Static).render())
        assert "unreadable record" in hint and "1e+09 g" in hint and "set" in hint
        await _select(app, pilot, f"x{ids['huge_trial']}")
        assert f"x{ids['huge_trial']}" not in _option_ids(app)
        assert "set aside" in screen_text(app)
        assert app.failure == ""
    store_job = app.session.store  # closed with the app; check the file afresh
    from runtrue.jobs.store import JobStore

    with JobStore(db) as store:
        rec = [j for j in store.list_jobs() if j.id == ids["huge_trial"]][0]
        assert rec.status == "stopped" and rec.n_runs == 1  # closed, its run kept
    assert store_job is not None


async def test_the_history_of_a_machine_with_odd_jobs_opens(tmp_path: Path) -> None:
    db = tmp_path / "odd.sqlite"
    ids = make_odd_database(db)
    app = make_app("manual", store_path=str(db), realtime=False)
    async with app.run_test(size=(80, 24)) as pilot:
        app.show_machine()
        await pilot.pause()
        await _select(app, pilot, "m1")
        await pilot.press("f6")
        await pilot.pause()
        text = screen_text(app)
        assert f"unreadable record #{ids['bad_result']}" in text
        assert app.failure == ""


async def test_the_machine_form_refuses_a_rotor_of_1e30_kg_and_saves_nothing(tmp_path: Path) -> None:
    db = tmp_path / "jobs.sqlite"
    app = make_app("manual", store_path=str(db), realtime=False)
    async with app.run_test(size=(80, 24)) as pilot:
        app.show_machine()
        await pilot.pause()
        fill(app.screen, {**FAN_FIELDS, "mass": "1e30"})
        await pilot.press("f2")
        await pilot.pause()
        assert type(app.screen).__name__ == "MachineScreen"
        assert "rotor mass 1e+30 kg is outside" in screen_text(app)
        assert app.screen.focused is app.screen.query_one("#f_mass", Input)
        assert app.session.store.list_machines() == []


async def test_the_trial_weight_dialog_refuses_1e9_g_and_the_job_goes_on(tmp_path: Path) -> None:
    from runtrue.jobs import BalanceJob
    from runtrue.jobs.model import RunReading
    from runtrue.jobs.store import JobStore

    db = tmp_path / "jobs.sqlite"
    from runtrue.jobs.demo_machine import machine_for_scenario

    with JobStore(db) as store:
        machine = machine_for_scenario("fan")
        store.save_machine(machine)
        job = BalanceJob.start(store, machine)
        job.record_run(RunReading.manual([0.41], [207.0], 1470.0, [0.002]))
        with pytest.raises(ValueError, match="1e\\+09 g"):
            job.set_trial(1e9, 0.0)
        assert store.job_problem(job.job_id) == ""  # nothing absurd was saved
        BalanceJob.resume(store, job.job_id)  # and the job resumes


async def test_an_unexpected_error_is_logged_shown_in_one_line_and_exits_2(tmp_path: Path, monkeypatch) -> None:
    from runtrue.tui.screens import machine as machine_screen

    monkeypatch.setenv("RUNTRUE_DATA_DIR", str(tmp_path))

    def broken(self) -> None:
        raise ZeroDivisionError("a bug in a screen")

    monkeypatch.setattr(machine_screen.MachineScreen, "on_mount", broken)
    app = make_app("manual", store_path=str(tmp_path / "jobs.sqlite"), realtime=False)
    with pytest.raises(ZeroDivisionError):  # the test pilot raises it again at the end
        async with app.run_test(size=(80, 24)) as pilot:
            app.show_machine()
            await pilot.pause()
    assert app.return_code == 2
    assert app.failure.startswith("runtrue: unexpected error (ZeroDivisionError: a bug in a screen)")
    assert "the job is kept" in app.failure and "\n" not in app.failure
    log = (tmp_path / "runtrue-errors.log").read_text()
    assert "Traceback" in log and "a bug in a screen" in log and str(tmp_path) in app.failure
