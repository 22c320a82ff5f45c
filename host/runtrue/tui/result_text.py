"""The result of a job as lines of text for the result screen: pure functions over
``runtrue.jobs.JobResult``.
"""

from __future__ import annotations

from typing import Any

from runtrue.balancing.forces import force_at_speed_n as centrifugal_force_n
from runtrue.jobs.weights import position_number
from runtrue.readings.numbers import DEFAULT_VIB_UNIT, grade_row, percent_change_text, phase_text, vib_number
from runtrue.readings.units import lag_deg
from runtrue.tui.format import DEG
from runtrue.tui.units_text import METRIC, force_text, mass_text, radius_text, unbalance_text


def is_four_run_result(result: Any) -> bool:
    return getattr(result, "method", "") == "four-run"


def verdict(result: Any) -> tuple[str, str]:
    """(style class, sentence)."""
    if is_four_run_result(result):
        if result.passed is True:
            return "pass", f"PASS: estimated residual unbalance within {result.grade} ({result.standard})"
        if result.passed is False:
            return "fail", f"NOT PASSED: estimated residual above {result.grade} ({result.standard})"
    if result.passed is True:
        return "pass", f"PASS: residual unbalance within {result.grade} ({result.standard})"
    if result.passed is False:
        return "fail", f"NOT PASSED: residual unbalance above {result.grade} ({result.standard})"
    return "open", "NOT CHECKED: no correction run taken yet"


def channel_lines(result: Any, unit: str = DEFAULT_VIB_UNIT) -> list[str]:
    """Before (reference run) and after (last run) per pickup, 1x in the display unit at each
    run's measured speed; the same numbers the report prints (``runtrue.readings.numbers``)."""
    four_run = is_four_run_result(result)
    before_speed = result.before_speed_rpm or result.speed_rpm
    after_speed = result.after_speed_rpm or result.speed_rpm
    lines = [f"{'pickup':<20} {'before':>14} {'after':>14} {'change':>7}   1x {unit}"]
    for c in result.channels:
        b = vib_number(abs(c.before), before_speed, unit)
        a = vib_number(abs(c.after), after_speed, unit) if c.after is not None else "-"
        if not four_run:  # with phase
            b += f" {phase_text(lag_deg(c.before)):>4}"
            if c.after is not None:
                a += f" {phase_text(lag_deg(c.after)):>4}"
        change = percent_change_text(abs(c.before), abs(c.after)) if c.after is not None else ""
        lines.append(f"{c.label[:20]:<20} {b:>14} {a:>14} {change:>7}")
    return lines


def plane_lines(result: Any, units: str = METRIC, names: list[str] | None = None) -> list[str]:
    """Per plane: residual (with its 95 % uncertainty when known) against the permissible value;
    the ratio is (residual + uncertainty) / permissible, as in the report."""
    lines = []
    residual = result.residual_unbalance_gmm
    unc = getattr(result, "residual_uncertainty_gmm", None)
    about = "~" if is_four_run_result(result) else ""  # four-run: an estimate without phase
    for p, perm in enumerate(result.permissible_unbalance_gmm, start=1):
        name = names[p - 1] if names and p - 1 < len(names) else f"plane {p}"
        if residual is not None and p - 1 < len(residual):
            r = residual[p - 1]
            u = unc[p - 1] if unc is not None and p - 1 < len(unc) else 0.0
            row = grade_row(r, u, perm)
            mark = "ok" if row["verdict"] == "pass" else "TOO HIGH"
            if units == METRIC:
                pm = f" \N{PLUS-MINUS SIGN}{row['uncertainty']}" if u else ""
                lines.append(f"{name}: {about}{row['residual']}{pm} of {row['permissible']} allowed ({row['ratio']}) {mark}")
            else:
                pm = f" \N{PLUS-MINUS SIGN}{unbalance_text(u, units)}" if u else ""
                lines.append(f"{name}: {about}{unbalance_text(r, units)}{pm} of "
                             f"{unbalance_text(perm, units)} allowed ({row['ratio']}) {mark}")
        else:
            lines.append(f"{name}: residual not measured yet; {unbalance_text(perm, units)} allowed")
    return lines


def method_lines(result: Any, units: str = METRIC) -> list[str]:
    """How the job was balanced; for the four-run method, why the residual is an estimate."""
    if not is_four_run_result(result):
        source = getattr(result, "influence_source", "")
        return ["Method: influence coefficients, from 1x amplitude and phase (reference mark)."] + (
            [f"Coefficients: {source}."] if source else [])
    return [
        "Method: amplitude-only (four-run): no reference mark; chalk mark for angles.",
        "The residual is estimated from the amplitude alone: it cannot tell unbalance",
        "from other 1x vibration.",
    ]


def weights_lines(result: Any, units: str = METRIC, machine: Any = None) -> list[str]:
    """The weights on the rotor now, each with its plane's name, position and the centrifugal
    force it must hold at speed."""
    if not result.weights_on:
        return ["No weights added."]

    out = []
    for w in result.weights_on:
        name = machine.plane_name(w.plane) if machine is not None else f"plane {w.plane}"
        pos = position_number(machine, w.plane, w.angle_deg) if machine is not None else None
        where = f"position {pos} ({w.angle_deg:.1f}{DEG})" if pos is not None else f"{w.angle_deg:.1f}{DEG}"
        force = force_text(centrifugal_force_n(w.mass_g, w.radius_mm, result.speed_rpm), units)
        out.append(f"{name}: {mass_text(w.mass_g, units)} at {where}, r {radius_text(w.radius_mm, units)}, {force}")
    return out
