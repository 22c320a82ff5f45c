"""``runtrue tolerance``: permissible residual unbalance for an ISO 21940-11 balance quality grade.

``runtrue tolerance --grade G --mass-kg M --rpm N [--planes 1|2] [--distances-mm L1 L2]
[--journal-load-kg W]`` prints JSON: ``permissible_unbalance_gmm`` (rotor total),
``permissible_eccentricity_um``, ``per_plane_gmm`` (a list); added keys: ``grade``,
``mass_kg``, ``speed_rpm``, ``permissible_unbalance_ozin``, ``per_plane_ozin``, ``rule``,
``warnings`` and, with ``--journal-load-kg``, ``api_limit_gmm`` (API-style 4W/N per journal).
Formula and allocation: ``runtrue.balancing.tolerance`` (ISO 21940-11:2016 clauses 6 and 7).

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
from runtrue.cli.jsonio import round_sig

GRADE_MIN_MM_S = 0.1  # below the finest grade ISO 21940-11 lists (G 0.4) with room to spare
GRADE_MAX_MM_S = 4000.0  # the coarsest grade it lists (G 4000)


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "tolerance",
        help="permissible residual unbalance for a balance quality grade (ISO 21940-11), as JSON",
        description="Permissible residual unbalance U_per = 9549 * G * m / n (g*mm) and specific "
        "unbalance e_per = U_per / m (um) for balance quality grade G (mm/s), rotor mass m (kg) "
        "and maximum service speed n (rpm), allocated to one or two tolerance planes. "
        f"Limits: grade {GRADE_MIN_MM_S:g}-{GRADE_MAX_MM_S:g} mm/s, mass {v.ROTOR_MASS_MIN_KG:g}-"
        f"{v.ROTOR_MASS_MAX_KG:g} kg, speed {v.SPEED_MIN_RPM:g}-{v.CALC_SPEED_MAX_RPM:g} rpm, distances "
        f"0-{v.RADIUS_MAX_MM:g} mm, journal load up to the rotor mass limit.",
    )
    p.add_argument("--grade", required=True, metavar="G", help="balance quality grade in mm/s: 6.3, G6.3 or 'G 6.3'")
    p.add_argument("--mass-kg", required=True, metavar="M", help="rotor mass in kg")
    p.add_argument("--rpm", required=True, metavar="N", help="maximum service speed in rpm")
    p.add_argument("--planes", default="1", metavar="1|2", help="tolerance planes (default 1)")
    p.add_argument(
        "--distances-mm",
        nargs=2,
        metavar=("L1", "L2"),
        help="distances from the rotor's centre of mass to plane 1 and to plane 2 (mm), planes on "
        "either side of it; without it two planes share the tolerance equally",
    )
    p.add_argument(
        "--journal-load-kg",
        metavar="W",
        help="also give the API-style limit 4W/N per journal for this static journal load (kg)",
    )


def _num(text: str, option: str) -> float:
    try:
        x = float(text)
    except ValueError:
        raise UsageError(f"{option} must be a number, got {text!r}") from None
    if not math.isfinite(x):
        raise UsageError(f"{option} must be a finite number, got {text!r}")
    return x


def run(args: argparse.Namespace) -> int:
    from runtrue.balancing import BalancingError, api_limit_gmm, gmm_to_ozin, permissible_unbalance
    from runtrue.balancing.grades import parse_grade

    try:
        grade = parse_grade(str(args.grade))
    except ValueError as exc:
        raise UsageError(f"--grade: {exc}") from None
    mass = _num(args.mass_kg, "--mass-kg")
    rpm = _num(args.rpm, "--rpm")
    try:
        v.in_range(grade, "--grade", GRADE_MIN_MM_S, GRADE_MAX_MM_S, "mm/s",
                   "give an ISO 21940-11 balance quality grade such as 6.3 or G2.5")
        v.rotor_mass_kg(mass, field="--mass-kg")
        v.speed_rpm(rpm, calc=True)
        if args.distances_mm is not None:
            for text in args.distances_mm:
                v.in_range(_num(text, "--distances-mm"), "--distances-mm", 0.0, v.RADIUS_MAX_MM, "mm",
                           "give each plane's distance from the centre of mass in millimetres")
        if args.journal_load_kg is not None:
            v.in_range(_num(args.journal_load_kg, "--journal-load-kg"), "--journal-load-kg", v.ROTOR_MASS_MIN_KG,
                       v.ROTOR_MASS_MAX_KG, "kg", "give the static load on one journal in kilograms")
    except v.ValidationError as exc:
        raise UsageError(str(exc)) from None
    if args.planes not in ("1", "2"):
        raise UsageError(f"--planes must be 1 or 2, got {args.planes!r}")
    planes = int(args.planes)
    distances = None
    if args.distances_mm is not None:
        if planes != 2:
            raise UsageError("--distances-mm needs --planes 2")
        distances = (_num(args.distances_mm[0], "--distances-mm"), _num(args.distances_mm[1], "--distances-mm"))
    try:
        tol = permissible_unbalance(grade, mass, rpm, planes, distances)
        api = None
        if args.journal_load_kg is not None:
            api = api_limit_gmm(_num(args.journal_load_kg, "--journal-load-kg"), rpm)
    except BalancingError as exc:
        raise UsageError(str(exc)) from None
    out: dict[str, Any] = {
        "permissible_unbalance_gmm": round_sig(tol.permissible_unbalance_gmm),
        "permissible_eccentricity_um": round_sig(tol.permissible_eccentricity_um),
        "per_plane_gmm": [round_sig(u) for u in tol.per_plane_gmm],
        "grade": tol.grade,
        "mass_kg": tol.mass_kg,
        "speed_rpm": tol.speed_rpm,
        "permissible_unbalance_ozin": round_sig(gmm_to_ozin(tol.permissible_unbalance_gmm)),
        "per_plane_ozin": [round_sig(gmm_to_ozin(u)) for u in tol.per_plane_gmm],
        "rule": tol.rule,
        "warnings": list(tol.warnings),
    }
    if api is not None:
        out["api_limit_gmm"] = round_sig(api)
        out["api_rule"] = (
            "API-style limit U = 4W/N oz*in per journal (W static journal load in lb, N maximum "
            "continuous speed in rpm), shown in g*mm; use the edition your specification names"
        )
    json.dump(out, sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0
