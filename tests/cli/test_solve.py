"""``runtrue solve``: its JSON contract, and one-line errors (exit 2) for bad input."""

from __future__ import annotations

import io
import json
import math
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from runtrue.balancing import Run, Weight, phasor, solve
from runtrue.cli import main

ISSUE_EXAMPLE = {
    "runs": [
        {"readings": [{"amp": 7.9, "phase": 41}]},
        {"weights": [{"plane": 1, "mass": 15, "angle": 0, "radius": 120}], "readings": [{"amp": 4.6, "phase": 97}]},
    ],
    "radius": {"1": 120},
}


def _run(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str], text: str) -> tuple[int, str, str]:
    monkeypatch.setattr(sys, "stdin", io.StringIO(text))
    code = main(["solve", "-"])
    out, err = capsys.readouterr()
    return code, out, err


def test_single_plane_example_from_the_issue(monkeypatch, capsys) -> None:
    code, out, err = _run(monkeypatch, capsys, json.dumps(ISSUE_EXAMPLE))
    assert code == 0 and err == ""
    data = json.loads(out)
    (c,) = data["corrections"]
    # Independent: the vector method by hand (see tests/host/balancing/test_influence.py).
    o, t = phasor(7.9, 41), phasor(4.6, 97)
    assert c["plane"] == 1 and c["radius"] == 120
    assert c["mass"] == pytest.approx(15 * abs(o) / abs(t - o), rel=1e-5)
    assert c["angle"] == pytest.approx(35.595, abs=1e-3)
    (row,) = data["influence"]
    assert row[0]["amp"] == pytest.approx(abs(t - o) / 1800, rel=1e-5)
    assert data["predicted"] == [{"amp": 0.0, "phase": 0.0}]
    assert data["warnings"] == []
    assert set(data) >= {"corrections", "influence", "predicted", "warnings"}


def test_file_argument_and_radius_default(tmp_path: Path, capsys) -> None:
    doc = dict(ISSUE_EXAMPLE)
    del doc["radius"]
    f = tmp_path / "runs.json"
    f.write_text(json.dumps(doc))
    assert main(["solve", str(f)]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["corrections"][0]["radius"] == 120


def test_two_planes_with_spreads_give_uncertainty_and_static_couple(monkeypatch, capsys) -> None:
    o = [phasor(5.2, 75), phasor(3.1, 200)]
    r1 = [phasor(7.4, 101), phasor(2.2, 166)]
    r2 = [phasor(4.0, 40), phasor(6.3, 255)]
    t1, t2 = Weight(1, 20, 30, 150), Weight(2, 25, 270, 140)

    def rd(zs):
        return [{"amp": abs(z), "phase": math.degrees(math.atan2(z.imag, z.real)), "spread": 0.05} for z in zs]

    doc = {"runs": [
        {"readings": rd(o)},
        {"weights": [{"plane": 1, "mass": 20, "angle": 30, "radius": 150}], "readings": rd(r1)},
        {"weights": [{"plane": 2, "mass": 25, "angle": 270, "radius": 140}], "readings": rd(r2)},
    ]}
    code, out, _ = _run(monkeypatch, capsys, json.dumps(doc))
    assert code == 0
    data = json.loads(out)
    ref = solve([Run([], o), Run([t1], r1), Run([t2], r2)])
    for got, want in zip(data["corrections"], ref.corrections):
        assert got["mass"] == pytest.approx(want.mass_g, rel=1e-5)
        assert got["angle"] == pytest.approx(want.angle_deg, abs=1e-3)
    assert len(data["influence"]) == 2 and len(data["influence"][0]) == 2
    assert [u["plane"] for u in data["uncertainty"]] == [1, 2]
    assert len(data["static_couple"]["couple"]) == 2


def test_amplitude_only_when_phase_is_omitted(monkeypatch, capsys) -> None:
    a, u = 0.004, phasor(1500, 70)
    runs = [{"readings": [{"amp": abs(a * u)}]}]
    for ang in (0, 120, 240):
        runs.append({"weights": [{"plane": 1, "mass": 12, "angle": ang, "radius": 100}],
                     "readings": [{"amp": abs(a * (u + phasor(1200, ang)))}]})
    code, out, _ = _run(monkeypatch, capsys, json.dumps({"runs": runs}))
    assert code == 0
    data = json.loads(out)
    assert data["method"] == "four-run"
    assert data["corrections"][0]["mass"] == pytest.approx(15, rel=1e-5)
    assert data["corrections"][0]["angle"] == pytest.approx(250, abs=1e-3)
    assert data["influence"][0][0]["phase"] is None


def _bad(mutate) -> str:
    doc = json.loads(json.dumps(ISSUE_EXAMPLE))
    mutate(doc)
    return json.dumps(doc)


BAD_INPUTS = {
    "bad JSON": ("{\"runs\": [", "not valid JSON"),
    "not an object": ("[1, 2]", "JSON object"),
    "missing runs": ("{}", "missing \"runs\""),
    "too few runs": (_bad(lambda d: d["runs"].pop()), "1 run(s)"),
    "fewer runs than planes + 1": (
        _bad(lambda d: d["runs"][1]["weights"].append({"plane": 2, "mass": 5, "angle": 0, "radius": 100})),
        "need at least 3"),
    "zero mass": (_bad(lambda d: d["runs"][1]["weights"][0].update(mass=0)), "above 0 g"),
    "negative radius": (_bad(lambda d: d["runs"][1]["weights"][0].update(radius=-120)), "above 0 mm"),
    "NaN amp": ("{\"runs\": [{\"readings\": [{\"amp\": NaN, \"phase\": 1}]}, {}]}", "NaN is not a number"),
    "phase not a number": (_bad(lambda d: d["runs"][0]["readings"][0].update(phase="north")), "must be a number"),
    "missing amp": (_bad(lambda d: d["runs"][0]["readings"][0].pop("amp")), "missing \"amp\""),
    "negative amp": (_bad(lambda d: d["runs"][0]["readings"][0].update(amp=-1)), ">= 0"),
    "plane 0": (_bad(lambda d: d["runs"][1]["weights"][0].update(plane=0)), "whole number from 1"),
    "weights in reference": (
        _bad(lambda d: d["runs"][0].update(weights=[{"plane": 1, "mass": 1, "angle": 0, "radius": 1}])),
        "reference state"),
    "mixed phase": (_bad(lambda d: d["runs"][1]["readings"][0].pop("phase")), "some readings have a phase"),
    "pickup count differs": (
        _bad(lambda d: d["runs"][1]["readings"].append({"amp": 1, "phase": 2})), "one reading per pickup"),
    "bad radius key": (_bad(lambda d: d.update(radius={"one": 120})), "not a plane number"),
    "no readings": (_bad(lambda d: d["runs"][1].pop("readings")), "\"readings\" must be a list"),
    "no trial weight": (_bad(lambda d: d["runs"][1].pop("weights")), "no run has a weight"),
}


@pytest.mark.parametrize("name", list(BAD_INPUTS))
def test_bad_input_gives_one_line_and_exit_2(name: str, monkeypatch, capsys) -> None:
    text, fragment = BAD_INPUTS[name]
    code, out, err = _run(monkeypatch, capsys, text)
    assert code == 2
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("runtrue solve: ")
    assert fragment in err


def test_missing_file_is_one_line(tmp_path: Path, capsys) -> None:
    assert main(["solve", str(tmp_path / "nope.json")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "cannot read" in err


def test_the_installed_command_prints_no_traceback() -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "runtrue", "solve", "-"], input="{\"runs\": 5}", capture_output=True, text=True,
        timeout=60,
    )
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and proc.stderr.count("\n") == 1


json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-5, 5) | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=3),
    lambda kids: st.lists(kids, max_size=3) | st.dictionaries(
        st.sampled_from(["runs", "readings", "weights", "amp", "phase", "plane", "mass", "angle", "radius", "1"]),
        kids, max_size=4),
    max_leaves=12,
)


@pytest.mark.slow
@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(value=json_values)
def test_any_json_gives_a_result_or_a_one_line_error(value, monkeypatch, capsys) -> None:
    code, out, err = _run(monkeypatch, capsys, json.dumps(value))
    assert code in (0, 2)
    if code == 2:
        assert err.count("\n") == 1


@pytest.mark.slow
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(amp=st.floats(0, 100) | st.floats(allow_nan=False), phase=st.floats(-1e4, 1e4),
       mass=st.floats(-1e3, 1e6), radius=st.floats(-1e3, 1e4), angle=st.floats(-1e6, 1e6))
def test_mutated_numbers_never_raise(amp, phase, mass, radius, angle, monkeypatch, capsys) -> None:
    doc = json.loads(json.dumps(ISSUE_EXAMPLE))
    doc["runs"][1]["readings"][0].update(amp=amp, phase=phase)
    doc["runs"][1]["weights"][0].update(mass=mass, radius=radius, angle=angle)
    code, _, err = _run(monkeypatch, capsys, json.dumps(doc))
    assert code in (0, 2)
    if code == 2:
        assert err.count("\n") == 1


@pytest.mark.slow
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(amps=st.lists(st.floats(0, 1e300) | st.floats(allow_nan=False), min_size=4, max_size=4),
       angles=st.lists(st.floats(-1e3, 1e3), min_size=3, max_size=3), mass=st.floats(-1, 1e5))
def test_amplitude_only_inputs_never_raise(amps, angles, mass, monkeypatch, capsys) -> None:
    runs = [{"readings": [{"amp": amps[0]}]}]
    for a, ang in zip(amps[1:], angles):
        runs.append({"weights": [{"plane": 1, "mass": mass, "angle": ang, "radius": 100}], "readings": [{"amp": a}]})
    code, _, err = _run(monkeypatch, capsys, json.dumps({"runs": runs}))
    assert code in (0, 2)
    if code == 2:
        assert err.count("\n") == 1


def test_phases_wrap_so_minus_319_is_41(monkeypatch, capsys) -> None:
    doc = json.loads(json.dumps(ISSUE_EXAMPLE))
    doc["runs"][0]["readings"][0]["phase"] = -319
    doc["runs"][1]["readings"][0]["phase"] = 97 + 720
    code, out, _ = _run(monkeypatch, capsys, json.dumps(doc))
    assert code == 0
    assert json.loads(out)["corrections"][0]["angle"] == pytest.approx(35.595, abs=1e-3)


def test_speed_gives_the_force_on_each_correction_and_the_cautions(monkeypatch, capsys) -> None:
    doc = dict(ISSUE_EXAMPLE, speed_rpm=1500)
    code, out, _ = _run(monkeypatch, capsys, json.dumps(doc))
    assert code == 0
    data = json.loads(out)
    c = data["corrections"][0]
    # F = m r w^2 by hand: mass (kg) * 0.12 m * (2 pi 25 /s)^2.
    assert c["force_n"] == pytest.approx(c["mass"] / 1000 * 0.12 * (2 * math.pi * 25) ** 2, rel=1e-4)
    assert "lock out" in data["safety"]
    code, _, err = _run(monkeypatch, capsys, json.dumps(dict(ISSUE_EXAMPLE, speed_rpm=-5)))
    assert code == 2 and "speed" in err
