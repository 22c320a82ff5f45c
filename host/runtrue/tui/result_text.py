"""The result of a job as lines of text for the result screen: pure functions over
``runtrue.jobs.JobResult``.
"""

from __future__ import annotations

import math
from typing import Any

from runtrue.tui.format import DEG, amp_text, centrifugal_force_n, force_text, mass_text


def verdict(result: Any) -> tuple[str, str]:
    """(style class, sentence)."""
    if result.passed is True:
        return "pass", f"PASS: residual unbalance within {result.grade} ({result.standard})"
    if result.passed is False:
        return "fail", f"NOT PASSED: residual unbalance above {result.grade} ({result.standard})"
    return "open", "NOT CHECKED: no correction run taken yet"


def channel_lines(result: Any) -> list[str]:
    from runtrue.readings.units import accel_g_to_velocity_mm_s

    speed = result.speed_rpm
    lines = [f"{'pickup':<20} {'before':>16} {'after':>16} {'change':>7}"]
    for c in result.channels:
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


def plane_lines(result: Any) -> list[str]:
    """Per plane: residual (with its 95 % uncertainty when known) against the permissible value."""
    lines = []
    residual = result.residual_unbalance_gmm
    unc = getattr(result, "residual_uncertainty_gmm", None)
    for p, perm in enumerate(result.permissible_unbalance_gmm, start=1):
        if residual is not None and p - 1 < len(residual):
            r = residual[p - 1]
            u = unc[p - 1] if unc is not None and p - 1 < len(unc) else 0.0
            mark = "ok" if r + u <= perm else "TOO HIGH"
            pm = f"+-{u:.0f}" if u else ""
            lines.append(f"plane {p}: {r:.1f}{pm} g.mm of {perm:.1f} g.mm allowed ({(r + u) / perm:.2f}x) {mark}")
        else:
            lines.append(f"plane {p}: residual not measured yet; {perm:.1f} g.mm allowed")
    return lines


def weights_lines(result: Any) -> list[str]:
    """The weights on the rotor now, each with the centrifugal force it must hold at speed."""
    if not result.weights_on:
        return ["No weights added."]
    return [
        f"plane {w.plane}: {mass_text(w.mass_g)} at {w.angle_deg:.1f}{DEG}, r {w.radius_mm:g} mm, "
        f"{force_text(centrifugal_force_n(w.mass_g, w.radius_mm, result.speed_rpm))}"
        + (f" ({w.label})" if w.label else "")
        for w in result.weights_on
    ]
