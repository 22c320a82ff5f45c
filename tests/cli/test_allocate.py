"""``runtrue allocate``: its JSON contract, and one-line errors (exit 2) for bad input."""

from __future__ import annotations

import cmath
import io
import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from runtrue.cli import main

ISSUE_EXAMPLE = {
    "correction": {"mass": 9.4, "angle": 212.5, "radius": 120},
    "positions": {"count": 12, "first_angle": 0, "radius": 120},
    "stock": [{"mass": 1, "count": 6}, {"mass": 2, "count": 6}, {"mass": 5, "count": 4}],
    "max_pieces_per_position": 3,
}


def _run(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str], doc: object) -> tuple[int, str, str]:
    text = doc if isinstance(doc, str) else json.dumps(doc)
    monkeypatch.setattr(sys, "stdin", io.StringIO(text))
    code = main(["allocate", "-"])
    out, err = capsys.readouterr()
    return code, out, err


def _vec(mass: float, angle: float, radius: float) -> complex:
    return mass * radius * cmath.exp(1j * math.radians(angle))


def test_issue_example_gives_placements_and_the_residual_they_leave(monkeypatch, capsys) -> None:
    code, out, err = _run(monkeypatch, capsys, ISSUE_EXAMPLE)
    assert code == 0 and err == ""
    data = json.loads(out)
    assert set(data) >= {"placements", "residual", "residual_fraction"}
    fitted = 0j
    for p in data["placements"]:
        assert set(p) >= {"angle", "radius", "pieces"}
        assert p["angle"] % 30 == pytest.approx(0.0, abs=1e-9)
        assert len(p["pieces"]) <= 3
        assert all(m in (1, 2, 5) for m in p["pieces"])
        fitted += _vec(sum(p["pieces"]), p["angle"], p["radius"])
    # independent recomputation of the residual, expressed at the correction radius
    residual = _vec(9.4, 212.5, 120) - fitted
    r = data["residual"]
    assert r["radius"] == 120
    assert r["mass"] == pytest.approx(abs(residual) / 120, abs=1e-5)
    if r["mass"] > 1e-6:
        assert r["angle"] == pytest.approx(math.degrees(cmath.phase(residual)) % 360, abs=1e-3)
    assert data["residual_fraction"] == pytest.approx(abs(residual) / (9.4 * 120), abs=1e-5)
    assert data["residual_fraction"] <= 0.01  # default good-enough residual: 1 % of the correction
    assert data["warnings"] == []


def test_file_argument_strip_and_force(tmp_path: Path, capsys) -> None:
    doc = {"correction": {"mass": 7.3, "angle": 100, "radius": 120},
           "positions": {"angles": [0, 90, 180, 270], "radius": 120},
           "strip": {"grams_per_mm": 0.25, "min_mm": 12, "step_mm": 5},
           "speed_rpm": 1500}
    f = tmp_path / "job.json"
    f.write_text(json.dumps(doc))
    assert main(["allocate", str(f)]) == 0
    data = json.loads(capsys.readouterr().out)
    for p in data["placements"]:
        assert "length_mm" in p and "pieces" not in p
        assert (p["length_mm"] - 12) % 5 == pytest.approx(0.0, abs=1e-9)
        omega = 2 * math.pi * 1500 / 60
        assert p["force_n"] == pytest.approx(p["mass"] / 1000 * p["radius"] / 1000 * omega**2, rel=1e-3)


def test_list_of_positions_groove_and_exclusions(monkeypatch, capsys) -> None:
    doc = dict(ISSUE_EXAMPLE, positions=[{"angle": 200, "radius": 120}, {"angle": 230, "radius": 100}])
    code, out, _ = _run(monkeypatch, capsys, doc)
    assert code == 0
    assert {p["angle"] for p in json.loads(out)["placements"]} <= {200, 230}
    doc = dict(ISSUE_EXAMPLE, positions={"continuous": True, "radius": 100})
    code, out, _ = _run(monkeypatch, capsys, doc)
    data = json.loads(out)
    assert code == 0 and data["residual_fraction"] < 1e-6
    assert all(p["position"] is None for p in data["placements"])
    doc = dict(ISSUE_EXAMPLE, positions={"count": 12, "radius": 120, "exclude": [8]})
    code, out, _ = _run(monkeypatch, capsys, doc)
    assert code == 0 and all(p["position"] != 8 for p in json.loads(out)["placements"])


def test_old_weights_can_be_removed(monkeypatch, capsys) -> None:
    doc = {"correction": {"mass": 2, "angle": 270, "radius": 120},
           "positions": {"count": 12, "radius": 120},
           "stock": [{"mass": 2, "count": 3}],
           "existing": [{"mass": 2, "angle": 90, "radius": 120, "position": 4, "may_remove": True}]}
    code, out, _ = _run(monkeypatch, capsys, doc)
    data = json.loads(out)
    assert code == 0 and data["removed_existing"] == [1] and data["placements"] == []


def test_a_correction_no_combination_can_approach_gives_a_plain_warning(monkeypatch, capsys) -> None:
    doc = dict(ISSUE_EXAMPLE, stock=[{"mass": 1, "count": 1}])
    code, out, err = _run(monkeypatch, capsys, doc)
    assert code == 0
    data = json.loads(out)
    assert data["warnings"] and "leaves" in data["warnings"][0]
    assert err.startswith("runtrue allocate: warning:") and "Traceback" not in err


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"correction": {"mass": -9.4, "angle": 0, "radius": 120}}, "negative"),
        ({"stock": [{"mass": -1, "count": 2}]}, "positive"),
        ({"stock": []}, "stock is empty"),
        ({"stock": [{"mass": 1, "count": 0}]}, "stock is empty"),
        ({"positions": {"count": 0, "radius": 120}}, "no positions"),
        ({"positions": []}, "no positions"),
        ({"positions": {"angles": [], "radius": 120}}, "no positions"),
        ({"positions": {"count": 2, "radius": 120, "exclude": [1, 2]}}, "no usable positions"),
        ({"positions": {"count": 12, "radius": -5}}, "negative"),
        ({"correction": {"mass": "heavy", "angle": 0, "radius": 120}}, "must be a finite number"),
        ({"strip": {"grams_per_mm": 0.2, "min_mm": 10, "step_mm": 1}}, "not both"),
        ({"max_pieces_per_position": 0}, "at least 1"),
    ],
)
def test_bad_input_is_one_line_and_exit_2(monkeypatch, capsys, change: dict, message: str) -> None:
    doc = dict(ISSUE_EXAMPLE, **change)
    code, out, err = _run(monkeypatch, capsys, doc)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and message in err and err.startswith("runtrue allocate: ")


@pytest.mark.parametrize("text", ["", "{", "[1, 2]", '{"positions": {"count": 3, "radius": 1}}', "NaN"])
def test_unreadable_input_is_one_line_and_exit_2(monkeypatch, capsys, text: str) -> None:
    code, out, err = _run(monkeypatch, capsys, text)
    assert code == 2 and out == "" and err.count("\n") == 1


def test_missing_file_is_one_line_and_exit_2(tmp_path: Path, capsys) -> None:
    assert main(["allocate", str(tmp_path / "nope.json")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "cannot read" in err


@pytest.mark.slow
def test_console_script_never_prints_a_traceback() -> None:
    proc = subprocess.run([sys.executable, "-m", "runtrue", "allocate", "-"], input='{"stock": "x"}',
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr
