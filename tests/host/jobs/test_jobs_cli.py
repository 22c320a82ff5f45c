"""``runtrue jobs list|show|report|export`` on a recorded demo job."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest

from runtrue.cli import main


@pytest.fixture(scope="module")
def db(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("jobs") / "jobs.sqlite"
    assert main(["demo", "--auto", "--json", "--scenario", "roller", "--seed", "4", "--db", str(path)]) == 0
    return path


@pytest.mark.slow
def test_list_shows_the_job(db: Path, capsys: pytest.CaptureFixture[str]) -> None:
    capsys.readouterr()
    assert main(["jobs", "--db", str(db), "list"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].split()[:4] == ["job", "started", "status", "runs"]
    assert out[1].split()[2] == "passed" and "demo: roller" in out[1]
    assert main(["jobs", "--db", str(db), "list", "--open"]) == 0
    assert "no unfinished jobs" in capsys.readouterr().out


def test_show_lists_every_run_with_its_weights(db: Path, capsys: pytest.CaptureFixture[str]) -> None:
    capsys.readouterr()
    assert main(["jobs", "--db", str(db), "show", "1"]) == 0
    out = capsys.readouterr().out
    assert "reference" in out and "trial" in out and "correction" in out
    assert "against rotation" in out and "result: passed, residual" in out
    # vibration in mm/s rms with its detector, never a bare "g" that reads as grams
    runs = [line for line in out.splitlines() if " rpm " in line]
    readings = [line.split("[")[0] for line in runs]              # the weights after "[" are masses
    assert readings and all("mm/s rms" in r and " g " not in r for r in readings)
    assert "g\N{MIDDLE DOT}mm" in out and "g.mm" not in out and "e+" not in out


def test_report_writes_a_printable_page(db: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "report.html"
    assert main(["jobs", "--db", str(db), "report", "1", "-o", str(target)]) == 0
    page = target.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and "<svg" in page and "ISO 21940-11" in page


def test_export_csv_and_json(db: Path, capsys: pytest.CaptureFixture[str]) -> None:
    capsys.readouterr()
    assert main(["jobs", "--db", str(db), "export", "1"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert rows and {r["pickup"] for r in rows} == {"1", "2"}
    assert main(["jobs", "--db", str(db), "export", "1", "--format", "json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["job"]["status"] == "passed" and len(d["runs"]) == len(rows) // 2


@pytest.mark.parametrize(
    "argv, message",
    [
        (["show", "99"], "no job 99"),
        (["list", "--machine", "nothing"], "no machine named"),
        ([], "say what to do"),
    ],
)
def test_mistakes_get_one_clear_line(db: Path, capsys: pytest.CaptureFixture[str], argv: list[str], message: str) -> None:
    capsys.readouterr()
    assert main(["jobs", "--db", str(db), *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1


def test_missing_database_is_reported(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["jobs", "--db", str(tmp_path / "nope.sqlite"), "list"]) == 2
    assert "no job database" in capsys.readouterr().err


@pytest.mark.slow
def test_machine_history_shows_the_trend(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from runtrue.jobs import JobStore
    from runtrue.jobs.demo_machine import machine_for_scenario
    from runtrue.jobs.headless import run_demo

    path = tmp_path / "history.sqlite"
    with JobStore(path) as store:
        m = machine_for_scenario("fan")
        store.save_machine(m)
        run_demo("fan", 1, store=store, machine=m)
        run_demo("fan", 2, store=store, machine=store.get_machine(m.id))  # type: ignore[arg-type]
    capsys.readouterr()
    assert main(["jobs", "--db", str(path), "list", "--machine", "demo: fan"]) == 0
    out = capsys.readouterr().out
    trend = out.split("trend")[1].splitlines()[1:]
    assert [line.split()[0] for line in trend] == ["1", "2"]
    assert all("passed" in line and "mm/s rms" in line for line in trend)
