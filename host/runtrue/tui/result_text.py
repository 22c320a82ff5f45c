"""The result of a job as lines of text for the result screen: pure functions over
``runtrue.jobs.JobResult``.
"""

from __future__ import annotations

import math
from typing import Any

from runtrue.tui.format import DEG, amp_text, centrifugal_force_n
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


def channel_lines(result: Any) -> list[str]:
    from runtrue.readings.units import accel_g_to_velocity_mm_s

    speed = result.speed_rpm
    four_run = is_four_run_result(result)
    lines = [f"{'pickup':<20} {'before':>16} {'after':>16} {'change':>7}"]
    for c in result.channels:
        if four_run:  # amplitudes only: no phase was measured or used
            b = amp_text(abs(c.before))
            a = amp_text(abs(c.after)) if c.after is not None else "-"
            change = f"{(abs(c.after) / abs(c.before) - 1) * 100:+.0f} %" if c.after is not None and abs(c.before) > 0 else ""
            lines.append(f"{c.label[:20]:<20} {b:>16} {a:>16} {change:>7}")
            vb = accel_g_to_velocity_mm_s(abs(c.before), speed)
            va = accel_g_to_velocity_mm_s(abs(c.after), speed) if c.after is not None else math.nan
            va_t = f"{va:.2f} mm/s" if math.isfinite(va) else "-"
            lines.append(f"{'  as 1x velocity':<20} {vb:>11.2f} mm/s {va_t:>16}")
            continue
        b = f"{amp_text(abs(c.before))} {math.degrees(math.atan2(c.before.imag, c.before.real)) % 360:3.0f}{DEG}"
        if c.after is not None:
            a = f"{amp_text(abs(c.after))} {math.degrees(math.atan2(c.after.imag, c.after.real)) % 360:3.0f}{DEG}"
            change = f"{(abs(c.after) / abs(c.before) - 1) * 100:+.0f} %" if abs(c.before) > 0 else ""
        else:
            a, change = "-", ""
        lines.append(f"{c.label[:20]:<20} {b:>16} {a:>16} {change:>7}")
        vb = accel_g_to_velocity_mm_s(abs(c.before), speed)
        va = accel_g_to_velocity_mm_s(abs(c.after), speed) if c.after is not None else math.nan
        va_t = f"{va:.2f} mm/s" if math.isfinite(va) else "-"
        lines.append(f"{'  as 1x velocity':<20} {vb:>11.2f} mm/s {va_t:>16}")
    return lines


def plane_lines(result: Any, units: str = METRIC) -> list[str]:
    """Per plane: residual (with its 95 % uncertainty when known) against the permissible value."""
    lines = []
    residual = result.residual_unbalance_gmm
    unc = getattr(result, "residual_uncertainty_gmm", None)
    about = "~" if is_four_run_result(result) else ""  # four-run: an estimate without phase
    for p, perm in enumerate(result.permissible_unbalance_gmm, start=1):
        if residual is not None and p - 1 < len(residual):
            r = residual[p - 1]
            u = unc[p - 1] if unc is not None and p - 1 < len(unc) else 0.0
            mark = "ok" if r + u <= perm else "TOO HIGH"
            ratio = f"({(r + u) / perm:.2f}x) {mark}"
            if units == METRIC:
                pm = f"+-{u:.0f}" if u else ""
                lines.append(f"plane {p}: {about}{r:.1f}{pm} g.mm of {perm:.1f} g.mm allowed {ratio}")
            else:
                pm = f" +-{unbalance_text(u, units)}" if u else ""
                lines.append(f"plane {p}: {about}{unbalance_text(r, units)}{pm} of "
                             f"{unbalance_text(perm, units)} allowed {ratio}")
        elif units == METRIC:
            lines.append(f"plane {p}: residual not measured yet; {perm:.1f} g.mm allowed")
        else:
            lines.append(f"plane {p}: residual not measured yet; {unbalance_text(perm, units)} allowed")
    return lines


def method_lines(result: Any, units: str = METRIC) -> list[str]:
    """How the job was balanced; for the four-run method, why the residual is an estimate."""
    if not is_four_run_result(result):
        return ["Method: influence coefficients, from 1x amplitude and phase (reference mark)."]
    h = getattr(result, "influence_magnitude", None)
    if h and units != METRIC:
        from runtrue.balancing.units import GMM_PER_OZIN

        h_txt = f"\n|H| = {h * GMM_PER_OZIN:.3g} g per oz.in (four-run solution)."
    else:
        h_txt = f"\n|H| = {h:.3g} g per g.mm (four-run solution)." if h else ""
    return [
        "Method: amplitude-only (four-run): no reference mark; chalk mark for angles.",
        "The residual is the check-run amplitude / |H|, an ESTIMATE without phase: it",
        f"cannot tell unbalance from other 1x vibration; +- is its 95 % uncertainty.{h_txt}",
    ]


def weights_lines(result: Any, units: str = METRIC) -> list[str]:
    """The weights on the rotor now, each with the centrifugal force it must hold at speed."""
    if not result.weights_on:
        return ["No weights added."]
    return [
        f"plane {w.plane}: {mass_text(w.mass_g, units)} at {w.angle_deg:.1f}{DEG}, r {radius_text(w.radius_mm, units)}, "
        f"{force_text(centrifugal_force_n(w.mass_g, w.radius_mm, result.speed_rpm), units)}"
        + (f" ({w.label})" if w.label else "")
        for w in result.weights_on
    ]
