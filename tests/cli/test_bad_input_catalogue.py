"""A catalogue of bad inputs for every command, as a user or a faulty file gives them: each ends
with exit status 2, one line on standard error saying what is wrong, no traceback, and in
bounded time (generously bounded: these are refusals, not work)."""

from __future__ import annotations

import json
import sqlite3
import sys
from pathlib import Path

import pytest
from cli_harness import assert_contract, no_application, run_cli

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from odd_jobs import make_odd_database  # noqa: E402

REFUSAL_BOUND_S = 30.0  # a refusal that takes longer than this is a hang (normally well under 1 s)

SOLVE_OK = {"runs": [{"readings": [{"amp": 7.9, "phase": 41}]},
                     {"weights": [{"plane": 1, "mass": 15, "angle": 0, "radius": 120}],
                      "readings": [{"amp": 4.6, "phase": 97}]}]}
ALLOC_OK = {"correction": {"mass": 9.4, "angle": 212.5, "radius": 120},
            "positions": {"count": 12, "first_angle": 0, "radius": 120},
            "stock": [{"mass": 1, "count": 6}, {"mass": 2, "count": 6}]}


def _with(doc: dict, path: list, value: object) -> str:
    d = json.loads(json.dumps(doc))
    node = d
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = value
    return json.dumps(d)


DEEP = "[" * 100_000 + "]" * 100_000

# (name, argv, standard input, a fragment the message must contain)
CATALOGUE: list[tuple[str, list[str], str, str]] = [
    ("unknown command", ["bogus"], "", "invalid choice"),
    ("unknown option", ["measure", "--bogus"], "", "unrecognized"),
    # measure
    ("measure negative seed", ["measure", "--port", "sim:fan", "--seed", "-1"], "", "--seed"),
    ("measure seed beyond 32 bits", ["measure", "--port", "sim:fan", "--seed", "9" * 30], "", "--seed"),
    ("measure absurd revs", ["measure", "--port", "sim:fan", "--revs", "100000000000"], "", "at most"),
    ("measure one rev", ["measure", "--port", "sim:fan", "--revs", "1"], "", "at least 2"),
    ("measure revs not a number", ["measure", "--port", "sim:fan", "--revs", "many"], "", "--revs"),
    ("measure timeout nan", ["measure", "--port", "sim:fan", "--timeout", "nan"], "", "finite"),
    ("measure timeout inf", ["measure", "--port", "sim:fan", "--timeout", "inf"], "", "finite"),
    ("measure timeout zero", ["measure", "--port", "sim:fan", "--timeout", "0"], "", "--timeout"),
    ("measure rate out of range", ["measure", "--port", "sim:fan", "--rate", "99"], "", "--rate"),
    ("measure bad channels", ["measure", "--port", "sim:fan", "--channels", "7"], "", "channel"),
    ("measure unknown scenario", ["measure", "--port", "sim:nosuch"], "", "nosuch"),
    ("measure port that does not exist", ["measure", "--port", "/dev/no-such-meter"], "", "no-such-meter"),
    ("measure spy into a folder", ["measure", "--port", "sim:fan", "--revs", "2", "--spy", "/"], "", "runtrue measure"),
    # demo
    ("demo negative seed", ["demo", "--seed", "-1"], "", "--seed"),
    ("diagnose negative seed", ["diagnose", "--port", "sim:fan", "--seed", "-1"], "", "--seed"),
    ("diagnose timeout nan", ["diagnose", "--port", "sim:fan", "--timeout", "nan"], "", "finite"),
    ("diagnose revs beyond the limit", ["diagnose", "--port", "sim:fan", "--revs", "100000000000"], "", "--revs"),
    ("diagnose capture too short", ["diagnose", "--port", "sim:fan", "--capture", "10"], "", "--capture"),
    ("diagnose bad channels", ["diagnose", "--port", "sim:fan", "--channels", "7"], "", "--channels"),
    ("coastdown recording without end", ["coastdown", "--port", "sim:fan", "--max-s", "inf"], "", "finite"),
    ("coastdown negative speed", ["coastdown", "--port", "sim:fan", "--from-rpm", "-5"], "", "--from-rpm"),
    ("coastdown timeout inf", ["coastdown", "--port", "sim:fan", "--timeout", "inf"], "", "finite"),
    ("demo unknown scenario", ["demo", "--scenario", "nosuch"], "", "nosuch"),
    ("demo auto options without auto", ["demo", "--json"], "", "--auto"),
    ("demo max runs absurd", ["demo", "--auto", "--max-runs", "1000000"], "", "--max-runs"),
    ("demo resume without db", ["demo", "--auto", "--resume", "1"], "", "--db"),
    ("demo db is a folder", ["demo", "--auto", "--db", "/tmp"], "", "folder"),
    ("demo resume beyond 64 bits", ["demo", "--auto", "--db", "x.sqlite", "--resume", "9" * 25], "", "job number"),
    ("demo no-phase on two planes", ["demo", "--auto", "--no-phase", "--scenario", "roller"], "", "one plane"),
    # app
    ("app empty port", ["app", "--port", " "], "", "--port"),
    ("app unknown scenario", ["app", "--port", "sim:nosuch"], "", "nosuch"),
    # solve
    ("solve JSON nested 100000 deep", ["solve", "-"], DEEP, "nested"),
    ("solve not JSON", ["solve", "-"], "runs: yes", "not valid JSON"),
    ("solve NaN", ["solve", "-"], '{"runs": [NaN]}', "NaN"),
    ("solve number too large", ["solve", "-"], '{"runs": [1e999]}', "too large"),
    ("solve huge integer", ["solve", "-"], '{"runs": [' + "9" * 5000 + "]}", "digits"),
    ("solve plane 10^30", ["solve", "-"], _with(SOLVE_OK, ["runs", 1, "weights", 0, "plane"], 10**30), "digits"),
    ("solve plane 10^20", ["solve", "-"], _with(SOLVE_OK, ["runs", 1, "weights", 0, "plane"], 10**20), "plane"),
    ("solve plane as float 1e30", ["solve", "-"], _with(SOLVE_OK, ["runs", 1, "weights", 0, "plane"], 1e30), "plane"),
    ("solve trial mass 1e9 g", ["solve", "-"], _with(SOLVE_OK, ["runs", 1, "weights", 0, "mass"], 1e9), "units"),
    ("solve radius 1e30", ["solve", "-"], _with(SOLVE_OK, ["runs", 1, "weights", 0, "radius"], 1e30), "radius"),
    ("solve amplitude 1e300", ["solve", "-"], _with(SOLVE_OK, ["runs", 0, "readings", 0, "amp"], 1e300), "amp"),
    ("solve trial changed nothing", ["solve", "-"],
     _with(SOLVE_OK, ["runs", 1, "readings", 0], {"amp": 7.9, "phase": 41.0000001}), "barely changed"),
    ("solve trial changed nothing at all", ["solve", "-"],
     _with(SOLVE_OK, ["runs", 1, "readings", 0], {"amp": 7.9, "phase": 41}), "solve"),
    ("solve speed absurd", ["solve", "-"], json.dumps({**SOLVE_OK, "speed_rpm": 1e12}), "speed"),
    ("solve too many runs", ["solve", "-"], json.dumps({"runs": SOLVE_OK["runs"] * 60}), "at most"),
    ("solve file is a folder", ["solve", "/"], "", "folder"),
    ("solve file missing", ["solve", "/no/such/file.json"], "", "cannot read"),
    ("solve binary input", ["solve", "-"], "\udcff\udcfe", "UTF-8"),
    # allocate
    ("allocate correction 1e308 g", ["allocate", "-"], _with(ALLOC_OK, ["correction", "mass"], 1e308), "correction mass"),
    ("allocate 10^9 positions", ["allocate", "-"], _with(ALLOC_OK, ["positions", "count"], 10**9), "at most"),
    ("allocate 10^9 pieces", ["allocate", "-"], _with(ALLOC_OK, ["stock", 0, "count"], 10**9), "at most"),
    ("allocate max nodes absurd", ["allocate", "-"], json.dumps({**ALLOC_OK, "max_nodes": 10**12}), "max_nodes"),
    ("allocate strip step tiny", ["allocate", "-"],
     json.dumps({**{k: v for k, v in ALLOC_OK.items() if k != "stock"},
                 "strip": {"grams_per_mm": 0.5, "min_mm": 5, "step_mm": 1e-9}}), "strip"),
    ("allocate radius negative", ["allocate", "-"], _with(ALLOC_OK, ["positions", "radius"], -5), "radius"),
    ("allocate nested deep", ["allocate", "-"], DEEP, "nested"),
    # tolerance
    ("tolerance grade absurd", ["tolerance", "--grade", "1e308", "--mass-kg", "1", "--rpm", "100"], "", "--grade"),
    ("tolerance mass 1e30 kg", ["tolerance", "--grade", "6.3", "--mass-kg", "1e30", "--rpm", "1000"], "", "rotor mass"),
    ("tolerance rpm nan", ["tolerance", "--grade", "6.3", "--mass-kg", "1", "--rpm", "nan"], "", "--rpm"),
    ("tolerance missing mass", ["tolerance", "--grade", "6.3", "--rpm", "100"], "", "--mass-kg"),
    # device
    ("device check negative revs", ["device", "check", "--port", "sim:fan", "--revs", "-1"], "", "--revs"),
    ("device check unknown scenario", ["device", "check", "--port", "sim:nosuch"], "", "nosuch"),
    ("device check missing port", ["device", "check", "--port", "/dev/no-such-meter"], "", "no-such-meter"),
    # jobs
    ("jobs db is a folder", ["jobs", "--db", "/tmp", "list"], "", "folder"),
    ("jobs db missing", ["jobs", "--db", "/no/such.sqlite", "list"], "", "no job database"),
    ("jobs job id beyond 64 bits", ["jobs", "show", "9" * 25], "", "job number"),
    ("jobs job id zero", ["jobs", "show", "0"], "", "job number"),
    ("jobs no action", ["jobs"], "", "say what to do"),
]


@pytest.fixture
def not_a_database(tmp_path: Path) -> Path:
    p = tmp_path / "notes.txt"
    p.write_text("this is not a database\n" * 100)
    return p


@pytest.mark.parametrize("name,argv,stdin,fragment", CATALOGUE, ids=[c[0] for c in CATALOGUE])
def test_bad_input_is_refused_in_one_line_with_exit_2(name, argv, stdin, fragment, monkeypatch, capsys, tmp_path):
    monkeypatch.chdir(tmp_path)
    no_application(monkeypatch)
    o = run_cli(monkeypatch, capsys, argv, stdin)
    assert_contract(o, argv)
    assert o.code == 2, (name, o.out[:200])
    assert fragment in o.err, (name, o.err)
    assert o.seconds < REFUSAL_BOUND_S, (name, o.seconds)


def test_a_file_that_is_not_a_database_is_named(monkeypatch, capsys, not_a_database) -> None:
    for argv in (["jobs", "--db", str(not_a_database), "list"],
                 ["demo", "--auto", "--db", str(not_a_database), "--resume", "1"]):
        o = run_cli(monkeypatch, capsys, argv)
        assert_contract(o, argv)
        assert o.code == 2 and "not a runtrue job database" in o.err


def test_a_database_from_a_newer_runtrue_is_refused_not_changed(monkeypatch, capsys, tmp_path) -> None:
    db = tmp_path / "newer.sqlite"
    with sqlite3.connect(db) as c:
        c.execute("PRAGMA user_version=99")
    o = run_cli(monkeypatch, capsys, ["jobs", "--db", str(db), "list"])
    assert o.code == 2 and "newer runtrue" in o.err
    with sqlite3.connect(db) as c:
        assert c.execute("PRAGMA user_version").fetchone()[0] == 99


@pytest.mark.slow
def test_odd_records_are_named_and_the_other_jobs_still_listed(monkeypatch, capsys, tmp_path) -> None:
    db = tmp_path / "odd.sqlite"
    ids = make_odd_database(db)
    o = run_cli(monkeypatch, capsys, ["jobs", "--db", str(db), "list"])
    assert o.code == 0, o.err
    assert f"unreadable record #{ids['missing_field']} (job): missing field 'speed_rpm'" in o.out
    assert f"unreadable record #{ids['bad_result']} (job): not valid JSON" in o.out
    assert "trial_set" in o.out and "1e+09 g" in o.out  # the absurd trial, on the open job's row
    for kind in ("missing_field", "bad_result"):
        o = run_cli(monkeypatch, capsys, ["jobs", "--db", str(db), "show", str(ids[kind])])
        assert_contract(o, ["show", kind])
        assert o.code == 2 and f"unreadable record #{ids[kind]}" in o.err
    o = run_cli(monkeypatch, capsys, ["jobs", "--db", str(db), "show", str(ids["stopped_empty"])])
    assert o.code == 0 and "stopped" in o.out
    o = run_cli(monkeypatch, capsys, ["demo", "--auto", "--db", str(db), "--resume", str(ids["huge_trial"])])
    assert_contract(o, ["demo resume huge trial"])
    assert o.code == 2 and "cannot be resumed" in o.err


def test_output_piped_into_a_reader_that_stops_ends_quietly(monkeypatch, capsys) -> None:
    class ClosedPipe:
        def write(self, text: str) -> int:
            raise BrokenPipeError(32, "Broken pipe")

        def flush(self) -> None:
            raise BrokenPipeError(32, "Broken pipe")

        def fileno(self) -> int:
            raise OSError("no file")

    monkeypatch.setattr(sys, "stdout", ClosedPipe())
    from runtrue.cli import main

    for argv in (["scenarios"], ["tolerance", "--grade", "6.3", "--mass-kg", "10", "--rpm", "1500"]):
        assert main(argv) == 0
    assert capsys.readouterr().err == ""


@pytest.mark.slow
def test_a_real_pipe_into_head_ends_quietly(tmp_path) -> None:
    import subprocess

    code = ("import sys; from runtrue.cli import main; sys.exit(main(['jobs', '--db', sys.argv[1], 'list']))")
    db = tmp_path / "many.sqlite"
    make_odd_database(db)
    p = subprocess.run(
        f"'{sys.executable}' -c \"{code}\" '{db}' | head -c 1", shell=True, capture_output=True, text=True,
        timeout=60,
    )
    assert p.stderr == "" and len(p.stdout) == 1
