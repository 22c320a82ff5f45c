"""``runtrue diagnose`` and ``runtrue coastdown`` end to end on the simulator: JSON contracts,
verdicts, the near-resonance warning, plots within 80 columns, clear refusals."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from runtrue.cli import main

ROOT = Path(__file__).resolve().parents[2]
RESONANT = f"sim:{ROOT / 'examples' / 'scenarios' / 'resonant_fan.toml'}"
MISALIGNED = f"sim:{ROOT / 'examples' / 'scenarios' / 'misaligned_pump.toml'}"


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.slow
def test_diagnose_json_of_an_unbalanced_fan(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "diagnose", "--port", "sim:fan", "--json", "--seed", "2", "--spectrum")
    assert code == 0, err
    d = json.loads(out)
    assert d["verdict"]["unbalance"] is True and d["go_on"] is None
    assert d["capture"] == {"frames": 4096, "rate_hz": 4000.0, "window": "Hann"}
    ch = d["channels"][0]
    assert ch["severity"]["zone"] in "ABCD" and ch["severity"]["from"] == "capture"
    assert ch["severity"]["velocity_rms_mm_s"] > 0 and ch["content"]["shares"]["one_x"] > 0.9
    assert max(ch["spectrum"]["freq_hz"]) <= 1000.0 and ch["spectrum"]["window"] == "Hann"


@pytest.mark.slow
def test_diagnose_table_of_a_misaligned_pump_says_what_to_check_and_lets_the_user_go_on(
        capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "diagnose", "--port", MISALIGNED, "--channels", "0,1", "--seed", "1")
    assert code == 0, err
    assert "Probably not" in out and "alignment" in out and "balance anyway" in out
    assert all(len(line) <= 200 for line in out.splitlines())


@pytest.mark.slow
def test_coastdown_json_warns_near_the_resonance(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "coastdown", "--port", RESONANT, "--from-rpm", "1900", "--to-rpm", "1000",
                             "--rate", "150", "--json", "--seed", "3")
    assert code == 0, err
    d = json.loads(out)
    assert d["kind"] == "coast-down" and d["balancing_rpm"] == 1480
    res = d["channels"][0]["resonances"]
    assert len(res) == 1 and 1590 < res[0]["speed_rpm"] < 1660
    assert any("10 % above" in w for w in d["warnings"])
    assert d["channels"][0]["curve"][0]["rpm"] < d["channels"][0]["curve"][-1]["rpm"]


@pytest.mark.slow
def test_coastdown_plots_fit_80_columns(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "coastdown", "--port", RESONANT, "--from-rpm", "1900", "--to-rpm", "1000",
                             "--rate", "200", "--seed", "3")
    assert code == 0, err
    plot = [line for line in out.splitlines() if not line.startswith(("WARNING", "channel", "sim:"))]
    assert all(len(line) <= 80 for line in plot)
    assert "R" in out and "B" in out and "WARNING" in out


@pytest.mark.parametrize("argv, words", [
    (["diagnose", "--port", "sim:fan", "--capture", "10"], "64 to 4096"),
    (["diagnose", "--port", "sim:fan", "--revs", "1"], "at least 3"),
    (["diagnose", "--port", "sim:nosuch"], "nosuch"),
    (["coastdown", "--port", "sim:fan", "--rate", "-5"], "positive"),
    (["diagnose", "--port", "sim:fan", "--channels", "7"], "channel"),
])
def test_bad_input_gets_one_clear_line(capsys: pytest.CaptureFixture[str], argv: list[str], words: str) -> None:
    code, out, err = run_cli(capsys, *argv)
    assert code == 2
    assert words in err and "Traceback" not in err and len(err.strip().splitlines()) == 1


@pytest.mark.slow
def test_diagnose_before_and_after_gives_both_zones(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    before = tmp_path / "before.json"
    code, out, err = run_cli(capsys, "diagnose", "--port", "sim:roller", "--json", "--seed", "5")
    assert code == 0, err
    before.write_text(out)
    code, out, err = run_cli(capsys, "diagnose", "--port", "sim:roller", "--json", "--seed", "6",
                             "--before", str(before))
    assert code == 0, err
    pairs = json.loads(out)["before_after"]
    assert [p["channel"] for p in pairs] == [c["channel"] for c in json.loads(before.read_text())["channels"]]
    for p in pairs:
        assert p["before"]["zone"] in "ABCD" and p["after"]["zone"] in "ABCD"
    bad = tmp_path / "bad.json"
    bad.write_text('{"rpm": 1}')
    code, out, err = run_cli(capsys, "diagnose", "--port", "sim:roller", "--before", str(bad))
    assert code == 2 and "not the output of" in err
