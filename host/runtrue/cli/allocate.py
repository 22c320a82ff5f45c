"""``runtrue allocate FILE|-``: turn a correction into pieces that can be fitted (JSON in, JSON out).

Input (a contract, kept stable for scripts)::

    {"correction": {"mass": 9.4, "angle": 212.5, "radius": 120},
     "positions": {"count": 12, "first_angle": 0, "radius": 120},
     "stock": [{"mass": 1, "count": 6}, {"mass": 2, "count": 6}, {"mass": 5, "count": 4}],
     "max_pieces_per_position": 3}

``positions`` may instead be ``{"angles": [...], "radius": R}`` (or ``"radii": [...]``), a list
of ``{"angle", "radius"}``, or ``{"continuous": true, "radius": R}``; an ``"exclude"`` list of
position numbers (1 = the first angle) marks positions that cannot be used.  Instead of
``stock``: ``"strip": {"grams_per_mm", "min_mm", "step_mm"[, "max_mm"]}``.  Optional:
``max_mass_per_position`` (g), ``good_enough`` (residual to stop at, g·mm),
``good_enough_fraction`` (of the correction; without either, 1 % of the correction; 0 asks
for the strictly smallest residual), ``prefer_fewer_positions``, ``speed_rpm`` (adds the
centrifugal force of each placement, ``force_n``), ``existing`` (old weights: ``{"mass",
"angle", "radius"[, "position", "may_move", "may_remove"]}``), ``max_nodes``.

Output: ``placements`` (``{"angle", "radius", "pieces": [masses]}`` or ``"length_mm"``; added
``position``, ``mass``, ``moved_existing``, ``force_n``), ``residual`` ``{"mass", "angle",
"radius"}`` at the correction radius, ``residual_fraction``; added ``optimal`` (proven under
the stated objective), ``status`` ("optimal" or "best found"),
``residual_bound_gmm``, ``pieces``, ``added_mass``, ``kept_existing``, ``removed_existing``,
``warnings``, ``conventions``.

The allocator is imported inside the functions that use it, so that listing the commands
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
from runtrue.cli.jsonio import LIMITS_HELP, load_json, round_places

MAX_NODES = v.MAX_SEARCH_NODES  # search nodes (default 5,000)
STRIP_MIN_STEP_MM = 0.1

CONVENTIONS = (
    "weight angles in degrees from the reference mark against the direction of rotation; "
    "masses in g, radii in mm; positions numbered from 1 at the first angle given; "
    "residual = correction minus what is fitted, as a mass at the correction radius"
)

SAFETY = (
    "Stop and lock out the machine before fitting weights; secure each weight for the force shown; "
    "follow the machine maker's instructions and local codes."
)


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "allocate",
        help="turn a correction into pieces at the rotor's positions (JSON in, JSON out)",
        description="Read a correction, the positions and the stock as JSON from FILE (or - for "
        "standard input) and print the placements and the residual as JSON. " + CONVENTIONS + ". "
        + LIMITS_HELP
        + f" Masses {v.WEIGHT_MIN_G:g}-{v.WEIGHT_MAX_G:g} g, radii {v.RADIUS_MIN_MM:g}-{v.RADIUS_MAX_MM:g} mm; "
        f"at most {v.MAX_POSITIONS} positions, {v.MAX_STOCK_SIZES} stock sizes of at most {v.MAX_STOCK_COUNT} "
        f"pieces, {v.MAX_PIECES_PER_POSITION} pieces per position, {v.MAX_EXISTING_WEIGHTS} existing weights, "
        f"max_nodes {MAX_NODES}; strip step at least {STRIP_MIN_STEP_MM:g} mm; speed_rpm "
        f"{v.SPEED_MIN_RPM:g}-{v.CALC_SPEED_MAX_RPM:g}.",
    )
    p.add_argument("file", metavar="FILE", help="JSON file, or - for standard input")



def _num(obj: Any, key: str, where: str, required: bool = True, default: float | None = None) -> float | None:
    if not isinstance(obj, dict):
        raise UsageError(f"{where} must be an object with \"{key}\"")
    if key not in obj or obj[key] is None:
        if required:
            raise UsageError(f"{where}: missing \"{key}\"")
        return default
    value = obj[key]
    try:
        ok = not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(float(value))
    except OverflowError:
        ok = False
    if not ok:
        shown = json.dumps(value)
        raise UsageError(f"{where}: \"{key}\" must be a finite number, got {shown if len(shown) < 40 else shown[:37] + '...'}")
    return float(value)


def _limit(check: Any, value: float, what: str) -> float:
    try:
        return check(value, what)
    except v.ValidationError as exc:
        raise UsageError(str(exc)) from None


def _count(n: int, most: int, what: str) -> None:
    if n > most:
        raise UsageError(f"{n} {what}; at most {most}")


def _int(obj: dict, key: str, where: str) -> int | None:
    x = _num(obj, key, where, required=False)
    if x is None:
        return None
    if x != int(x):
        raise UsageError(f"{where}: \"{key}\" must be a whole number, got {x:g}")
    return int(x)


def _positive(x: float | None, what: str) -> float:
    if x is None:
        raise UsageError(f"{what} is missing; give a positive value")
    if x < 0:
        raise UsageError(f"{what} is negative ({x:g}); give a positive value")
    if x == 0:
        raise UsageError(f"{what} is zero; give a positive value")
    return x


def _radius(x: float | None, what: str) -> float:
    return _limit(v.radius_mm, _positive(x, what), what)


def _positions(spec: Any) -> Any:
    from runtrue.allocation import Positions

    where = "positions"
    exclude: list[int] = []
    if isinstance(spec, list):
        if not spec:
            raise UsageError("no positions: give at least one position")
        _count(len(spec), v.MAX_POSITIONS, "positions")
        angles = [_limit(v.angle_deg, _num(p, "angle", f"positions[{i}]"), f"positions[{i}] angle")  # type: ignore[arg-type]
                  for i, p in enumerate(spec)]
        each = [_radius(_num(p, "radius", f"positions[{i}]"), f"positions[{i}] radius") for i, p in enumerate(spec)]
        return Positions.at_angles(angles, each)
    if not isinstance(spec, dict):
        raise UsageError("\"positions\" must be an object or a list of {\"angle\", \"radius\"}")
    if "exclude" in spec:
        ex = spec["exclude"]
        if not isinstance(ex, list) or not all(isinstance(x, int) and not isinstance(x, bool) for x in ex):
            raise UsageError("positions: \"exclude\" must be a list of position numbers (1 = first)")
        _count(len(ex), v.MAX_POSITIONS, "excluded positions")
        exclude = [x - 1 for x in ex]
    if spec.get("continuous"):
        return Positions.groove(_radius(_num(spec, "radius", where), "positions radius"))
    if "count" in spec:
        count = _int(spec, "count", where)
        if count is None or count < 1:
            raise UsageError("no positions: \"count\" must be at least 1")
        _count(count, v.MAX_POSITIONS, "positions")
        radius = _radius(_num(spec, "radius", where), "positions radius")
        first = _limit(v.angle_deg, _num(spec, "first_angle", where, required=False, default=0.0), "first_angle")  # type: ignore[arg-type]
        pos = Positions.equally_spaced(count, radius, first)
    elif "angles" in spec:
        angles = spec["angles"]
        if not isinstance(angles, list) or not angles:
            raise UsageError("no positions: \"angles\" must be a non-empty list of angles in degrees")
        _count(len(angles), v.MAX_POSITIONS, "position angles")
        vals = [_limit(v.angle_deg, _num({"a": a}, "a", "positions angles"), "a position angle") for a in angles]  # type: ignore[arg-type]
        if "radii" in spec:
            radii_raw = spec["radii"]
            if not isinstance(radii_raw, list):
                raise UsageError("positions: \"radii\" must be a list with one radius per angle")
            _count(len(radii_raw), v.MAX_POSITIONS, "position radii")
            radii: Any = [_radius(_num({"r": r}, "r", "positions radii"), "a position radius") for r in radii_raw]
        else:
            radii = _radius(_num(spec, "radius", where), "positions radius")
        pos = Positions.at_angles(vals, radii)
    else:
        raise UsageError("positions: give \"count\" and \"radius\", \"angles\" and \"radius\", a list, "
                         "or {\"continuous\": true, \"radius\": R}")
    for i in exclude:
        if not 0 <= i < len(pos.angles_deg):
            raise UsageError(f"positions: excluded position {i + 1} does not exist (1..{len(pos.angles_deg)})")
    return pos.excluding(exclude)


def _build(data: Any) -> tuple[dict, Any]:
    from runtrue.allocation import ExistingWeight, Stock, Strip

    if not isinstance(data, dict):
        raise UsageError("the input must be a JSON object with \"correction\", \"positions\" and \"stock\" or \"strip\"")
    if "correction" not in data:
        raise UsageError("missing \"correction\": give {\"mass\", \"angle\", \"radius\"}")
    c = data["correction"]
    mass = _num(c, "mass", "correction")
    angle = _num(c, "angle", "correction")
    radius = _num(c, "radius", "correction")
    assert mass is not None and angle is not None and radius is not None
    if mass < 0:
        raise UsageError(f"correction mass is negative ({mass:g} g); give a positive mass and its angle")
    if mass > v.WEIGHT_MAX_G:
        _limit(v.weight_g, mass, "correction mass")  # refused with the limit and the advice
    radius = _radius(radius, "correction radius")
    angle = _limit(v.angle_deg, angle, "correction angle")
    if "positions" not in data:
        raise UsageError("no positions: give \"positions\" (count and radius, angles, a list, or continuous)")
    positions = _positions(data["positions"])
    opts: dict[str, Any] = {}
    if "stock" in data and data["stock"] is not None:
        st = data["stock"]
        if not isinstance(st, list) or not st:
            raise UsageError("the stock is empty: list pieces as [{\"mass\": g, \"count\": n}, ...]")
        _count(len(st), v.MAX_STOCK_SIZES, "stock sizes")
        pairs = []
        for i, item in enumerate(st):
            m = _num(item, "mass", f"stock[{i}]")
            assert m is not None
            if m <= 0:
                raise UsageError(f"stock[{i}]: mass {m:g} g must be positive")
            _limit(v.weight_g, m, f"stock[{i}] mass")
            n = _int(item, "count", f"stock[{i}]")
            if n is not None and n < 0:
                raise UsageError(f"stock[{i}]: count {n} is negative")
            if n is not None:
                _count(n, v.MAX_STOCK_COUNT, f"pieces in stock[{i}]")
            pairs.append((m, n))
        if all(n == 0 for _, n in pairs):
            raise UsageError("the stock is empty: every count is zero")
        opts["stock"] = Stock.of(pairs)
    if "strip" in data and data["strip"] is not None:
        s = data["strip"]
        vals = {k: _num(s, k, "strip") for k in ("grams_per_mm", "min_mm", "step_mm")}
        for k, x in vals.items():
            _positive(x, f"strip {k}")
        g_mm, min_mm, step_mm = vals["grams_per_mm"], vals["min_mm"], vals["step_mm"]
        assert g_mm is not None and min_mm is not None and step_mm is not None
        if not (1e-4 <= g_mm <= 1000 and min_mm <= v.RADIUS_MAX_MM and STRIP_MIN_STEP_MM <= step_mm <= v.RADIUS_MAX_MM):
            raise UsageError(f"strip: grams_per_mm 0.0001-1000, min_mm up to {v.RADIUS_MAX_MM:g}, step_mm "
                             f"{STRIP_MIN_STEP_MM:g}-{v.RADIUS_MAX_MM:g}; check the units")
        max_mm = _num(s, "max_mm", "strip", required=False)
        if max_mm is not None and not 0 < max_mm <= 10 * v.RADIUS_MAX_MM:
            raise UsageError(f"strip: max_mm must be above 0 and at most {10 * v.RADIUS_MAX_MM:g} mm")
        opts["strip"] = Strip(vals["grams_per_mm"], vals["min_mm"], vals["step_mm"], max_mm)  # type: ignore[arg-type]
    existing = []
    old = data.get("existing") or []
    if not isinstance(old, list):
        raise UsageError("\"existing\" must be a list of {\"mass\", \"angle\", \"radius\"}")
    _count(len(old), v.MAX_EXISTING_WEIGHTS, "existing weights")
    for i, w in enumerate(old):
        where = f"existing[{i}]"
        m = _num(w, "mass", where)
        assert m is not None
        if m < 0:
            raise UsageError(f"{where}: mass {m:g} g is negative")
        if m > 0:
            _limit(v.weight_g, m, f"{where} mass")
        pos_no = _int(w, "position", where)
        if pos_no is not None and not 1 <= pos_no <= v.MAX_POSITIONS:
            raise UsageError(f"{where}: position must be 1-{v.MAX_POSITIONS}, got {pos_no}")
        if not isinstance(w.get("may_move", False), bool) or not isinstance(w.get("may_remove", False), bool):
            raise UsageError(f"{where}: may_move and may_remove are true or false")
        existing.append(ExistingWeight(
            m, _limit(v.angle_deg, _num(w, "angle", where), f"{where} angle"),  # type: ignore[arg-type]
            _radius(_num(w, "radius", where), f"{where} radius"),
            None if pos_no is None else pos_no - 1, bool(w.get("may_move", False)), bool(w.get("may_remove", False)),
        ))
    if "stock" not in opts and "strip" not in opts and not any(w.may_move for w in existing):
        raise UsageError("no pieces: give \"stock\" (masses and counts) or \"strip\"")
    opts["existing"] = existing
    mp = _int(data, "max_pieces_per_position", "input")
    if mp is not None:
        if not 1 <= mp <= v.MAX_PIECES_PER_POSITION:
            raise UsageError(f"max_pieces_per_position must be at least 1 and at most {v.MAX_PIECES_PER_POSITION}")
        opts["max_pieces_per_position"] = mp
    mm = _num(data, "max_mass_per_position", "input", required=False)
    if mm is not None:
        opts["max_mass_per_position_g"] = _limit(v.weight_g, _positive(mm, "max_mass_per_position"),
                                                 "max_mass_per_position")
    ge = _num(data, "good_enough", "input", required=False)
    gf = _num(data, "good_enough_fraction", "input", required=False)
    if ge is not None and ge < 0 or gf is not None and gf < 0:
        raise UsageError("good_enough must be zero or positive")
    if ge is not None and ge > v.WEIGHT_MAX_G * v.RADIUS_MAX_MM or gf is not None and gf > 1:
        raise UsageError(f"good_enough is at most {v.WEIGHT_MAX_G * v.RADIUS_MAX_MM:g} g.mm and "
                         "good_enough_fraction at most 1 (the whole correction)")
    if ge is not None or gf is not None:  # an explicit 0 asks for the strictly smallest residual
        opts["good_enough_gmm"] = max(ge or 0.0, (gf or 0.0) * mass * radius)
    opts["prefer_fewer_positions"] = bool(data.get("prefer_fewer_positions", False))
    mn = _int(data, "max_nodes", "input")
    if mn is not None:
        if mn > MAX_NODES:
            raise UsageError(f"max_nodes {mn} is above {MAX_NODES}; the search would run for too long")
        opts["max_nodes"] = max(1, mn)
    speed = _num(data, "speed_rpm", "input", required=False)
    if speed is not None and speed < 0:
        raise UsageError("speed_rpm is negative; give the running speed in rev/min")
    if speed is not None:
        try:
            speed = v.speed_rpm(speed, calc=True)
        except v.ValidationError as exc:
            raise UsageError(f"speed_rpm: {exc}") from None
    return {"correction": (mass, angle, radius), "positions": positions, "options": opts, "speed_rpm": speed}, existing


def run(args: argparse.Namespace) -> int:
    from runtrue.allocation import AllocationError, allocate
    from runtrue.balancing.forces import force_at_speed_n

    data = load_json(args.file)
    try:
        spec, _existing = _build(data)
        a = allocate(spec["correction"], spec["positions"], **spec["options"])
    except AllocationError as exc:
        raise UsageError(str(exc)) from None
    speed = spec["speed_rpm"]
    placements = []
    for p in a.placements:
        item: dict[str, Any] = {
            "position": None if p.position_index is None else p.position_index + 1,
            "angle": round_places(p.angle_deg, 4),
            "radius": round_places(p.radius_mm, 4),
        }
        if p.length_mm is not None:
            item["length_mm"] = round_places(p.length_mm, 4)
        else:
            item["pieces"] = [round_places(m) for m in p.pieces]
        if p.moved_existing:
            item["moved_existing"] = [i + 1 for i in p.moved_existing]
        item["mass"] = round_places(p.mass_g)
        if speed is not None:
            r_cm = abs(p.unbalance_gmm) / p.mass_g if p.mass_g > 0 else p.radius_mm
            item["force_n"] = round_places(force_at_speed_n(p.mass_g, r_cm, speed), 3)
        placements.append(item)
    out = {
        "placements": placements,
        "residual": {"mass": round_places(a.residual_mass_g), "angle": round_places(a.residual_angle_deg, 4),
                     "radius": round_places(a.correction_radius_mm, 4)},
        "residual_fraction": round_places(a.residual_fraction, 6),
        "optimal": a.optimal,
        "status": a.status,
        "residual_bound_gmm": round_places(a.bound_gmm, 6),
        "pieces": a.piece_count,
        "added_mass": round_places(a.added_mass_g),
        "kept_existing": [i + 1 for i in a.kept_existing],
        "removed_existing": [i + 1 for i in a.removed_existing],
        "warnings": list(a.warnings),
        "conventions": CONVENTIONS,
        "safety": SAFETY,
    }
    try:
        sys.stdout.write(json.dumps(out, indent=2) + "\n")
        sys.stdout.flush()
    except BrokenPipeError:  # output piped into a reader that stopped early (head)
        return 0
    for w in a.warnings:
        print(f"runtrue allocate: warning: {w}", file=sys.stderr)
    return 0
