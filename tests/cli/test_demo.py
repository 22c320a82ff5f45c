"""``runtrue demo --auto --json``: a whole job on every simulator scenario, and its JSON contract.

The weights are fitted to the virtual rotor by its physical geometry, so "final < initial" and
"true residual <= permissible" check the angle convention end to end, not just the arithmetic.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from runtrue.cli import main
from runtrue.sim.scenarios import SCENARIOS

CONTRACT_KEYS = {
    "runs": int,
    "initial": list,
    "final": list,
    "grade": str,
    "permissible_unbalance_gmm": list,
    "residual_unbalance_gmm": list,
    "true_residual_unbalance_gmm": list,
    "passed": bool,
}


def demo_json(capsys: pytest.CaptureFixture[str], *argv: str) -> dict:
    assert main(["demo", "--auto", "--json", *argv]) == 0
    out = capsys.readouterr().out
    lines = out.strip().splitlines()
    assert len(lines) == 1, "the demo prints exactly one JSON object"
    return json.loads(lines[0])


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2])
@pytest.mark.parametrize("scenario", sorted(SCENARIOS))
def test_every_scenario_is_balanced_within_its_grade(capsys: pytest.CaptureFixture[str], scenario: str, seed: int) -> None:
    d = demo_json(capsys, "--scenario", scenario, "--seed", str(seed))
    for key, kind in CONTRACT_KEYS.items():
        assert isinstance(d[key], kind), key
    sc = SCENARIOS[scenario]
    assert len(d["initial"]) == len(d["final"]) == len(sc.pickups)
    assert len(d["true_residual_unbalance_gmm"]) == len(d["permissible_unbalance_gmm"]) == len(sc.planes)
    assert d["grade"] == f"G{sc.grade:g}"
    assert d["passed"] is True
    assert all(f < i for f, i in zip(d["final"], d["initial"])), "vibration must drop on every pickup"
    assert all(t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
    assert all(r <= p for r, p in zip(d["residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
    # reference + one trial per plane + correction at least; capped by the demo's run limit
    assert 2 + len(sc.planes) <= d["runs"] <= d["max_runs"]
    assert d["run_kinds"][0] == "reference" and d["run_kinds"][-1] in ("correction", "trim")


@pytest.mark.slow
def test_same_seed_gives_the_same_job(capsys: pytest.CaptureFixture[str]) -> None:
    a = demo_json(capsys, "--scenario", "roller", "--seed", "7")
    b = demo_json(capsys, "--scenario", "roller", "--seed", "7")
    a.pop("wall_s"), b.pop("wall_s")
    assert a == b


@pytest.mark.slow
def test_run_limit_stops_the_job_and_says_so(capsys: pytest.CaptureFixture[str]) -> None:
    d = demo_json(capsys, "--scenario", "roller", "--seed", "1", "--max-runs", "2")
    assert d["runs"] == 2 and d["passed"] is False
    assert "run limit" in d["stopped_reason"]


@pytest.mark.slow
def test_demo_job_is_recorded_when_asked(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    from runtrue.jobs import JobStore

    db = tmp_path / "demo.sqlite"
    d = demo_json(capsys, "--scenario", "fan", "--seed", "1", "--db", str(db))
    with JobStore(db) as store:
        rec = store.get_job(d["job_id"])
        assert rec is not None and rec.status == "passed"
        assert len(store.runs(d["job_id"])) == d["runs"]


@pytest.mark.parametrize(
    "argv, message",
    [
        (["demo", "--auto", "--scenario", "windmill"], "unknown scenario"),
        (["demo", "--json"], "go with --auto"),
        (["demo", "--auto", "--revs", "1"], "--revs"),
        (["demo", "--auto", "--resume", "3"], "--db"),
    ],
)
def test_bad_options_get_one_clear_line(capsys: pytest.CaptureFixture[str], argv: list[str], message: str) -> None:
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1 and "Traceback" not in err


@pytest.mark.slow
def test_console_command_prints_the_contract() -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "runtrue", "demo", "--auto", "--json", "--scenario", "fan", "--seed", "3"],
        capture_output=True, text=True, timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert set(CONTRACT_KEYS) <= set(d) and d["passed"] is True


def test_without_auto_the_application_opens_on_the_simulator(monkeypatch: pytest.MonkeyPatch) -> None:
    import types

    calls: list[tuple[str, int | None, bool | None]] = []

    class FakeApp:
        def run(self) -> None:
            calls.append(("run", None, None))

    def make_app(port: str, seed: int | None = None, plain: bool | None = None) -> FakeApp:
        calls.append((port, seed, plain))
        return FakeApp()

    monkeypatch.setitem(sys.modules, "runtrue.tui", types.SimpleNamespace(make_app=make_app))
    assert main(["demo", "--scenario", "sander", "--seed", "5"]) == 0
    assert calls == [("sim:sander", 5, None), ("run", None, None)], "no --plain: the terminal decides"
    calls.clear()
    assert main(["demo", "--plain"]) == 0
    assert calls[0] == ("sim:fan", None, True), "--plain: plots in plain characters"


# -- amplitude-only (four-run) method: `--no-phase` ------------------------------------------------
# Method: the four-run method (reference run, one trial weight at three angles, amplitudes only),
# as taught in field balancing texts, e.g. Wowk, *Machinery Vibration: Balancing*, McGraw-Hill
# 1995, "balancing without phase" (from memory); engine: runtrue.balancing.four_run.


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2])
@pytest.mark.parametrize("scenario", ["fan", "spindle"])
def test_no_phase_demo_balances_one_plane_scenarios_by_amplitude_only(
    capsys: pytest.CaptureFixture[str], scenario: str, seed: int
) -> None:
    d = demo_json(capsys, "--no-phase", "--scenario", scenario, "--seed", str(seed))
    for key, kind in CONTRACT_KEYS.items():
        assert isinstance(d[key], kind), key
    assert d["method"] == "four-run"
    sc = SCENARIOS[scenario]
    assert d["grade"] == f"G{sc.grade:g}"
    assert d["passed"] is True
    assert all(f < i for f, i in zip(d["final"], d["initial"])), "vibration must drop"
    # The weights were fitted by geometry, so the simulator's own figure is the proof.
    assert all(t <= p for t, p in zip(d["true_residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
    assert all(r <= p for r, p in zip(d["residual_unbalance_gmm"], d["permissible_unbalance_gmm"]))
    kinds = d["run_kinds"]
    assert kinds[:4] == ["reference", "trial", "trial", "trial"] and kinds[-1] in ("correction", "trim")
    assert d["runs"] <= d["max_runs"]


@pytest.mark.slow
def test_no_phase_job_never_sees_a_phase(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    from runtrue.jobs import JobStore

    db = tmp_path / "demo.sqlite"
    d = demo_json(capsys, "--no-phase", "--scenario", "fan", "--seed", "1", "--db", str(db))
    with JobStore(db) as store:
        runs = store.runs(d["job_id"])
        assert runs and all(not r.reading.has_phase for r in runs)
        assert all(c.mean.imag == 0.0 for r in runs for c in r.reading.channels)
        rec = store.get_job(d["job_id"])
        assert rec is not None and rec.options["method"] == "four-run" and rec.status == "passed"


@pytest.mark.parametrize(
    "argv, message",
    [
        (["demo", "--auto", "--json", "--no-phase", "--scenario", "roller"], "one plane"),
        (["demo", "--no-phase"], "go with --auto"),
    ],
)
def test_no_phase_bad_options_get_one_clear_line(capsys: pytest.CaptureFixture[str], argv: list[str], message: str) -> None:
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1 and "Traceback" not in err
