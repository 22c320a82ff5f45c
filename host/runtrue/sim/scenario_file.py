"""Simulated machines described in a file a user writes (TOML or JSON, the same keys).

The format is documented in DEVELOPERS.md ("Scenario files"), with an invented example machine
in ``examples/scenarios/blower.toml``.  :func:`load_scenario_file` reads a file into a
:class:`runtrue.sim.scenarios.Scenario`; every mistake raises :class:`ScenarioFileError`
naming the file, the key (``planes[1].radius_mm``), what is wrong and what to do.  Units are in
the key names, as everywhere in runtrue.

TOML: the format of Python's ``tomllib`` (TOML 1.0, https://toml.io/en/v1.0.0).  JSON: RFC 8259.
"""

from __future__ import annotations

import json
import math
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from runtrue.readings.units import phasor
from runtrue.sim.rotor import RigidRotor, support_for
from runtrue.sim.scenario import FrontEnd, Pickup, Plane, Scenario, SpeedStep

SUFFIXES = (".toml", ".json")


class ScenarioFileError(ValueError):
    """A scenario file that cannot be used; the message says where and what to do."""


def looks_like_file(name: str) -> bool:
    """Is ``name`` meant as a scenario file (a known suffix or a path separator)?"""
    return name.lower().endswith(SUFFIXES) or "/" in name or "\\" in name


class _Reader:
    """Checks one table of the file against its keys, with the path of each key for messages."""

    def __init__(self, source: str, path: str, table: Any) -> None:
        self.source = source
        self.path = path
        if not isinstance(table, dict):
            self.fail(path or "the file", f"must be a table of keys (a [section] or {{...}}), not {_kind(table)}")
        self.table: dict[str, Any] = table
        self.used: set[str] = set()

    def key(self, name: str) -> str:
        return f"{self.path}.{name}" if self.path else name

    def fail(self, key: str, what: str) -> None:
        raise ScenarioFileError(f"{self.source}: {key}: {what}; fix it and try again "
                                "(DEVELOPERS.md, \"Scenario files\", describes every key)")

    def get(self, name: str, check: Callable[[Any], Any], default: Any = ..., what: str = "") -> Any:
        self.used.add(name)
        if name not in self.table:
            if default is ...:
                self.fail(self.key(name), f"is missing: give {what}")
            return default
        value = self.table[name]
        try:
            return check(value)
        except (TypeError, ValueError) as exc:
            self.fail(self.key(name), f"{exc} (got {value!r}); give {what}")
        return None  # not reached

    def number(self, name: str, what: str, default: Any = ..., *, low: float = -math.inf, high: float = math.inf,
               low_open: bool = False) -> Any:
        def check(v: Any) -> float:
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise ValueError("must be a number")
            if v < low or v > high or (low_open and v == low):
                lo = f"more than {low:g}" if low_open else f"at least {low:g}"
                rng = lo if high == math.inf else f"{lo} and at most {high:g}"
                raise ValueError(f"must be {rng}")
            return float(v)
        return self.get(name, check, default, what)

    def text(self, name: str, what: str, default: Any = ..., choices: tuple[str, ...] = ()) -> Any:
        def check(v: Any) -> str:
            if not isinstance(v, str) or not v.strip():
                raise ValueError("must be a non-empty text in quotes")
            if choices and v not in choices:
                raise ValueError(f"must be one of {', '.join(repr(c) for c in choices)}")
            return v
        return self.get(name, check, default, what)

    def sub(self, name: str, required: bool = False) -> _Reader | None:
        self.used.add(name)
        if name not in self.table:
            if required:
                self.fail(self.key(name), "is missing")
            return None
        return _Reader(self.source, self.key(name), self.table[name])

    def subs(self, name: str, required: bool = False) -> list[_Reader]:
        self.used.add(name)
        items = self.table.get(name)
        if items is None:
            if required:
                self.fail(self.key(name), "is missing: give at least one (a [[" + name + "]] table)")
            return []
        if not isinstance(items, list) or (required and not items):
            self.fail(self.key(name), f"must be a list of tables ([[{name}]] in TOML), not {_kind(items)}")
        return [_Reader(self.source, f"{self.key(name)}[{i}]", item) for i, item in enumerate(items)]

    def done(self) -> None:
        extra = sorted(set(self.table) - self.used)
        if extra:
            known = ", ".join(sorted(self.used))
            self.fail(self.key(extra[0]), f"is not a key runtrue knows here (known: {known}); check its spelling")


def _kind(v: Any) -> str:
    return {dict: "a table", list: "a list", str: "a text", bool: "true/false"}.get(type(v), type(v).__name__)


def _read_text(path: Path) -> dict[str, Any]:
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise ScenarioFileError(f"{path}: no such scenario file; check the path "
                                "(`runtrue scenarios` lists the built-in machines)") from None
    except OSError as exc:
        raise ScenarioFileError(f"{path}: cannot be read ({exc.strerror or exc}); check its permissions") from None
    suffix = path.suffix.lower()
    try:
        if suffix == ".json":
            data = json.loads(raw.decode("utf-8"))
        elif suffix == ".toml":
            if sys.version_info >= (3, 11):
                import tomllib
            else:  # Python 3.10: the same parser from PyPI (pyproject.toml)
                import tomli as tomllib

            data = tomllib.loads(raw.decode("utf-8"))
        else:
            raise ScenarioFileError(f"{path}: a scenario file ends in .toml or .json; rename it")
    except UnicodeDecodeError:
        raise ScenarioFileError(f"{path}: is not UTF-8 text; save it as UTF-8") from None
    except json.JSONDecodeError as exc:
        raise ScenarioFileError(f"{path}: is not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}; "
                                "fix the syntax") from None
    except ValueError as exc:  # tomllib.TOMLDecodeError is a ValueError
        raise ScenarioFileError(f"{path}: is not valid TOML: {exc}; fix the syntax") from None
    if not isinstance(data, dict):
        raise ScenarioFileError(f"{path}: must hold one table of keys at the top, not {_kind(data)}")
    return data


def load_scenario_file(path: str | Path) -> Scenario:
    """Read a scenario file (see the module doc); :class:`ScenarioFileError` on any mistake."""
    p = Path(path).expanduser()
    return scenario_from_dict(_read_text(p), str(p))


def scenario_from_dict(data: dict[str, Any], source: str = "scenario") -> Scenario:
    """Build a Scenario from the file's table (checked key by key)."""
    top = _Reader(source, "", data)
    name = top.text("name", "a short name without spaces, e.g. \"mixer\"")
    if any(c.isspace() for c in name):
        top.fail("name", f"must have no spaces (got {name!r}); use - or _ instead")
    description = top.text("description", "one line saying what the machine is", default=f"scenario file {source}")
    grade = top.number("grade_mm_s", "the balance quality grade G in mm/s, e.g. 6.3", low=0.0, low_open=True)
    line_hz = top.number("line_hz", "the mains frequency, 50 or 60 Hz", default=50.0, low=0.0)

    sp = top.sub("speed", required=True)
    assert sp is not None
    speed_rpm = sp.number("rpm", "the running speed in rpm, e.g. 1500", low=1.0, high=60000.0)
    rotation = sp.text("rotation", "\"cw\" or \"ccw\" seen from viewed_from", default="cw", choices=("cw", "ccw"))
    viewed_from = sp.text("viewed_from", "which end the angles are seen from, e.g. \"drive end\"", default="drive end")
    drift = sp.number("drift_frac", "the RMS relative speed wander, e.g. 0.002", default=0.002, low=0.0, high=0.2)
    drift_tau = sp.number("drift_tau_s", "the wander's correlation time in s", default=2.0, low=0.0, low_open=True)
    coast = sp.number("coast_down_rpm_per_s", "the deceleration when switched off, rpm/s", default=100.0,
                      low=0.0, low_open=True)
    start_rpm = sp.number("start_rpm", "the speed when the machine starts (run-up from it)", default=None, low=0.0)
    run_up = sp.number("run_up_rpm_per_s", "the run-up rate from start_rpm, rpm/s", default=None, low=0.0, low_open=True)
    if (start_rpm is None) != (run_up is None):
        sp.fail(sp.key("run_up_rpm_per_s" if run_up is None else "start_rpm"),
                "goes with the other: give both start_rpm and run_up_rpm_per_s for a run-up")
    steps: list[SpeedStep] = []
    if start_rpm is not None:
        steps.append(SpeedStep(speed_rpm, run_up, 0.0))
    for st in sp.subs("profile"):
        steps.append(SpeedStep(
            st.number("to_rpm", "the speed this step goes to, rpm", low=0.0, high=60000.0),
            st.number("rpm_per_s", "the ramp rate, rpm/s (0: at once)", default=0.0, low=0.0),
            st.number("hold_s", "how long to stay at to_rpm, s", default=0.0, low=0.0),
        ))
        st.done()
    repeat = sp.get("repeat", _boolean, default=False, what="true or false")
    sp.done()

    ro = top.sub("rotor", required=True)
    assert ro is not None
    mass = ro.number("mass_kg", "the rotor's mass in kg", low=0.0, low_open=True)
    a_mm = ro.number("bearing_a_mm", "bearing A's axial position in mm", default=0.0)
    b_mm = ro.number("bearing_b_mm", "bearing B's axial position in mm, beyond bearing A", low=a_mm, low_open=True)
    cg = ro.number("cg_mm", "the centre of gravity's axial position in mm", default=0.5 * (a_mm + b_mm))
    inertia = ro.number("transverse_inertia_kgm2", "the moment of inertia about the CG across the shaft, kg.m^2",
                        default=mass * ((b_mm - a_mm) * 1e-3) ** 2 / 12.0, low=0.0)
    share_b = min(max((cg - a_mm) / (b_mm - a_mm), 0.05), 0.95)
    supports = []
    for key, share in (("support_a", 1.0 - share_b), ("support_b", share_b)):
        su = ro.sub(key, required=True)
        assert su is not None
        supports.append(support_for(
            su.number("share_kg", "the rotor mass this support carries, kg", default=mass * share, low=0.0, low_open=True),
            su.number("natural_hz", "the support's natural frequency in Hz", low=0.0, low_open=True),
            su.number("damping_ratio", "the damping ratio, e.g. 0.05", default=0.05, low=0.0, high=2.0),
            su.number("anisotropy", "how much stiffer vertically than horizontally, e.g. 0.2", default=0.0, low=-0.9),
        ))
        su.done()
    ro.done()
    rotor = RigidRotor(mass, inertia, cg, a_mm, b_mm, supports[0], supports[1])

    planes = []
    for pl in top.subs("planes", required=True):
        positions = pl.get("positions", _positions, default=None,
                           what="the number of equally spaced holes, or \"continuous\" for a groove or rim")
        amount = pl.number("unbalance_gmm", "the initial unbalance in g.mm", low=0.0)
        angle = pl.number("unbalance_deg", "its angle from the mark against rotation, deg", default=0.0)
        planes.append(Plane(
            pl.text("name", "a name for the plane, e.g. \"drive-end disc\""),
            pl.number("axial_mm", "the plane's axial position in mm"),
            pl.number("radius_mm", "the radius weights go on, mm", low=0.0, low_open=True),
            positions,
            pl.text("positions_note", "a note on the fixing positions", default="continuous" if positions is None
                    else f"{positions} holes"),
            phasor(amount, angle),
            pl.number("first_position_deg", "the angle of position 0 from the mark, deg", default=0.0),
        ))
        pl.done()

    pickups = []
    for pk in top.subs("pickups", required=True):
        harmonics = []
        for h in pk.subs("harmonics"):
            order = h.get("order", _order, what="the running-speed order, a whole number 2 to 8")
            amp = h.number("g", "its amplitude at running speed, g peak", low=0.0)
            lag = h.number("lag_deg", "its phase lag, deg of that order's cycle", default=0.0)
            harmonics.append((order, phasor(amp, lag)))
            h.done()
        hum = []
        for h in pk.subs("line_hum"):
            hum.append((h.get("multiple", _multiple, what="the multiple of line_hz, a whole number 1 to 6"),
                        h.number("g", "its amplitude, g peak", low=0.0)))
            h.done()
        pickups.append(Pickup(
            pk.text("name", "a name for the pickup, e.g. \"motor bearing, horizontal\""),
            pk.number("axial_mm", "the pickup's axial position in mm"),
            pk.number("angle_deg", "the lab angle of its axis, deg"),
            noise_g=pk.number("noise_g", "the white noise at the input, g RMS", default=0.02, low=0.0),
            line_g=0.0,
            harmonics_g=tuple(harmonics),
            dc_offset_g=pk.number("dc_offset_g", "the sensor's zero-g offset, g", default=0.0, low=-1.0, high=1.0),
            line_hum_g=tuple(hum),
        ))
        pk.done()
    if len(pickups) > 3:
        top.fail("pickups", f"the meter has 3 channels; give at most 3 pickups (got {len(pickups)})")

    ref = top.sub("reference")
    ref_kw: dict[str, Any] = {}
    ref_angle = 0.0
    if ref is not None:
        ref_angle = ref.number("angle_deg", "the lab angle of the reference sensor, deg", default=0.0)
        ref_kw = dict(
            mark_width_deg=ref.number("mark_width_deg", "the mark's width, deg", default=15.0, low=0.5, high=180.0),
            glitch_per_rev=ref.number("glitch_per_rev", "spurious pulses per revolution, e.g. 0.002", default=0.0,
                                      low=0.0, high=5.0),
            glitch_width_us=ref.number("glitch_width_us", "a spurious pulse's length, us", default=30.0, low=0.0),
            missed_per_rev=ref.number("missed_per_rev", "the chance a mark passage is not seen", default=0.0,
                                      low=0.0, high=0.5),
            missed_marks=tuple(ref.get("missed_marks", _index_list, default=[],
                                       what="a list of mark passages never seen, counted from 0, e.g. [1, 40]")),
            edge_jitter_us=ref.number("edge_jitter_us", "the RMS timing jitter of the edges, us", default=0.5, low=0.0),
        )
        ref.done()
    top.done()
    return Scenario(
        name=name, description=description, rotor=rotor, speed_rpm=speed_rpm, rotation=rotation,
        viewed_from=viewed_from, planes=tuple(planes), pickups=tuple(pickups), ref_angle_deg=ref_angle,
        grade=grade, line_hz=line_hz, speed_drift_frac=drift, speed_drift_tau_s=drift_tau,
        coast_down_rpm_per_s=coast, front_end=FrontEnd(), start_rpm=start_rpm, speed_profile=tuple(steps),
        profile_repeat=repeat, source=source, tolerance_note=f"G {grade:g} from the scenario file",
        **ref_kw,
    )


def _boolean(v: Any) -> bool:
    if not isinstance(v, bool):
        raise ValueError("must be true or false")
    return v


def _positions(v: Any) -> int | None:
    if v == "continuous":
        return None
    if isinstance(v, bool) or not isinstance(v, int) or not 2 <= v <= 360:
        raise ValueError("must be a whole number of holes from 2 to 360, or \"continuous\"")
    return v


def _order(v: Any) -> int:
    if isinstance(v, bool) or not isinstance(v, int) or not 2 <= v <= 8:
        raise ValueError("must be a whole number from 2 to 8 (the 1x comes from the unbalance)")
    return v


def _multiple(v: Any) -> int:
    if isinstance(v, bool) or not isinstance(v, int) or not 1 <= v <= 6:
        raise ValueError("must be a whole number from 1 to 6")
    return v


def _index_list(v: Any) -> list[int]:
    if not isinstance(v, list) or any(isinstance(i, bool) or not isinstance(i, int) or i < 0 for i in v):
        raise ValueError("must be a list of whole numbers, 0 or more")
    return list(v)
