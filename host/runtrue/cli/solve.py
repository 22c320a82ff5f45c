"""``runtrue solve FILE|-``: balance corrections from a JSON description of the runs.

Input (a contract; see issue 3)::

    {"runs": [
       {"readings": [{"amp": 7.9, "phase": 41}]},
       {"weights": [{"plane": 1, "mass": 15, "angle": 0, "radius": 120}],
        "readings": [{"amp": 4.6, "phase": 97}]}],
     "radius": {"1": 120}}

``runs[0]`` is the reference state; later runs list the weights present relative to it (plane
from 1, mass g, angle deg from the mark against rotation, radius mm) and one reading per pickup
(``amp`` in any one unit, ``phase`` the lag in degrees after the mark; optional ``spread``, the
standard deviation of the reading in the amp unit, gives uncertainties).  Without ``phase`` the
amplitude-only (four-run) method is used.  Output: ``corrections``, ``influence`` (per pickup,
per plane), ``predicted``, ``warnings``; added keys: ``method``, ``condition_number``,
``uncertainty``, ``static_couple`` (two planes), ``conventions``, and, when the input gives
``speed_rpm`` (the highest speed the rotor will run), ``force_n`` on each correction (the
centrifugal force the weight must withstand) and a ``safety`` sentence.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from runtrue.cli import UsageError
from runtrue.cli.jsonio import load_json

SAFETY = (
    "Rotating machinery can kill: stop and lock out the machine before fitting weights, secure "
    "each weight for the force shown, never exceed the rotor's rated speed, and stand clear of "
    "the plane of rotation on start-up. Local codes, the machine maker's instructions and "
    "licensed practice come first."
)

CONVENTIONS = (
    "phase: lag in degrees after the reference mark; weight angle: from the mark against the "
    "direction of rotation; influence: reading units per g*mm at 0 deg; corrections: weights to "
    "add to the rotor with all trial weights removed"
)


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "solve",
        help="compute balance corrections from reference and trial runs (JSON in, JSON out)",
        description="Read runs as JSON from FILE (or - for standard input) and print the "
        "corrections, influence coefficients, predicted readings and warnings as JSON. "
        + CONVENTIONS
        + ".",
    )
    p.add_argument("file", metavar="FILE", help="JSON file with the runs, or - for standard input")



def _number(obj: dict, key: str, where: str, required: bool = True) -> float | None:
    if key not in obj:
        if required:
            raise UsageError(f"{where}: missing \"{key}\"")
        return None
    v = obj[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise UsageError(f"{where}: \"{key}\" must be a number, got {json.dumps(v)}")
    if not math.isfinite(float(v)):
        raise UsageError(f"{where}: \"{key}\" must be a finite number")
    return float(v)


def parse_runs(data: Any) -> tuple[list, dict[int, float] | None, bool]:
    """(runs, radius per plane or None, amplitude_only) from the parsed JSON, or UsageError."""
    from runtrue.balancing import Run, Weight, phasor

    if not isinstance(data, dict):
        raise UsageError("the input must be a JSON object with a \"runs\" list")
    runs_in = data.get("runs")
    if runs_in is None:
        raise UsageError("missing \"runs\": give the reference run and the trial runs")
    if not isinstance(runs_in, list):
        raise UsageError("\"runs\" must be a list of runs")
    if len(runs_in) < 2:
        raise UsageError(f"{len(runs_in)} run(s) given; need the reference run and at least one trial run per plane")
    runs = []
    with_phase: set[bool] = set()
    for k, run in enumerate(runs_in, start=1):
        where = f"run {k}"
        if not isinstance(run, dict):
            raise UsageError(f"{where} must be an object with \"readings\" (and \"weights\")")
        weights_in = run.get("weights", [])
        if not isinstance(weights_in, list):
            raise UsageError(f"{where}: \"weights\" must be a list")
        if k == 1 and weights_in:
            raise UsageError("run 1 is the reference state and carries no weights relative to itself")
        weights = []
        for j, w in enumerate(weights_in, start=1):
            wh = f"{where}, weight {j}"
            if not isinstance(w, dict):
                raise UsageError(f"{wh} must be an object with plane, mass, angle, radius")
            plane = w.get("plane")
            if isinstance(plane, bool) or not isinstance(plane, int) or plane < 1:
                raise UsageError(f"{wh}: \"plane\" must be a whole number from 1, got {json.dumps(plane)}")
            mass = _number(w, "mass", wh)
            angle = _number(w, "angle", wh)
            radius_mm = _number(w, "radius", wh)
            assert mass is not None and angle is not None and radius_mm is not None
            if mass <= 0:
                raise UsageError(f"{wh}: \"mass\" must be above 0 g (put the direction in the angle), got {mass:g}")
            if radius_mm <= 0:
                raise UsageError(f"{wh}: \"radius\" must be above 0 mm, got {radius_mm:g}")
            weights.append(Weight(plane, mass, angle, radius_mm))
        readings_in = run.get("readings")
        if not isinstance(readings_in, list) or not readings_in:
            raise UsageError(f"{where}: \"readings\" must be a list with one reading per pickup")
        readings: list[complex] = []
        spreads: list[float] = []
        for i, rd in enumerate(readings_in, start=1):
            wh = f"{where}, pickup {i}"
            if not isinstance(rd, dict):
                raise UsageError(f"{wh}: a reading is an object with \"amp\" and \"phase\"")
            amp = _number(rd, "amp", wh)
            assert amp is not None
            if amp < 0:
                raise UsageError(f"{wh}: \"amp\" must be >= 0 (put the direction in the phase), got {amp:g}")
            phase = _number(rd, "phase", wh, required=False)
            with_phase.add(phase is not None)
            readings.append(phasor(amp, phase) if phase is not None else complex(amp, 0.0))
            spread = _number(rd, "spread", wh, required=False)
            if spread is not None:
                if spread < 0:
                    raise UsageError(f"{wh}: \"spread\" must be >= 0, got {spread:g}")
                spreads.append(spread)
        if spreads and len(spreads) != len(readings):
            raise UsageError(f"{where}: give \"spread\" for every reading or for none")
        runs.append(Run(weights, readings, spreads or None))
    if len(with_phase) > 1:
        raise UsageError("some readings have a phase and some do not; give phase everywhere, or nowhere "
                         "(amplitude-only method)")
    radius_in = data.get("radius")
    radius: dict[int, float] | None = None
    if radius_in is not None:
        if not isinstance(radius_in, dict):
            raise UsageError("\"radius\" must be an object: plane number -> radius in mm, e.g. {\"1\": 120}")
        radius = {}
        for key in radius_in:
            try:
                plane = int(key)
            except ValueError:
                raise UsageError(f"\"radius\": key {json.dumps(key)} is not a plane number") from None
            r = _number(radius_in, key, "\"radius\"")
            assert r is not None
            if plane < 1 or r <= 0:
                raise UsageError(f"\"radius\": plane {key} needs a radius above 0 mm, got {r:g}")
            radius[plane] = r
    return runs, radius, with_phase == {False}


def _r(x: float, digits: int = 6) -> float:
    return float(f"{x:.{digits}g}")


def _ap(z: complex, phase_known: bool = True) -> dict[str, float | None]:
    from runtrue.balancing import amp_phase

    amp, phase = amp_phase(z)
    ph = _r(phase) % 360.0 if phase_known else None
    return {"amp": _r(amp), "phase": ph}


def _weight(w: Any) -> dict[str, float | int]:
    return {"plane": w.plane, "mass": _r(w.mass_g), "angle": _r(w.angle_deg) % 360.0, "radius": _r(w.radius_mm)}


def solution_json(sol: Any) -> dict[str, Any]:
    """The JSON contract for a Solution."""
    from runtrue.balancing import static_couple

    phase_known = sol.method != "four-run"
    scale = max((abs(z) for z in sol.reference), default=0.0)
    # Round-off leaves ~1e-15 where the prediction is exactly zero; show a clean zero.
    predicted = [z if abs(z) > 1e-9 * scale else 0j for z in sol.predicted]
    out: dict[str, Any] = {
        "corrections": [_weight(w) for w in sol.corrections],
        "influence": [[_ap(a, phase_known) for a in row] for row in sol.influence],
        "predicted": [_ap(z, phase_known) for z in predicted],
        "warnings": list(sol.warnings),
        "method": sol.method,
        "condition_number": _r(sol.condition_number) if math.isfinite(sol.condition_number) else None,
        "uncertainty": None,
        "conventions": CONVENTIONS,
    }
    if sol.mass_sd_g is not None and sol.angle_sd_deg is not None:
        out["uncertainty"] = [
            {"plane": w.plane, "mass_sd": _r(m), "angle_sd": _r(a)}
            for w, m, a in zip(sol.corrections, sol.mass_sd_g, sol.angle_sd_deg)
        ]
    if len(sol.corrections) == 2:
        sc = static_couple(sol.corrections)
        out["static_couple"] = {
            "static": {"mass": _r(sc.static.mass_g), "angle": _r(sc.static.angle_deg) % 360.0,
                       "radius": _r(sc.static.radius_mm)},
            "couple": [_weight(w) for w in sc.couple],
        }
    return out


def _speed(data: dict) -> float | None:
    from runtrue.balancing import BalancingError, check_speed_rpm

    speed = _number(data, "speed_rpm", "input", required=False)
    if speed is None:
        return None
    try:
        return check_speed_rpm(speed)
    except BalancingError as exc:
        raise UsageError(f"\"speed_rpm\": {exc}") from None


def run(args: argparse.Namespace) -> int:
    from runtrue.balancing import BalancingError, centrifugal_force_n, solve, solve_amplitude_only

    data = load_json(args.file)
    runs, radius, amplitude_only = parse_runs(data)
    speed = _speed(data)
    try:
        if amplitude_only:
            r = None
            if radius:
                r = next(iter(radius.values()))
            sol = solve_amplitude_only(runs, r)
        else:
            sol = solve(runs, radius)
    except BalancingError as exc:
        raise UsageError(str(exc)) from None
    out = solution_json(sol)
    if speed is not None:
        for entry, w in zip(out["corrections"], sol.corrections):
            entry["force_n"] = _r(centrifugal_force_n(w.mass_g, w.radius_mm, speed)) if w.mass_g > 0 else 0.0
        out["safety"] = SAFETY
    json.dump(out, sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0
