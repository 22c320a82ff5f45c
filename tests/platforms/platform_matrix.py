"""Would `pip install runtrue` (and its firmware and test extras) succeed on each machine a
technician may use?  Resolved with pip itself against the package index's files for every
target platform and Python version, so a dependency that would break an install fails CI, not a
user.

How: one ``pip install --dry-run --report`` per (platform, Python) with ``--only-binary=:all:``
and ``--platform``/``--python-version``/``--implementation cp``, on PyPI only (this machine's pip
configuration, mirrors and constraints are switched off).  Two things pip does not do for another
platform are done here:

* environment markers: pip evaluates them for the machine it runs on, so the top-level
  requirements are filtered here with the target's marker environment (PEP 508), and after the
  resolution every resolved package's own ``Requires-Dist`` is evaluated for the target too; a
  dependency the target needs but pip left out (e.g. one only for Windows) is added and the
  resolution repeated;
* source distributions: where a requirement (top-level, or a dependency's dependency, found by
  resolving one level at a time) has no wheel for the target, an sdist is accepted (it builds on the machine), reported, and must be listed in
  :data:`EXPECTED_SOURCE_BUILDS` with the reason, so a new source-only dependency fails the
  check until someone decides it is acceptable.

Union of the three groups resolved at once: with binaries only, each package's candidates are
fixed, so if the union resolves, each group (a subset with its dependency closure) does too.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import subprocess
import sys
import tempfile
from collections.abc import Iterable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

from packaging.requirements import Requirement
from packaging.specifiers import SpecifierSet
from packaging.utils import canonicalize_name
from packaging.version import InvalidVersion, Version

try:
    import tomllib
except ImportError:  # Python 3.10: pytest brings tomli there
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[2]
INDEX_URL = "https://pypi.org/simple"
PYTHONS = ("3.10", "3.11", "3.12", "3.13")
PIP_TIMEOUT_S = 180


@dataclass(frozen=True)
class Target:
    name: str
    key: str
    platforms: tuple[str, ...]  # pip --platform tags (manylinux tags cover older glibc too)
    sys_platform: str
    platform_machine: str
    platform_system: str
    os_name: str
    platform_release: str = ""  # the kernel's release; macOS markers compare Darwin's (macOS 12 = 21)

    def marker_env(self, python: str) -> dict[str, str]:
        return {
            "python_version": python,
            "python_full_version": python + ".0",
            "sys_platform": self.sys_platform,
            "platform_machine": self.platform_machine,
            "platform_system": self.platform_system,
            "os_name": self.os_name,
            "implementation_name": "cpython",
            "platform_python_implementation": "CPython",
            "platform_release": self.platform_release,
            "platform_version": "",
            "implementation_version": python + ".0",
            "extra": "",
        }


def manylinux(arch: str, glibc_minor: int = 31) -> tuple[str, ...]:
    """Every manylinux tag a machine with glibc 2.``glibc_minor`` takes (pip expands only the legacy
    ``manylinux2014`` name by itself, not ``manylinux_2_NN``)."""
    return (*(f"manylinux_2_{v}_{arch}" for v in range(glibc_minor, 16, -1)), f"manylinux2014_{arch}",
            f"linux_{arch}")


# glibc 2.31 is the oldest in the Linux releases in mind (Debian 11, Ubuntu 20.04); Raspberry Pi OS
# bookworm has 2.36.  macOS 12 is the oldest release taken as still common on workshop laptops
# (pip expands a macOS tag to the older releases itself).
TARGETS = (
    Target("Linux x86-64", "linux-x86_64", manylinux("x86_64"), "linux", "x86_64", "Linux", "posix"),
    Target("Linux aarch64 (64-bit Raspberry Pi OS)", "linux-aarch64", manylinux("aarch64"),
           "linux", "aarch64", "Linux", "posix"),
    Target("32-bit Raspberry Pi OS (armv7l)", "linux-armv7l", manylinux("armv7l"),
           "linux", "armv7l", "Linux", "posix"),
    Target("Raspberry Pi Zero and Pi 1 (armv6l)", "linux-armv6l", ("linux_armv6l",),
           "linux", "armv6l", "Linux", "posix"),
    Target("Windows x86-64", "win-amd64", ("win_amd64",), "win32", "AMD64", "Windows", "nt"),
    Target("macOS Apple silicon", "macos-arm64", ("macosx_12_0_arm64",), "darwin", "arm64", "Darwin", "posix",
           "21.0.0"),
    Target("macOS Intel", "macos-x86_64", ("macosx_12_0_x86_64",), "darwin", "x86_64", "Darwin", "posix",
           "21.0.0"),
)

# (target key, package) -> why building from source there is acceptable.
_NUMPY_ON_32BIT_PI = (
    "PyPI has no 32-bit ARM wheels of numpy; Raspberry Pi OS's pip also reads piwheels, which has "
    "them (not reachable from CI), or use the system's python3-numpy (README, On a Raspberry Pi)"
)
EXPECTED_SOURCE_BUILDS = {
    ("linux-armv7l", "numpy"): _NUMPY_ON_32BIT_PI,
    ("linux-armv6l", "numpy"): _NUMPY_ON_32BIT_PI,
    ("linux-armv6l", "markupsafe"): (
        "jinja2's markupsafe has no armv6l wheel on PyPI (piwheels has one); its source build needs no "
        "compiler: without one it installs its pure-Python form"
    ),
}


def requirement_groups(pyproject: Path = ROOT / "pyproject.toml") -> dict[str, list[Requirement]]:
    """The app's runtime requirements and its extras, self-references (runtrue[...]) expanded."""
    project = tomllib.loads(pyproject.read_text())["project"]
    extras = project.get("optional-dependencies", {})
    name = canonicalize_name(project["name"])

    def expand(reqs: Iterable[str]) -> list[Requirement]:
        out: list[Requirement] = []
        for text in reqs:
            req = Requirement(text)
            if canonicalize_name(req.name) == name:
                for extra in sorted(req.extras):
                    out.extend(expand(extras[extra]))
            else:
                out.append(req)
        return out

    groups = {"app": expand(project["dependencies"])}
    for extra in extras:
        groups[extra] = expand(extras[extra])
    return groups


def for_target(reqs: Iterable[Requirement], env: dict[str, str]) -> list[Requirement]:
    """The requirements that apply on the target, markers dropped (pip would judge them locally)."""
    out = []
    for req in reqs:
        if req.marker is None or req.marker.evaluate(env):
            bare = Requirement(str(req))
            bare.marker = None
            out.append(bare)
    return out


def pip_env() -> dict[str, str]:
    """PyPI only: no local mirrors, find-links or constraints from this machine's pip set-up."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("PIP_") or k in ("PIP_CERT", "PIP_DEFAULT_TIMEOUT")}
    env["PIP_CONFIG_FILE"] = os.devnull
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    return env


def pip(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "pip", *args, "--index-url", INDEX_URL], capture_output=True,
                          text=True, env=pip_env(), timeout=PIP_TIMEOUT_S)


def index_reachable() -> tuple[bool, str]:
    """(True, "") if PyPI answers, else (False, pip's last words)."""
    try:
        res = pip("index", "versions", "pyserial", "--json", "--retries", "1", "--timeout", "15")
    except subprocess.TimeoutExpired:
        return False, f"no answer from {INDEX_URL} within {PIP_TIMEOUT_S} s"
    if res.returncode == 0:
        return True, ""
    lines = [ln.strip() for ln in res.stderr.splitlines() if ln.strip()]
    network = [ln for ln in lines if re.search(r"connection|resolve|timed out|unreachable|SSL", ln, re.I)]
    why = (network or lines or [f"pip exit status {res.returncode}"])[-1]
    return False, why[:300]


@dataclass
class Outcome:
    target: Target
    python: str
    groups: tuple[str, ...] = ()
    resolved: dict[str, str] = field(default_factory=dict)  # canonical name -> version
    from_source: dict[str, str] = field(default_factory=dict)  # canonical name -> newest sdist version
    error: str = ""


def _target_args(target: Target, python: str) -> list[str]:
    args = ["--only-binary=:all:", "--python-version", python, "--implementation", "cp"]
    for plat in target.platforms:
        args += ["--platform", plat]
    return args


_NOT_FOUND = re.compile(r"No matching distribution found for ([A-Za-z0-9._-]+)")


def _sdist_version(req: Requirement, python: str) -> str | None:
    """The newest version of ``req`` with a distribution pip would take on ``python`` when sdists count."""
    res = pip("index", "versions", req.name, "--python-version", python, "--json")
    if res.returncode:
        return None
    spec = SpecifierSet(str(req.specifier))
    for text in json.loads(res.stdout).get("versions", []):
        try:
            if Version(text) in spec:
                return text
        except InvalidVersion:
            continue
    return None


def _applies(dep: Requirement, env: dict[str, str], extras: Iterable[str]) -> bool:
    """Does ``dep`` (one ``Requires-Dist`` line) apply on the target, for the extras asked for?"""
    if dep.marker is None:
        return True
    return any(dep.marker.evaluate({**env, "extra": extra}) for extra in ("", *extras))


def _conflicts(items: list[dict], resolved: dict[str, str], env: dict[str, str],
               wanted: dict[str, Requirement]) -> list[str]:
    """Requirements the resolved set breaks (checked here where pip was told --no-deps)."""
    out = []
    for item in items:
        key = canonicalize_name(item["metadata"]["name"])
        extras = wanted[key].extras if key in wanted else set()
        for text in item["metadata"].get("requires_dist", []) or []:
            dep = Requirement(text)
            got = resolved.get(canonicalize_name(dep.name))
            if got is not None and _applies(dep, env, extras) and not dep.specifier.contains(got, prereleases=True):
                out.append(f"{key} needs {dep.name}{dep.specifier}, got {got}")
    return out


def resolve(target: Target, python: str, reqs: list[Requirement]) -> Outcome:
    """Resolve ``reqs`` (already filtered for the target) as pip would on it.

    When a dependency of a dependency has no wheel for the target, pip (binaries only) can only
    say that the package needing it cannot be installed.  Then the resolution goes one level at a
    time (``--no-deps``, each package's ``Requires-Dist`` added here), so the package without a
    wheel is asked for by name and its sdist found; the versions are then checked against every
    resolved package's requirements, as pip would have checked them."""
    outcome = Outcome(target, python)
    env = target.marker_env(python)
    wanted = {canonicalize_name(r.name): r for r in reqs}
    level_by_level = False
    with tempfile.TemporaryDirectory(prefix="runtrue-resolve-") as tmp:
        for _ in range(16):  # rounds: sdist fallbacks, target-only dependencies, levels of the tree
            report = Path(tmp) / "report.json"
            res = pip("install", "--dry-run", "--ignore-installed", "--quiet", "--report", str(report),
                      "--target", str(Path(tmp) / "t"), *_target_args(target, python),
                      *(["--no-deps"] if level_by_level else []),
                      *(str(r) for r in wanted.values()))
            if res.returncode:
                m = _NOT_FOUND.search(res.stderr)
                name = canonicalize_name(m.group(1).split("[")[0].rstrip("<>=!~")) if m else ""
                if name in wanted:
                    version = _sdist_version(wanted[name], python)
                    if version is not None:
                        outcome.from_source[name] = version
                        del wanted[name]
                        continue
                if not level_by_level and "ResolutionImpossible" in res.stderr:
                    level_by_level = True
                    continue
                lines = [ln.strip() for ln in res.stderr.splitlines() if ln.strip().startswith("ERROR")]
                outcome.error = " / ".join(lines) or res.stderr.strip()[-400:]
                return outcome
            items = json.loads(report.read_text())["install"]
            resolved = {canonicalize_name(i["metadata"]["name"]): i["metadata"]["version"] for i in items}
            missing: dict[str, Requirement] = {}
            for item in items:
                key = canonicalize_name(item["metadata"]["name"])
                extras = wanted[key].extras if key in wanted else set()
                for text in item["metadata"].get("requires_dist", []) or []:
                    dep = Requirement(text)
                    if not _applies(dep, env, extras):
                        continue
                    dep_key = canonicalize_name(dep.name)
                    if dep_key not in resolved and dep_key not in outcome.from_source and dep_key not in wanted:
                        bare = Requirement(str(dep))
                        bare.marker = None
                        missing[dep_key] = bare
            if not missing:
                broken = _conflicts(items, resolved, env, wanted) if level_by_level else []
                if broken:
                    outcome.error = "conflicting requirements: " + "; ".join(broken)
                    return outcome
                outcome.resolved = resolved
                return outcome
            wanted.update(missing)
        outcome.error = "the resolution did not settle in 16 rounds"
    return outcome


# The test command is run on Linux (CI, developers) and on a Raspberry Pi: its extra is checked there,
# with the Python of Raspberry Pi OS bookworm.  The app and its firmware extra are checked everywhere.
TEST_TARGETS = ("linux-x86_64", "linux-aarch64", "linux-armv7l")
TEST_PYTHONS = ("3.11",)
# Where the reference extra (scipy) must install from wheels; tests/run tries it everywhere and the
# tests that need it skip where it did not install.
REFERENCE_TARGETS = ("linux-x86_64", "linux-aarch64")


@dataclass(frozen=True)
class Job:
    target: Target
    python: str
    groups: tuple[str, ...]
    reqs: tuple[Requirement, ...]

    def cache_key(self) -> str:
        text = "|".join(sorted(str(r) for r in self.reqs)) + "|" + " ".join(self.target.platforms)
        return f"{self.target.key}-{self.python}-{hashlib.sha256(text.encode()).hexdigest()[:16]}"


def jobs(groups: dict[str, list[Requirement]], targets: Iterable[Target] = TARGETS,
         pythons: Iterable[str] = PYTHONS) -> list[Job]:
    """One resolution per (target, Python): the app and its firmware extra, plus the test extra
    where the test command runs."""
    out = []
    for target in targets:
        for python in pythons:
            names = ["app", "firmware"]
            if target.key in TEST_TARGETS and python in TEST_PYTHONS:
                names.append("test")
                if target.key in REFERENCE_TARGETS:
                    names.append("reference")
            every = [r for g in names for r in groups.get(g, [])]
            reqs = list({str(r): r for r in for_target(every, target.marker_env(python))}.values())
            out.append(Job(target, python, tuple(n for n in names if n in groups), tuple(reqs)))
    return out


def run_job(job: Job) -> Outcome:
    outcome = resolve(job.target, job.python, list(job.reqs))
    outcome.groups = job.groups
    return outcome


def check_all(todo: list[Job], workers: int = 3) -> list[Outcome]:
    """Resolve every job, a few at a time (each is one pip process, mostly waiting on the index)."""
    with ThreadPoolExecutor(max_workers=workers) as pool:
        return list(pool.map(run_job, todo))


def summary(outcomes: list[Outcome], groups: dict[str, list[Requirement]]) -> list[str]:
    """Lines saying what was checked and what was found, per target."""
    lines = [f"resolved on {INDEX_URL} with pip --only-binary (sdists where listed), CPython "
             f"{', '.join(PYTHONS)}; requirements: " + ", ".join(f"{g} ({len(r)})" for g, r in groups.items())
             + f"; the test extra on {', '.join(TEST_TARGETS)} with Python {', '.join(TEST_PYTHONS)}"]
    app = [canonicalize_name(r.name) for r in groups.get("app", [])]
    for target in dict.fromkeys(o.target for o in outcomes):
        mine = [o for o in outcomes if o.target == target]
        ok = [o.python for o in mine if not o.error]
        tags = target.platforms if len(target.platforms) < 3 else (target.platforms[0], "...", target.platforms[-1])
        lines.append(f"  {target.name} [{' '.join(tags)}]: "
                     f"{'OK on ' + ', '.join(ok) if ok else 'FAILS'}")
        for o in mine:
            if o.error:
                lines.append(f"    Python {o.python}: {o.error}")
                continue
            shown = ", ".join(f"{n} {o.resolved[n]}" for n in app if n in o.resolved)
            src = ", ".join(f"{n} {v} FROM SOURCE" for n, v in o.from_source.items())
            lines.append(f"    Python {o.python} ({'+'.join(o.groups)}): {len(o.resolved)} packages; {shown}" + (f"; {src}" if src else ""))
    return lines
