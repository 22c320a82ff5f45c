"""Plots of a diagnosis in characters: 1x against speed (amplitude, phase, polar locus), the
spectrum with the running-speed orders marked, and the waveform.

Drawn on the text canvas (``new_canvas()`` where the plain-character mode exists, braille
otherwise), in dot coordinates, with ``Canvas.point(x, y, style, symbol)`` for data points so
that they stay distinct from lines on the plain canvas.  Pure drawing: each function returns
text lines (the command line prints them; the screens wrap them in Rich text).  Polar
convention as everywhere: phase lag after the reference mark, 0 deg at the top, lag clockwise.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from runtrue.diagnosis.severity import band_hz
from runtrue.tui.widgets import braille as _braille
from runtrue.tui.widgets.braille import nice_full_scale


def new_canvas(width_chars: int, height_chars: int) -> Any:
    """The canvas of the current mode (plain characters or braille)."""
    make = getattr(_braille, "new_canvas", None)
    return make(width_chars, height_chars) if make is not None else _braille.BrailleCanvas(width_chars, height_chars)


def _point(cv: Any, x: float, y: float, style: str = "", symbol: str = "") -> None:
    if hasattr(cv, "point"):
        cv.point(x, y, style, symbol)
    else:
        cv.set(x, y, style)


def _frame_lines(cv: Any, y_top: str, y_bottom: str, label_w: int) -> list[str]:
    rows = cv.lines()
    out = []
    for i, row in enumerate(rows):
        lab = y_top if i == 0 else y_bottom if i == len(rows) - 1 else ""
        out.append(f"{lab:>{label_w}}|{row}")
    return out


def _x_axis(x0: float, x1: float, width: int, label_w: int, unit: str) -> str:
    left = f"{x0:.0f}"
    right = f"{x1:.0f} {unit}"
    mid = f"{0.5 * (x0 + x1):.0f}"
    line = [" "] * width
    for i, ch in enumerate(left):
        if i < width:
            line[i] = ch
    m = width // 2 - len(mid) // 2
    for i, ch in enumerate(mid):
        if 0 <= m + i < width:
            line[m + i] = ch
    for i, ch in enumerate(right):
        p = width - len(right) + i
        if 0 <= p < width:
            line[p] = ch
    return " " * label_w + "+" + "".join(line)


def speed_plot_text(curve: Any, resonances: Sequence[Any] = (), balancing_rpm: float | None = None, *,
                    width: int = 80, amp_rows: int = 7, phase_rows: int = 5, polar_chars: int = 22) -> list[str]:
    """1x amplitude (g) and phase lag (deg) against rpm on the left, the polar locus on the right;
    resonances marked ``R``, the balancing speed ``B``.  At most 80 columns and 17 lines."""
    label_w = 6
    plot_w = max(20, width - label_w - 1 - polar_chars - 2)
    s = np.asarray(curve.speed_rpm, dtype=float)
    amp = np.asarray(curve.amp_g, dtype=float)
    ph = np.asarray(curve.phase_deg, dtype=float)
    x0, x1 = float(s.min()), float(s.max())
    if balancing_rpm is not None and math.isfinite(balancing_rpm):
        x0, x1 = min(x0, balancing_rpm), max(x1, balancing_rpm)
    if x1 <= x0:
        x1 = x0 + 1.0
    top = nice_full_scale(float(amp.max()) * 1.05 if len(amp) else 1.0)

    def xdot(cv: Any, v: float) -> float:
        return (v - x0) / (x1 - x0) * (cv.width_dots - 1)

    a = new_canvas(plot_w, amp_rows)
    p = new_canvas(plot_w, phase_rows)
    for i in range(len(s)):
        _point(a, xdot(a, s[i]), (1 - amp[i] / top) * (a.height_dots - 1), "cyan", "*")
        _point(p, xdot(p, s[i]), (1 - ph[i] / 360.0) * (p.height_dots - 1), "cyan", "*")
    for cv in (a, p):
        for r in resonances:
            col = int(round(xdot(cv, r.speed_rpm))) // 2
            cv.label(col, 0, "R", "bold red")
        if balancing_rpm is not None:
            col = int(round(xdot(cv, balancing_rpm))) // 2
            for row in range(1, cv.height_chars):
                cv.label(col, row, ":", "yellow")
            cv.label(col, 0, "B", "bold yellow")
    left = ["1x amplitude, g pk (R resonance, B balancing speed)"]
    left += _frame_lines(a, f"{top:g}", "0", label_w)
    left += ["1x phase lag, deg"]
    left += _frame_lines(p, "360", "0", label_w)
    left.append(_x_axis(x0, x1, plot_w, label_w, "rpm"))
    # polar locus
    rows = (amp_rows + phase_rows + 2)
    pc = new_canvas(polar_chars, max(6, rows - 2))
    cx, cy = (pc.width_dots - 1) / 2, (pc.height_dots - 1) / 2
    rad = max(2.0, min(cx, cy) - 1)
    pc.circle(cx, cy, rad, "grey50")
    prev = None
    for z in np.asarray(curve.one_x_g):
        rr = rad * min(abs(z) / top, 1.05)
        lag = math.atan2(z.imag, z.real)
        x, y = cx + rr * math.sin(lag), cy - rr * math.cos(lag)
        if prev is not None:
            pc.line(prev[0], prev[1], x, y, "cyan")
        prev = (x, y)
    if prev is not None:
        _point(pc, prev[0], prev[1], "bold yellow", "o")
    right = ["polar, 0 up, lag cw"] + pc.lines() + [f"o = {s[-1]:.0f} rpm"]
    out = []
    for i in range(max(len(left), len(right))):
        l_ = left[i] if i < len(left) else ""
        r_ = right[i] if i < len(right) else ""
        out.append(f"{l_:<{label_w + 1 + plot_w}}  {r_}"[:width])
    return out


def spectrum_text(spec: Any, speed_rpm: float, *, width: int = 80, rows: int = 7, fmax_hz: float | None = None,
                  max_orders: int = 10, band_lo_hz: float | None = None) -> list[str]:
    """Velocity spectrum (mm/s pk) from the severity band's low edge (``band_lo_hz``, default
    that of ISO 20816-3 for the speed) up to ``fmax_hz`` (default 10.5 orders), running-speed
    orders marked 1-9 above their lines, the window named."""
    lo = band_hz(speed_rpm)[0] if band_lo_hz is None else band_lo_hz
    label_w = 6
    plot_w = width - label_w - 1
    f1 = speed_rpm / 60.0
    fmax = fmax_hz or min(float(spec.freq_hz[-1]), (max_orders + 0.5) * f1)
    keep = (spec.freq_hz >= lo) & (spec.freq_hz > 0) & (spec.freq_hz <= fmax)
    f = spec.freq_hz[keep]
    v = spec.velocity_mm_s_pk[keep]
    top = nice_full_scale(float(v.max()) * 1.05 if len(v) else 1.0)
    cv = new_canvas(plot_w, rows)
    wd, hd = cv.width_dots, cv.height_dots
    cols = np.clip(((f / fmax) * (wd - 1)).round().astype(int), 0, wd - 1)
    for col in range(wd):
        sel = cols == col
        if not np.any(sel):
            continue
        h = float(v[sel].max()) / top
        y_top = (1 - h) * (hd - 1)
        cv.line(col, hd - 1, col, y_top, "cyan")
    for k in range(1, max_orders + 1):
        if k * f1 > fmax:
            break
        col = int(round(k * f1 / fmax * (wd - 1))) // 2
        cv.label(col, 0, str(k) if k < 10 else "+", "bold yellow")
    out = [f"velocity spectrum, mm/s pk, Hann window; orders of {speed_rpm:.0f} rpm marked 1-{min(max_orders, 9)}"]
    out += _frame_lines(cv, f"{top:g}", "0", label_w)
    out.append(_x_axis(0.0, fmax, plot_w, label_w, "Hz"))
    return out


def waveform_text(samples_g: Sequence[float], rate_hz: float, edges_samples: Sequence[float] = (), *,
                  width: int = 80, rows: int = 4, revs: float = 3.0, speed_rpm: float | None = None) -> list[str]:
    """The first ``revs`` revolutions of the waveform (g), reference edges marked ``|``."""
    label_w = 6
    plot_w = width - label_w - 1
    x = np.asarray(samples_g, dtype=float)
    x = x - x.mean()
    n = len(x)
    if speed_rpm and speed_rpm > 0:
        n = min(n, int(revs * 60.0 / speed_rpm * rate_hz))
    n = max(2, n)
    x = x[:n]
    top = nice_full_scale(float(np.abs(x).max()) * 1.05 if n else 1.0)
    cv = new_canvas(plot_w, rows)
    wd, hd = cv.width_dots, cv.height_dots
    prev = None
    for i in range(wd):
        j = int(i / (wd - 1) * (n - 1))
        y = (0.5 - 0.5 * x[j] / top) * (hd - 1)
        if prev is not None:
            cv.line(prev[0], prev[1], i, y, "cyan")
        prev = (i, y)
    for e in edges_samples:
        if 0 <= e < n:
            cv.label(int(e / (n - 1) * (wd - 1)) // 2, 0, "|", "bold yellow")
    out = [f"waveform, g (| reference mark), {n / rate_hz * 1000:.0f} ms"]
    out += _frame_lines(cv, f"+{top:g}", f"-{top:g}", label_w)
    return out
