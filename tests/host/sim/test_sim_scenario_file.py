"""Simulated machines described in files: the example loads, TOML and JSON agree, every mistake
is named with its key and what to do, and a file is usable wherever a built-in scenario is."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from runtrue.cli import main
from runtrue.sim.machine import VirtualMachine
from runtrue.sim.scenario_file import ScenarioFileError, load_scenario_file, scenario_from_dict
from runtrue.sim.scenarios import get_scenario

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib  # type: ignore[no-redef]

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "scenarios" / "blower.toml"


def example_dict() -> dict:
    return tomllib.loads(EXAMPLE.read_text())


def test_example_file_describes_a_two_plane_machine_that_runs_up() -> None:
    sc = load_scenario_file(EXAMPLE)
    assert sc.name == "blower" and sc.speed_rpm == 2350 and sc.line_hz == 60
    assert [p.positions for p in sc.planes] == [None, 16]
    assert abs(sc.planes[0].initial_unbalance_gmm) == pytest.approx(5200)
    assert sc.start_rpm == 0 and sc.speed_profile[0].to_rpm == 2350 and sc.speed_profile[0].rpm_per_s == 400
    assert sc.pickups[0].harmonics_g[1][0] == 3 and sc.pickups[0].line_hum_g == ((2, 0.04),)
    assert sc.glitch_per_rev == 0.002 and sc.ref_angle_deg == 90
    assert get_scenario(str(EXAMPLE)) == sc


def test_json_file_with_the_same_keys_gives_the_same_machine(tmp_path: Path) -> None:
    path = tmp_path / "blower.json"
    path.write_text(json.dumps(example_dict()))
    a, b = load_scenario_file(EXAMPLE), load_scenario_file(path)
    assert a.planes == b.planes and a.pickups == b.pickups and a.rotor == b.rotor and a.speed_profile == b.speed_profile


def _mistake(tmp_path: Path, edit) -> str:
    data = example_dict()
    edit(data)
    path = tmp_path / "m.json"  # the same keys as TOML; JSON is simpler to write from a test
    path.write_text(json.dumps(data))
    with pytest.raises(ScenarioFileError) as err:
        load_scenario_file(path)
    return str(err.value)


@pytest.mark.parametrize("edit, key, words", [
    (lambda d: d["planes"][1].update(radius_mm=-240), "planes[1].radius_mm", "more than 0"),
    (lambda d: d["speed"].pop("rpm"), "speed.rpm", "is missing"),
    (lambda d: d["pickups"][0].update(nosie_g=0.1), "pickups[0].nosie_g", "spelling"),
    (lambda d: d["pickups"][0]["harmonics"][0].update(order=1), "pickups[0].harmonics[0].order", "2 to 8"),
    (lambda d: d["speed"].update(rotation="left"), "speed.rotation", "'cw', 'ccw'"),
    (lambda d: d["planes"][1].update(positions=2.5), "planes[1].positions", "continuous"),
    (lambda d: d["speed"].pop("run_up_rpm_per_s"), "speed.run_up_rpm_per_s", "both"),
    (lambda d: d.update(pickups=d["pickups"] * 2), "pickups", "at most 3"),
    (lambda d: d["rotor"].update(mass_kg="heavy"), "rotor.mass_kg", "must be a number"),
    (lambda d: d.update(name="my blower"), "name", "no spaces"),
])
def test_each_mistake_names_the_key_what_is_wrong_and_what_to_do(tmp_path: Path, edit, key: str, words: str) -> None:
    msg = _mistake(tmp_path, edit)
    assert f": {key}: " in msg and words in msg and "fix it" in msg and str(tmp_path) in msg


def test_unreadable_files_say_why(tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text("name = \"x\"\n[speed\nrpm = 3\n")
    with pytest.raises(ScenarioFileError, match="is not valid TOML.*fix the syntax"):
        load_scenario_file(bad)
    with pytest.raises(ScenarioFileError, match="no such scenario file"):
        load_scenario_file(tmp_path / "none.toml")
    other = tmp_path / "m.yaml"
    other.write_text("name: x")
    with pytest.raises(ScenarioFileError, match="ends in .toml or .json"):
        load_scenario_file(other)
    js = tmp_path / "b.json"
    js.write_text("[1, 2]")
    with pytest.raises(ScenarioFileError, match="one table of keys"):
        load_scenario_file(js)


def test_runs_up_then_holds_the_running_speed() -> None:
    m = VirtualMachine(load_scenario_file(EXAMPLE), seed=1)
    assert m.speed_rpm == pytest.approx(0.0, abs=1.0)
    m.advance(2.0)
    assert m.speed_rpm == pytest.approx(800.0, rel=0.05)
    for _ in range(100):
        m.advance(0.1)
    assert m.speed_rpm == pytest.approx(2350.0, rel=0.02)


def test_a_repeating_profile_changes_the_speed_within_a_revolution() -> None:
    data = example_dict()
    data["speed"] = {"rpm": 1470, "drift_frac": 0.0,
                     "profile": [{"to_rpm": 1544, "rpm_per_s": 3600}, {"to_rpm": 1397, "rpm_per_s": 3600}],
                     "repeat": True}
    m = VirtualMachine(scenario_from_dict(data, "test"), seed=1)
    speeds = []
    for _ in range(200):
        m.advance(0.004)
        speeds.append(m.speed_rpm)
    assert min(speeds) == pytest.approx(1397, abs=20) and max(speeds) == pytest.approx(1544, abs=20)
    # 3600 rpm/s at 1470 rpm: about 10 % of the speed in one revolution (41 ms)
    assert 3600 * 60 / 1470 / 1470 == pytest.approx(0.1, rel=0.01)


def test_line_hum_is_not_synchronous_with_the_rotor() -> None:
    """Hum at 2 x 60 Hz only: its spectral line sits at 120 Hz whatever the running speed."""
    data = example_dict()
    data["speed"] = {"rpm": 1000, "drift_frac": 0.0}
    for pl in data["planes"]:
        pl["unbalance_gmm"] = 0
    data["pickups"] = [{"name": "p", "axial_mm": 0, "angle_deg": 0, "noise_g": 0.0,
                        "line_hum": [{"multiple": 2, "g": 0.1}]}]
    m = VirtualMachine(scenario_from_dict(data, "test"), seed=3)
    sig, _ = m.generate(4000, 4000.0, [0])
    spec = np.abs(np.fft.rfft(sig[:, 0]))
    peak_hz = int(np.argmax(spec))
    assert peak_hz == 120
    assert spec[peak_hz] / 2000 == pytest.approx(0.1, rel=0.02)  # the front end's gain at 120 Hz ~ 1


def test_rotor_harmonics_follow_the_rotor() -> None:
    data = example_dict()
    data["speed"] = {"rpm": 1200, "drift_frac": 0.0}
    for pl in data["planes"]:
        pl["unbalance_gmm"] = 0
    data["pickups"] = [{"name": "p", "axial_mm": 0, "angle_deg": 0, "noise_g": 0.0,
                        "harmonics": [{"order": 3, "g": 0.05}]}]
    m = VirtualMachine(scenario_from_dict(data, "test"), seed=3)
    sig, _ = m.generate(4000, 4000.0, [0])
    assert int(np.argmax(np.abs(np.fft.rfft(sig[:, 0])))) == 60  # 3 x 20 Hz


@pytest.mark.slow
def test_file_scenario_through_measure_scenarios_and_demo(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    data = example_dict()
    data["speed"].pop("start_rpm")
    data["speed"].pop("run_up_rpm_per_s")  # already at speed: a steady reading
    path = tmp_path / "steady_blower.json"
    path.write_text(json.dumps(data))
    assert main(["measure", "--port", f"sim:{path}", "--revs", "20", "--json", "--seed", "3"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["rpm"] == pytest.approx(2350, rel=0.02) and len(result["channels"]) == 2
    for ch, truth in zip(result["channels"], result["expected"]):
        z = ch["amp"] * complex(math.cos(math.radians(ch["phase"])), math.sin(math.radians(ch["phase"])))
        t = truth["amp"] * complex(math.cos(math.radians(truth["phase"])), math.sin(math.radians(truth["phase"])))
        assert abs(z - t) < 5 * ch["spread"]
    assert main(["scenarios", "--json", str(path)]) == 0
    listed = json.loads(capsys.readouterr().out)["scenarios"]
    assert listed[-1]["source"] == str(path) and listed[-1]["use"] == f"sim:{path}"
    assert {e["name"] for e in listed} >= {"fan", "sander", "roller", "spindle", "blower"}
    assert main(["demo", "--auto", "--json", "--scenario", str(path), "--seed", "2", "--revs", "10",
                 "--max-runs", "3"]) == 0
    job = json.loads(capsys.readouterr().out)
    assert job  # a job ran on the file's machine


def test_bad_file_reaches_the_user_as_a_message_not_a_traceback(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    path = tmp_path / "bad.json"
    path.write_text(json.dumps({"name": "x"}))
    for argv in (["measure", "--port", f"sim:{path}"], ["demo", "--auto", "--scenario", str(path)],
                 ["scenarios", str(path)]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "grade_mm_s: is missing" in err and "Traceback" not in err
