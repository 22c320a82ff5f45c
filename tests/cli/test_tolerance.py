"""``runtrue tolerance``: JSON contract (ISO 21940-11:2016 clause 6 formula) and one-line errors."""

from __future__ import annotations

import json
import math

import pytest

from runtrue.cli import main


def _json(capsys, argv: list[str]) -> dict:
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


def test_one_plane_follows_the_iso_formula(capsys) -> None:
    data = _json(capsys, ["tolerance", "--grade", "6.3", "--mass-kg", "100", "--rpm", "3000"])
    u = 1000 * 6.3 * 100 / (2 * math.pi * 3000 / 60)  # ISO 21940-11:2016 clause 6
    assert data["permissible_unbalance_gmm"] == pytest.approx(u, rel=1e-5)
    assert data["permissible_eccentricity_um"] == pytest.approx(u / 100, rel=1e-5)
    assert data["per_plane_gmm"] == pytest.approx([u], rel=1e-5)


def test_two_planes_and_unequal_distances(capsys) -> None:
    data = _json(capsys, ["tolerance", "--grade", "2.5", "--mass-kg", "40", "--rpm", "3000", "--planes", "2"])
    u = data["permissible_unbalance_gmm"]
    assert data["per_plane_gmm"] == pytest.approx([u / 2, u / 2], rel=1e-5)
    data = _json(capsys, ["tolerance", "--grade", "2.5", "--mass-kg", "40", "--rpm", "3000", "--planes", "2",
                          "--distances-mm", "200", "300"])
    assert data["per_plane_gmm"] == pytest.approx([0.6 * u, 0.4 * u], rel=1e-5)


def test_api_style_limit_on_request(capsys) -> None:
    data = _json(capsys, ["tolerance", "--grade", "2.5", "--mass-kg", "2000", "--rpm", "3600",
                          "--journal-load-kg", "1000"])
    assert data["api_limit_gmm"] == pytest.approx(4 * (1000 / 0.45359237) / 3600 * 720.0778, rel=1e-5)


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        (["--grade", "abc", "--mass-kg", "1", "--rpm", "1000"], "--grade: balance quality grade 'abc' not understood"),
        (["--grade", "nan", "--mass-kg", "1", "--rpm", "1000"], "write it like G6.3"),
        (["--grade", "6.3", "--mass-kg", "0", "--rpm", "1000"], "rotor mass"),
        (["--grade", "6.3", "--mass-kg", "1", "--rpm", "-5"], "speed"),
        (["--grade", "6.3", "--mass-kg", "1", "--rpm", "1000", "--distances-mm", "1", "2"], "--planes 2"),
        (["--grade", "6.3", "--mass-kg", "1", "--rpm", "1000", "--planes", "3"], "--planes must be 1 or 2"),
        (["--grade", "6.3", "--mass-kg", "1", "--rpm", "1000", "--planes", "2", "--distances-mm", "0", "2"],
         "distance"),
    ],
)
def test_bad_tolerance_input_is_one_line_exit_2(argv: list[str], fragment: str, capsys) -> None:
    assert main(["tolerance", *argv]) == 2
    cap = capsys.readouterr()
    assert cap.out == "" and cap.err.count("\n") == 1 and fragment in cap.err


@pytest.mark.parametrize("written", ["G6.3", "g6.3", "G 6.3", "6.3"])
def test_grade_accepted_as_the_trade_writes_it(written: str, capsys: pytest.CaptureFixture[str]) -> None:
    # ISO 21940-11:2016 names grades "G 6.3" etc.; U_per = 9549 * G * m / n (g.mm), from memory.
    assert main(["tolerance", "--grade", written, "--mass-kg", "14", "--rpm", "1470"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["permissible_unbalance_gmm"] == pytest.approx(9549 * 6.3 * 14 / 1470, rel=1e-3)
