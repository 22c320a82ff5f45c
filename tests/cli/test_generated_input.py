"""Generated argv and JSON for every command (hypothesis): whatever is typed or piped in, the
outcome is exit 0, or one line on standard error with exit 2; never a traceback, never a bug."""

from __future__ import annotations

import json
import os

import pytest
from cli_harness import assert_contract, no_application, run_cli
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

pytestmark = pytest.mark.slow

# RUNTRUE_FUZZ_EXAMPLES=2000 for a longer hunt by hand (random, not repeatable); CI runs 60, repeatable.
_EXAMPLES = int(os.environ.get("RUNTRUE_FUZZ_EXAMPLES", "60"))
SETTINGS = settings(max_examples=_EXAMPLES, deadline=None, derandomize="RUNTRUE_FUZZ_EXAMPLES" not in os.environ,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

# Values a user might type, including the ones that broke runtrue before.
VALUES = st.sampled_from([
    "0", "1", "2", "3", "-1", "1e30", "1e-30", "nan", "inf", "-inf", "x", "", " ", "9" * 25, "0x10",
    "sim:fan", "sim:roller", "sim:nosuch", "manual", "no/such/dir/x", "/tmp", "-", "G6.3", "6.3", "all",
    "0,1", "7", "rising", "falling", "csv", "json", "\x00", "é", "--", "-h",
])

OPTIONS = {
    "measure": ["--port", "--revs", "--json", "--seed", "--rate", "--edge", "--channels", "--timeout"],
    "demo": ["--scenario", "--seed", "--json", "--revs", "--max-runs", "--no-phase", "--resume", "--auto", "--db"],
    "app": ["--port", "--seed"],
    "scenarios": [],
    "tolerance": ["--grade", "--mass-kg", "--rpm", "--planes", "--distances-mm", "--journal-load-kg"],
    "device": ["check", "install", "--port", "--revs"],
    "jobs": ["list", "show", "report", "export", "--open", "--machine", "--format", "--db"],
}


@st.composite
def argvs(draw: st.DrawFn) -> list[str]:
    command = draw(st.sampled_from(sorted(OPTIONS)))
    tokens = draw(st.lists(st.one_of(st.sampled_from(OPTIONS[command] or ["--x"]), VALUES), max_size=6))
    argv = [command, *tokens]
    if command in ("measure", "device") and "--port" not in argv:
        argv += ["--port", draw(st.sampled_from(["sim:fan", "sim:nosuch", "/dev/no-such-meter"]))]
    if command == "measure":
        argv += ["--revs", "2"]  # a real measurement stays short; the generated --revs comes first
    if "-h" in argv or "--help" in argv:
        argv.remove("-h") if "-h" in argv else None
    return argv


@SETTINGS
@given(argv=argvs())
def test_any_argv_gives_a_result_or_one_line_and_exit_2(argv: list[str], monkeypatch, capsys, tmp_path) -> None:
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("RUNTRUE_DATA_DIR", str(tmp_path))
    no_application(monkeypatch)
    o = run_cli(monkeypatch, capsys, argv)
    event(f"exit {o.code}")
    assert_contract(o, argv)


# ---- JSON ----------------------------------------------------------------------------------------
NUMBERS = st.one_of(
    st.integers(min_value=-10**20, max_value=10**20),
    st.floats(allow_nan=False, allow_infinity=False),
    st.sampled_from([0, 1, 2, -1, 1e30, 1e308, -1e308, 1e-300, 0.5, 12, 120, 360]),
)
LEAVES = st.one_of(st.none(), st.booleans(), NUMBERS, st.text(max_size=8))
ANY_JSON = st.recursive(LEAVES, lambda kids: st.one_of(st.lists(kids, max_size=4),
                                                        st.dictionaries(st.text(max_size=6), kids, max_size=4)),
                        max_leaves=20)


def _maybe(value: st.SearchStrategy) -> st.SearchStrategy:
    """Mostly a plausible value, sometimes any number or any JSON leaf."""
    return st.integers(0, 11).flatmap(lambda k: value if k < 11 else st.one_of(NUMBERS, LEAVES))


@st.composite
def solve_docs(draw: st.DrawFn) -> dict:
    def reading() -> dict:
        d = {"amp": draw(_maybe(st.floats(0, 20))), "phase": draw(_maybe(st.floats(0, 360)))}
        if with_spread:
            d["spread"] = draw(_maybe(st.floats(0, 1)))
        return d

    n_pickups = draw(st.integers(1, 2))
    with_spread = draw(st.booleans())
    runs = [{"readings": [reading() for _ in range(n_pickups)]}]
    for _ in range(draw(st.integers(1, 3))):
        weight = {"plane": draw(_maybe(st.integers(1, 2))), "mass": draw(_maybe(st.floats(0.1, 100))),
                  "angle": draw(_maybe(st.floats(0, 360))), "radius": draw(_maybe(st.floats(10, 500)))}
        runs.append({"weights": [weight], "readings": [reading() for _ in range(n_pickups)]})
    doc: dict = {"runs": runs}
    if draw(st.booleans()):
        doc["radius"] = {draw(st.sampled_from(["1", "2", "0", "x", "99"])): draw(_maybe(st.floats(10, 500)))}
    if draw(st.booleans()):
        doc["speed_rpm"] = draw(_maybe(st.floats(100, 5000)))
    return doc


@st.composite
def allocate_docs(draw: st.DrawFn) -> dict:
    doc: dict = {"correction": {"mass": draw(_maybe(st.floats(0, 50))), "angle": draw(_maybe(st.floats(0, 360))),
                                "radius": draw(_maybe(st.floats(10, 300)))}}
    kind = draw(st.sampled_from(["count", "angles", "list", "continuous", "junk"]))
    radius = draw(_maybe(st.floats(10, 300)))
    if kind == "count":
        doc["positions"] = {"count": draw(_maybe(st.integers(1, 24))), "radius": radius}
    elif kind == "angles":
        doc["positions"] = {"angles": draw(st.lists(_maybe(st.floats(0, 360)), max_size=6)), "radius": radius}
    elif kind == "list":
        doc["positions"] = draw(st.lists(st.fixed_dictionaries({"angle": _maybe(st.floats(0, 360)),
                                                                "radius": _maybe(st.floats(10, 300))}), max_size=6))
    elif kind == "continuous":
        doc["positions"] = {"continuous": True, "radius": radius}
    else:
        doc["positions"] = draw(ANY_JSON)
    if draw(st.booleans()):
        doc["stock"] = draw(st.lists(st.fixed_dictionaries({"mass": _maybe(st.floats(0.1, 20)),
                                                            "count": _maybe(st.integers(0, 8))}), max_size=3))
    else:
        doc["strip"] = {"grams_per_mm": draw(_maybe(st.floats(0.01, 2))), "min_mm": draw(_maybe(st.floats(1, 20))),
                        "step_mm": draw(_maybe(st.floats(0.1, 5)))}
    for key in ("max_pieces_per_position", "speed_rpm", "good_enough", "max_nodes"):
        if draw(st.integers(0, 3)) == 0:
            doc[key] = draw(NUMBERS)
    return doc


@pytest.mark.parametrize("command", ["solve", "allocate"])
@SETTINGS
@given(doc=ANY_JSON)
def test_any_json_value_is_answered_or_refused_in_one_line(command: str, doc, monkeypatch, capsys) -> None:
    o = run_cli(monkeypatch, capsys, [command, "-"], json.dumps(doc))
    assert_contract(o, [command, json.dumps(doc)[:200]])


@SETTINGS
@given(doc=solve_docs())
def test_solve_never_prints_a_correction_beyond_a_balance_weight(doc: dict, monkeypatch, capsys) -> None:
    text = json.dumps(doc)
    o = run_cli(monkeypatch, capsys, ["solve", "-"], text)
    event(f"exit {o.code}")
    assert_contract(o, ["solve", text[:300]])
    if o.code == 0:
        out = json.loads(o.out)
        for c in out["corrections"]:
            assert 0 <= c["mass"] <= 50_000 and 1 <= c["radius"] <= 10_000, text


@SETTINGS
@given(doc=allocate_docs())
def test_allocate_answers_or_refuses_near_valid_inputs(doc: dict, monkeypatch, capsys) -> None:
    text = json.dumps(doc)
    o = run_cli(monkeypatch, capsys, ["allocate", "-"], text)
    event(f"exit {o.code}")
    assert_contract(o, ["allocate", text[:300]])
    if o.code == 0:
        out = json.loads(o.out)
        assert all(p["mass"] >= 0 for p in out["placements"])
