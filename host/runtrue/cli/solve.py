"""``runtrue solve FILE|-``: balance corrections from a JSON description of the runs.

Input (a contract, kept stable for scripts)::

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

The engine is imported inside the functions that use it, so that listing the commands
(``runtrue --help``) does not load numpy.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from runtrue import validation as v
from runtrue.cli import UsageError
from runtrue.cli.jsonio import LIMITS_HELP, load_json, round_sig, round_sig_angle_deg

MAX_WEIGHTS_PER_RUN = 16

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
        + ". "
        + LIMITS_HELP
        + f" At most {v.MAX_RUNS} runs, {v.MAX_PICKUPS} pickups, planes 1-{v.MAX_PLANES}, "
        f"{MAX_WEIGHTS_PER_RUN} weights per run; weights {v.WEIGHT_MIN_G:g}-{v.WEIGHT_MAX_G:g} g at "
        f"{v.RADIUS_MIN_MM:g}-{v.RADIUS_MAX_MM:g} mm; amplitudes up to {v.AMPLITUDE_MAX:g}; speed_rpm "
        f"{v.SPEED_MIN_RPM:g}-{v.CALC_SPEED_MAX_RPM:g}. A correction more than "
        f"{v.CORRECTION_MAX_TRIAL_RATIO:g} times its plane's trial weight is refused: the trial run "
        "changed nothing measurable.",
    )
    p.add_argument("file", metavar="FILE", help="JSON file with the runs, or - for standard input")



def _shown(value: Any) -> str:
    text = json.dumps(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _number(obj: dict, key: str, where: str, required: bool = True) -> float | None:
    if key not in obj:
        if required:
            raise UsageError(f"{where}: missing \"{key}\"")
        return None
    value = obj[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise UsageError(f"{where}: \"{key}\" must be a number, got {_shown(value)}")
    try:
        x = float(value)
    except OverflowError:
        raise UsageError(f"{where}: \"{key}\" is far too large; check the units") from None
    if not math.isfinite(x):
        raise UsageError(f"{where}: \"{key}\" must be a finite number")
    return x


def _checked(check: Any, value: float, where: str, *args: Any) -> Any:
    try:
        return check(value, *args)
    except v.ValidationError as exc:
        raise UsageError(f"{where}: {exc}") from None


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
    if len(runs_in) > v.MAX_RUNS:
        raise UsageError(f"{len(runs_in)} runs given; at most {v.MAX_RUNS}")
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
        if len(weights_in) > MAX_WEIGHTS_PER_RUN:
            raise UsageError(f"{where}: {len(weights_in)} weights; at most {MAX_WEIGHTS_PER_RUN} per run")
        weights = []
        for j, w in enumerate(weights_in, start=1):
            wh = f"{where}, weight {j}"
            if not isinstance(w, dict):
                raise UsageError(f"{wh} must be an object with plane, mass, angle, radius")
            plane = w.get("plane")
            if isinstance(plane, bool) or not isinstance(plane, int) or not 1 <= plane <= v.MAX_PLANES:
                raise UsageError(f"{wh}: \"plane\" must be a whole number from 1 to {v.MAX_PLANES}, got {_shown(plane)}")
            mass = _number(w, "mass", wh)
            angle = _number(w, "angle", wh)
            radius_mm = _number(w, "radius", wh)
            assert mass is not None and angle is not None and radius_mm is not None
            if mass <= 0:
                raise UsageError(f"{wh}: \"mass\" must be above 0 g (put the direction in the angle), got {mass:g}")
            if radius_mm <= 0:
                raise UsageError(f"{wh}: \"radius\" must be above 0 mm, got {radius_mm:g}")
            _checked(v.weight_g, mass, wh, "\"mass\"")
            _checked(v.radius_mm, radius_mm, wh, "\"radius\"")
            _checked(v.angle_deg, angle, wh, "\"angle\"")
            weights.append(Weight(plane, mass, angle, radius_mm))
        readings_in = run.get("readings")
        if not isinstance(readings_in, list) or not readings_in:
            raise UsageError(f"{where}: \"readings\" must be a list with one reading per pickup")
        if len(readings_in) > v.MAX_PICKUPS:
            raise UsageError(f"{where}: {len(readings_in)} readings; at most {v.MAX_PICKUPS} pickups")
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
            _checked(v.amplitude, amp, wh, "\"amp\"")
            phase = _number(rd, "phase", wh, required=False)
            if phase is not None:
                phase = _checked(v.angle_deg, phase, wh, "\"phase\"")
            with_phase.add(phase is not None)
            readings.append(phasor(amp, phase) if phase is not None else complex(amp, 0.0))
            spread = _number(rd, "spread", wh, required=False)
            if spread is not None:
                if spread < 0:
                    raise UsageError(f"{wh}: \"spread\" must be >= 0, got {spread:g}")
                _checked(v.amplitude, spread, wh, "\"spread\"")
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
            if not (isinstance(key, str) and key.strip().isdigit() and len(key.strip()) <= 2):
                raise UsageError(f"\"radius\": key {_shown(key)} is not a plane number 1-{v.MAX_PLANES}")
            plane = int(key)
            r = _number(radius_in, key, "\"radius\"")
            assert r is not None
            if not 1 <= plane <= v.MAX_PLANES or r <= 0:
                raise UsageError(f"\"radius\": plane {key} needs a radius above 0 mm, got {r:g}")
            radius[plane] = _checked(v.radius_mm, r, "\"radius\"", f"plane {plane} radius")
    return runs, radius, with_phase == {False}


def _ap(z: complex, phase_known: bool = True) -> dict[str, float | None]:
    from runtrue.balancing import amp_phase

    amp, phase = amp_phase(z)
    ph = round_sig_angle_deg(phase) if phase_known else None
    return {"amp": round_sig(amp), "phase": ph}


def _weight(w: Any) -> dict[str, float | int]:
    return {"plane": w.plane, "mass": round_sig(w.mass_g), "angle": round_sig_angle_deg(w.angle_deg),
            "radius": round_sig(w.radius_mm)}


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
        "condition_number": round_sig(sol.condition_number) if math.isfinite(sol.condition_number) else None,
        "uncertainty": None,
        "conventions": CONVENTIONS,
    }
    if sol.mass_sd_g is not None and sol.angle_sd_deg is not None:
        out["uncertainty"] = [
            {"plane": w.plane, "mass_sd": round_sig(m), "angle_sd": round_sig(a)}
            for w, m, a in zip(sol.corrections, sol.mass_sd_g, sol.angle_sd_deg)
        ]
    if len(sol.corrections) == 2:
        sc = static_couple(sol.corrections)
        out["static_couple"] = {
            "static": {"mass": round_sig(sc.static.mass_g), "angle": round_sig_angle_deg(sc.static.angle_deg),
                       "radius": round_sig(sc.static.radius_mm)},
            "couple": [_weight(w) for w in sc.couple],
        }
    return out


def _speed(data: dict) -> float | None:
    speed = _number(data, "speed_rpm", "input", required=False)
    if speed is None:
        return None
    try:
        return v.speed_rpm(speed, calc=True)
    except v.ValidationError as exc:
        raise UsageError(f"\"speed_rpm\": {exc}") from None


def check_plausible(sol: Any, runs: list) -> None:
    """Refuse a correction that means nothing: beyond any balance weight, or far beyond the trial
    weight of its plane (the trial run changed nothing measurable)."""
    for w in sol.corrections:
        if not (math.isfinite(w.mass_g) and math.isfinite(w.radius_mm)):
            raise UsageError(f"plane {w.plane}: no finite correction; check that each trial run changed the readings")
        trial_gmm = max((t.mass_g * t.radius_mm for run in runs[1:] for t in run.weights if t.plane == w.plane),
                        default=0.0)
        try:
            v.check_correction_plausible(w.mass_g * w.radius_mm, trial_gmm, w.plane)
        except v.ValidationError as exc:
            raise UsageError(str(exc)) from None
        if w.mass_g > v.WEIGHT_MAX_G:
            raise UsageError(f"plane {w.plane}: the correction would be {w.mass_g:.3g} g, beyond any balance weight "
                             f"({v.WEIGHT_MAX_G:g} g); check the readings' units and that the trial runs changed them")


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
    check_plausible(sol, runs)
    out = solution_json(sol)
    if speed is not None:
        for entry, w in zip(out["corrections"], sol.corrections):
            # Below the lightest weight (round-off of a zero correction) there is nothing to hold.
            entry["force_n"] = (round_sig(centrifugal_force_n(w.mass_g, w.radius_mm, speed))
                                if w.mass_g >= v.WEIGHT_MIN_G else 0.0)
        out["safety"] = SAFETY
    json.dump(out, sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0
