"""The report's diagnosis section: an HTML fragment with the verdict and its reasons, the
severity zone before and after balancing, the velocity spectrum (inline SVG, orders marked,
window named) and the 1x against speed of a coast-down (inline SVG) with its resonances.

Takes the JSON forms (``Diagnosis.to_dict(spectrum=True)``, ``SpeedAnalysis.to_dict()``) or the
objects themselves, so a job can keep them in its store and the report be written again later.
Zone values are the ones in :mod:`runtrue.diagnosis.severity` (ISO 20816-3:2022 Annex A,
ISO 10816-1:1995 Annex B; from memory, marked so in the report).
"""

from __future__ import annotations

import html
import math
from typing import Any

from runtrue.diagnosis.zones import ZONE_MEANING


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _as_dict(x: Any, **kw: Any) -> dict[str, Any] | None:
    if x is None:
        return None
    if hasattr(x, "to_dict"):
        return x.to_dict(**kw)
    return dict(x)


def _nice(x: float) -> float:
    if not x > 0 or not math.isfinite(x):
        return 1.0
    e = 10 ** math.floor(math.log10(x))
    for m in (1, 1.5, 2, 3, 4, 5, 7.5, 10):
        if m * e >= x:
            return m * e
    return 10 * e


def spectrum_svg(ch: dict[str, Any], speed_rpm: float, w: int = 640, h: int = 220, orders: int = 10) -> str:
    """Velocity spectrum (mm/s pk) up to 10.5 orders, orders marked, window named."""
    sp = ch.get("spectrum")
    if not sp:
        return '<p class="note">No spectrum: no raw capture was taken.</p>'
    f1 = speed_rpm / 60.0
    fmax = min(max(sp["freq_hz"]), (orders + 0.5) * f1)
    lo = 2.0 if speed_rpm < 600 else 10.0
    pts = [(f, v) for f, v in zip(sp["freq_hz"], sp["velocity_mm_s_pk"]) if lo <= f <= fmax]
    top = _nice(max((v for _, v in pts), default=1.0) * 1.05)
    ml, mb, mt = 48, 28, 18
    pw, ph = w - ml - 10, h - mb - mt

    def x(f: float) -> float:
        return ml + f / fmax * pw

    def y(v: float) -> float:
        return mt + ph * (1 - v / top)

    path = " ".join(f"{'M' if i == 0 else 'L'}{x(f):.1f},{y(v):.1f}" for i, (f, v) in enumerate(pts))
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" role="img" '
           f'aria-label="velocity spectrum, channel {_e(ch["channel"])}">',
           f'<rect x="{ml}" y="{mt}" width="{pw}" height="{ph}" fill="none" stroke="#999"/>']
    for k in range(1, orders + 1):
        if k * f1 > fmax:
            break
        out.append(f'<line x1="{x(k * f1):.1f}" y1="{mt}" x2="{x(k * f1):.1f}" y2="{mt + ph}" stroke="#e0b040" '
                   f'stroke-dasharray="3,3"/><text x="{x(k * f1):.1f}" y="{mt - 4}" font-size="10" '
                   f'text-anchor="middle">{k}x</text>')
    out.append(f'<path d="{path}" fill="none" stroke="#1f6fb2" stroke-width="1.2"/>')
    out.append(f'<text x="{ml - 4}" y="{mt + 8}" font-size="10" text-anchor="end">{top:g}</text>'
               f'<text x="{ml - 4}" y="{mt + ph}" font-size="10" text-anchor="end">0</text>'
               f'<text x="{ml}" y="{h - 8}" font-size="10">0 Hz</text>'
               f'<text x="{ml + pw}" y="{h - 8}" font-size="10" text-anchor="end">{fmax:.0f} Hz</text>'
               f'<text x="{ml + pw / 2}" y="{h - 8}" font-size="10" text-anchor="middle">mm/s pk, '
               f'{_e(sp.get("window", "Hann"))} window</text></svg>')
    return "".join(out)


def speed_svg(ch: dict[str, Any], balancing_rpm: float, w: int = 640, h: int = 300) -> str:
    """1x amplitude (top) and phase lag (bottom) against rpm; resonances and the balancing speed marked."""
    curve = ch["curve"]
    s = [c["rpm"] for c in curve]
    x0, x1 = min(s + [balancing_rpm]), max(s + [balancing_rpm])
    x1 = x1 if x1 > x0 else x0 + 1
    top = _nice(max(c["amp_g"] for c in curve) * 1.05)
    ml, pw = 52, w - 62
    ha, hp, gap, mt = 140, 90, 30, 16

    def x(r: float) -> float:
        return ml + (r - x0) / (x1 - x0) * pw

    amp = " ".join(f"{'M' if i == 0 else 'L'}{x(c['rpm']):.1f},{mt + ha * (1 - c['amp_g'] / top):.1f}"
                   for i, c in enumerate(curve))
    y0p = mt + ha + gap
    dots = "".join(f'<circle cx="{x(c["rpm"]):.1f}" cy="{y0p + hp * (1 - c["phase_deg"] / 360):.1f}" r="1.6" '
                   'fill="#1f6fb2"/>' for c in curve)
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" role="img" '
           f'aria-label="1x against speed, channel {_e(ch["channel"])}">',
           f'<rect x="{ml}" y="{mt}" width="{pw}" height="{ha}" fill="none" stroke="#999"/>',
           f'<rect x="{ml}" y="{y0p}" width="{pw}" height="{hp}" fill="none" stroke="#999"/>',
           f'<path d="{amp}" fill="none" stroke="#1f6fb2" stroke-width="1.4"/>', dots,
           f'<line x1="{x(balancing_rpm):.1f}" y1="{mt}" x2="{x(balancing_rpm):.1f}" y2="{y0p + hp}" '
           f'stroke="#e0b040" stroke-width="1.5"/><text x="{x(balancing_rpm):.1f}" y="{mt - 3}" font-size="10" '
           f'text-anchor="middle">balancing {balancing_rpm:.0f} rpm</text>']
    for r in ch.get("resonances", []):
        out.append(f'<line x1="{x(r["speed_rpm"]):.1f}" y1="{mt}" x2="{x(r["speed_rpm"]):.1f}" y2="{y0p + hp}" '
                   f'stroke="#e05a4f" stroke-dasharray="4,3"/><text x="{x(r["speed_rpm"]) + 3:.1f}" y="{mt + 12}" '
                   f'font-size="10" fill="#e05a4f">resonance {r["speed_rpm"]:.0f} rpm</text>')
    out.append(f'<text x="{ml - 4}" y="{mt + 8}" font-size="10" text-anchor="end">{top:g} g</text>'
               f'<text x="{ml - 4}" y="{mt + ha}" font-size="10" text-anchor="end">0</text>'
               f'<text x="{ml - 4}" y="{y0p + 8}" font-size="10" text-anchor="end">360°</text>'
               f'<text x="{ml - 4}" y="{y0p + hp}" font-size="10" text-anchor="end">0°</text>'
               f'<text x="{ml}" y="{h - 6}" font-size="10">{x0:.0f} rpm</text>'
               f'<text x="{ml + pw}" y="{h - 6}" font-size="10" text-anchor="end">{x1:.0f} rpm</text>'
               f'<text x="{ml + pw / 2}" y="{h - 6}" font-size="10" text-anchor="middle">1x amplitude (g pk, top) '
               'and phase lag after the reference mark (bottom)</text></svg>')
    return "".join(out)


def diagnosis_section_html(before: Any, after: Any = None, speed: Any = None) -> str:
    """``<section id="diagnosis">``: verdict, zones before/after, spectrum, speed plot."""
    b = _as_dict(before, spectrum=True)
    a = _as_dict(after, spectrum=True)
    sp = _as_dict(speed)
    out = ['<section id="diagnosis"><h2>Diagnosis: is it unbalance?</h2>']
    if b is None:
        out.append('<p class="note">No diagnosis was taken before balancing.</p>')
    else:
        v = b["verdict"]
        out.append(f'<p class="verdict {"pass" if v["unbalance"] else "fail"}" id="diagnosis-verdict">'
                   f'{_e(v["headline"])}</p>')
        if v["checks"]:
            out.append("<ul>" + "".join(f"<li>{_e(t)}</li>" for t in v["checks"]) + "</ul>")
            out.append(f'<p class="note">{_e(b.get("go_on") or "")}</p>')
        out.append('<table id="diagnosis-findings"><tr><th class="l">Check</th><th>Measured</th><th>Limit</th>'
                   '<th class="l">Result</th></tr>')
        for f in v["findings"]:
            val = "-" if f["value"] is None else f"{f['value']:.3g}"
            out.append(f'<tr><td class="l">{_e(f["name"])}</td><td>{val}</td><td>{f["limit"]:g}</td>'
                       f'<td class="l">{"ok" if f["ok"] else "CHECK"}</td></tr>')
        out.append("</table><p class=\"note\">Limits are common practice among balancing technicians, "
                   "not values from a standard.</p>")
    # severity before / after
    rows = []
    chans = {c["channel"]: c for c in (b or {}).get("channels", [])}
    chans_after = {c["channel"]: c for c in (a or {}).get("channels", [])}
    for ch in sorted(set(chans) | set(chans_after)):
        cb, ca = chans.get(ch), chans_after.get(ch)
        either = cb or ca
        assert either is not None  # ch is a key of one of them
        name = either["name"]

        def cell(c: dict[str, Any] | None) -> str:
            if c is None:
                return '<td>-</td><td class="l">not measured</td>'
            s = c["severity"]
            return (f'<td>{s["velocity_rms_mm_s"]:.2f}</td><td class="l zone-{_e(s["zone"])}">zone {_e(s["zone"])}: '
                    f'{_e(ZONE_MEANING[s["zone"]])}</td>')
        rows.append(f'<tr><td class="l">{_e(name)}</td>{cell(cb)}{cell(ca)}</tr>')
    if rows:
        src = next(iter(chans.values() or chans_after.values()))["severity"]
        out.append('<h3 id="severity">Vibration severity before and after balancing</h3>'
                   '<table id="severity-table"><tr><th class="l">Pickup</th><th>Before, mm/s rms</th>'
                   '<th class="l">Zone before</th><th>After, mm/s rms</th><th class="l">Zone after</th></tr>'
                   + "".join(rows) + "</table>"
                   f'<p class="note">Broadband velocity r.m.s. over the band of ISO 20816-3 (10-1000 Hz; 2-1000 Hz '
                   f'below 600 rpm), zones for {_e(src["table"])}: {_e(src["source"])}.</p>')
    if b is not None:
        loud = max(b["channels"], key=lambda c: c["one_x"]["amp_g"])
        out.append(f'<h3 id="spectrum">Spectrum before balancing ({_e(loud["name"])})</h3>')
        out.append(spectrum_svg(loud, b["rpm"]))
    if sp is not None:
        out.append(f'<h3 id="speed-plot">1x against speed ({_e(sp["kind"])})</h3>')
        for ch in sp["channels"]:
            out.append(f"<p>Channel {_e(ch['channel'])}</p>" + speed_svg(ch, sp["balancing_rpm"]))
            if ch["resonances"]:
                out.append('<table><tr><th>Resonance, rpm</th><th>1x, g</th><th>Phase swing, °</th><th>Q</th></tr>'
                           + "".join(f'<tr><td>{r["speed_rpm"]:.0f}</td><td>{r["one_x_g"]:.3f}</td>'
                                     f'<td>{r["phase_swing_deg"]:.0f}</td>'
                                     f'<td>{"-" if r["q"] is None else format(r["q"], ".1f")}</td></tr>'
                                     for r in ch["resonances"]) + "</table>")
        for w_ in sp["warnings"]:
            out.append(f'<p class="verdict fail">{_e(w_)}</p>')
        if not sp["warnings"]:
            out.append(f'<p>Balancing speed {sp["balancing_rpm"]:.0f} rpm is not within 15 % of a resonance found '
                       f'in {sp["rpm_range"][0]:.0f}-{sp["rpm_range"][1]:.0f} rpm.</p>')
    out.append("</section>")
    return "\n".join(out)
