"""The balancing report: one self-contained HTML page a customer or auditor can read and print.

Contents: machine, dates, the conventions used, before/after 1x per pickup, a polar diagram of
every run (inline SVG), the weights fitted with the centrifugal force each must withstand, the
grade check against ISO 21940-11 (balance quality grade -> permissible residual unbalance), the
run log, warnings and the safety cautions.  The method is stated; an amplitude-only (four-run)
job shows amplitudes only (no phase, no polar diagram) and says its residual is an estimate
without phase.  No scripts, no external files: it prints as it shows.

The page is the Jinja2 template ``templates/report.html.j2`` (autoescaped: every value is shown as
text); this module gathers what it shows (:func:`report_context`) and draws the SVG figures, which
reach the template as markup.
"""

from __future__ import annotations

import html
import math
from typing import Any

import jinja2
from markupsafe import Markup

from runtrue import __version__
from runtrue.balancing import centrifugal_force_n
from runtrue.jobs.diagnosis_section import diagnosis_section_html
from runtrue.jobs.export import weights_text
from runtrue.jobs.job import BalanceJob
from runtrue.jobs.model import ANGLE_CONVENTION, RunRecord
from runtrue.jobs.results import STANDARD, JobResult
from runtrue.jobs.store import JobStore, now_iso
from runtrue.jobs.weights import position_number
from runtrue.jobs.wording import AMPLITUDE_ONLY_CONVENTION, CAUTIONS
from runtrue.readings.numbers import (
    DEFAULT_VIB_UNIT,
    angle_text,
    force_text,
    grade_row,
    local_time_text,
    mass_text,
    percent_change_text,
    phase_text,
    unbalance_text,
    vib_number,
)

_CSS = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; color: #1b1b1b; margin: 2em auto;
       max-width: 52em; line-height: 1.4; padding: 0 1em; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; } h2 { font-size: 1.15em; border-bottom: 1px solid #999;
     margin-top: 1.6em; }
table { border-collapse: collapse; margin: 0.5em 0; } th, td { border: 1px solid #bbb; padding: 0.2em 0.5em;
     text-align: right; } th { background: #eee; } td.l, th.l { text-align: left; }
.verdict { display: inline-block; padding: 0.2em 0.8em; font-weight: bold; border: 2px solid; }
.pass { color: #0a5a1e; border-color: #0a5a1e; } .fail { color: #9b1111; border-color: #9b1111; }
.open { color: #5a4a00; border-color: #5a4a00; }
.note { font-size: 0.9em; color: #444; } ul.cautions li { margin-bottom: 0.2em; }
figure { margin: 0.5em 0; } figcaption { font-size: 0.9em; color: #444; }
@media print { body { margin: 0; max-width: none; } h2 { break-after: avoid; } table, figure { break-inside: avoid; } }
"""

_RUN_COLOURS = {"reference": "#b23a3a", "trial": "#8a6d00", "correction": "#1f5fa8", "trim": "#1f7a4a"}


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _amp_phase(z: complex) -> tuple[float, float]:
    return abs(z), math.degrees(math.atan2(z.imag, z.real)) % 360.0


def _nice_ceiling(x: float) -> float:
    if x <= 0 or not math.isfinite(x):
        return 1.0
    exp = math.floor(math.log10(x))
    for m in (1.0, 2.0, 2.5, 5.0, 10.0):
        if m * 10**exp >= x:
            return m * 10**exp
    return 10.0 ** (exp + 1)


def polar_svg(runs: list[RunRecord], pickup: int, label: str, size_px: int = 300) -> str:
    """An inline SVG polar diagram of one pickup's 1x vector in every run.

    0° (the reference mark) at the top; phase lag increases clockwise on the page; the radius
    is the 1x acceleration amplitude in g peak (the meter's own unit; the tables convert).  Reference and last run are drawn as arrows, the others as dots,
    each labelled with its run number and circled by its 95 % confidence radius.
    """
    c = size_px / 2.0
    r_px = c - 34.0
    vals = [r.reading.channels[pickup].mean for r in runs]
    full = _nice_ceiling(max((abs(v) for v in vals), default=0.0) * 1.05)
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{size_px}" height="{size_px}" '
        f'viewBox="0 0 {size_px} {size_px}" role="img" aria-label="polar diagram, pickup {pickup + 1}">',
        f"<title>{_e(label)}: 1x vector of every run</title>",
    ]
    for k in range(1, 5):
        rr = r_px * k / 4
        parts.append(f'<circle cx="{c:.1f}" cy="{c:.1f}" r="{rr:.1f}" fill="none" stroke="#ccc"/>')
        parts.append(
            f'<text x="{c + 3:.1f}" y="{c - rr + 11:.1f}" font-size="9" fill="#666">{full * k / 4:.3g} g pk</text>'
        )
    for deg in range(0, 360, 30):
        a = math.radians(deg)
        x, y = c + r_px * math.sin(a), c - r_px * math.cos(a)
        parts.append(f'<line x1="{c:.1f}" y1="{c:.1f}" x2="{x:.1f}" y2="{y:.1f}" stroke="#e2e2e2"/>')
        tx, ty = c + (r_px + 14) * math.sin(a), c - (r_px + 14) * math.cos(a) + 3
        parts.append(f'<text x="{tx:.1f}" y="{ty:.1f}" font-size="10" text-anchor="middle" fill="#444">{deg}°</text>')
    parts.append("<defs>")
    for kind, colour in _RUN_COLOURS.items():
        parts.append(
            f'<marker id="ah-{pickup}-{kind}" viewBox="0 0 10 10" refX="9" refY="5" markerWidth="7" '
            f'markerHeight="7" orient="auto"><path d="M0,0 L10,5 L0,10 z" fill="{colour}"/></marker>'
        )
    parts.append("</defs>")
    for i, (run, v) in enumerate(zip(runs, vals)):
        amp, ph = _amp_phase(v)
        rr = r_px * amp / full
        a = math.radians(ph)
        x, y = c + rr * math.sin(a), c - rr * math.cos(a)
        colour = _RUN_COLOURS.get(run.kind, "#333")
        conf = run.reading.channels[pickup].confidence_g
        if math.isfinite(conf) and conf > 0:  # the reading's 95 % confidence circle
            parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{max(r_px * conf / full, 0.5):.1f}" fill="none" '
                         f'stroke="{colour}" stroke-dasharray="2,2" stroke-opacity="0.7"/>')
        if i == 0 or i == len(runs) - 1:
            parts.append(
                f'<line x1="{c:.1f}" y1="{c:.1f}" x2="{x:.1f}" y2="{y:.1f}" stroke="{colour}" '
                f'stroke-width="2" marker-end="url(#ah-{pickup}-{run.kind})"><title>run {run.seq} ({run.kind}): '
                f"{amp:.3g} g pk at {ph:.0f}°</title></line>"
            )
        else:
            parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.5" fill="{colour}"/>')
        parts.append(f'<text x="{x + 5:.1f}" y="{y - 4:.1f}" font-size="10" fill="{colour}">{run.seq}</text>')
    parts.append("</svg>")
    return "".join(parts)


def _side_words(machine: Any, plane: int) -> str:
    return "from the far end" if machine.planes[plane - 1].view_side == "far" else "from the drive end"


def position_sketch_svg(machine: Any, plane: int, weights: list[Any], size_px: int = 240, mark: str = "mark") -> str:
    """An inline SVG of one correction plane as the fitter sees it from the plane's view side:
    the reference mark at the top, the rotation arrow, every position numbered, the weights as
    filled dots with their mass.  Weight angles are counted from the mark against rotation."""
    c = size_px / 2.0
    r = c - 40.0
    turns = machine.turns_seen_from(plane)

    def xy(angle_deg: float, rr: float) -> tuple[float, float]:
        screen = (-angle_deg if turns == "cw" else angle_deg) % 360.0  # clockwise from the top
        a = math.radians(screen)
        return c + rr * math.sin(a), c - rr * math.cos(a)

    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{size_px}" height="{size_px}" viewBox="0 0 {size_px} '
        f'{size_px}" role="img" aria-label="positions of plane {plane}">',
        f'<circle cx="{c:.1f}" cy="{c:.1f}" r="{r:.1f}" fill="none" stroke="#888"/>',
        f'<line x1="{c:.1f}" y1="{c - r - 14:.1f}" x2="{c:.1f}" y2="{c - r + 6:.1f}" stroke="#b23a3a" stroke-width="3"/>',
        f'<text x="{c:.1f}" y="{c - r - 18:.1f}" font-size="10" text-anchor="middle" fill="#b23a3a">{_e(mark)}</text>',
        f'<text x="4" y="14" font-size="10" fill="#444">turns {"clockwise" if turns == "cw" else "counter-clockwise"}</text>',
    ]
    for n, a in enumerate(machine.planes[plane - 1].position_angles_deg() or [], start=1):
        x, y = xy(a, r)
        tx, ty = xy(a, r + 13)
        parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3" fill="#fff" stroke="#555"/>')
        parts.append(f'<text x="{tx:.1f}" y="{ty + 3:.1f}" font-size="9" text-anchor="middle" fill="#555">{n}</text>')
    for w in weights:
        x, y = xy(w.angle_deg, r)
        lx, ly = xy(w.angle_deg, r - 18)
        parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="6" fill="#1f5fa8"/>')
        parts.append(f'<text x="{lx:.1f}" y="{ly + 3:.1f}" font-size="9" text-anchor="middle" fill="#1f5fa8">'
                     f"{_e(mass_text(w.mass_g))}</text>")
    parts.append("</svg>")
    return "".join(parts)


#: What the technician adds to a report: (key, label).  Kept with the job as a recorded decision
#: ("report_details" event), so no database change is needed and the latest entry wins.
REPORT_FIELDS: tuple[tuple[str, str], ...] = (
    ("technician", "Technician"),
    ("site", "Site"),
    ("asset", "Asset tag"),
    ("work_order", "Work order"),
    ("notes", "Notes"),
)


def report_details(store: JobStore, job_id: int) -> dict[str, str]:
    """The report fields last saved for ``job_id`` (empty strings when none)."""
    out = {key: "" for key, _ in REPORT_FIELDS}
    for e in store.events(job_id):
        if e.kind == "report_details":
            out.update({k: str(v) for k, v in e.data.items() if k in out})
    return out


def save_report_details(store: JobStore, job_id: int, details: dict[str, str]) -> None:
    """Record the report fields for ``job_id`` (each a line of text)."""
    data = {key: " ".join(str(details.get(key, "")).split())[:200] for key, _ in REPORT_FIELDS}
    data["n_runs"] = len(store.runs(job_id))  # type: ignore[assignment]
    store.add_event(job_id, "report_details", data)


def _verdict(result: JobResult) -> tuple[str, str]:
    if result.passed is True:
        return "pass", f"PASSED: residual unbalance within {result.grade} ({STANDARD})"
    if result.passed is False:
        return "fail", f"NOT PASSED: residual unbalance above {result.grade} ({STANDARD})"
    return "open", "NOT CHECKED: no correction run yet"


def render_html(store: JobStore, job_id: int, vib_unit: str = DEFAULT_VIB_UNIT) -> str:
    """The report of job ``job_id`` as a complete HTML document (UTF-8 text).  Vibration is
    printed in ``vib_unit`` (default mm/s rms), every number through ``runtrue.readings.numbers``
    so the report shows the digits the screens show.  The page is the template
    ``templates/report.html.j2``, filled with :func:`report_context`."""
    return _template().render(report_context(store, job_id, vib_unit))


def _template() -> jinja2.Template:
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("runtrue.jobs", "templates"),
        autoescape=True,  # every value is text to show; markup made here comes in as Markup
        trim_blocks=True,
        lstrip_blocks=True,
        undefined=jinja2.StrictUndefined,
    )
    env.filters["fmt"] = format
    return env.get_template("report.html.j2")


def report_context(store: JobStore, job_id: int, vib_unit: str = DEFAULT_VIB_UNIT) -> dict[str, Any]:
    """Everything the report template shows for job ``job_id``: the job's records, and the numbers
    formatted as the screens format them."""

    rec = store.get_job(job_id)
    if rec is None:
        raise ValueError(f"there is no job {job_id}; `runtrue jobs list` shows the jobs")
    job = BalanceJob.resume(store, job_id)
    res = job.result()
    m = job.machine
    runs = job.runs
    verdict_class, verdict = _verdict(res)
    no_phase = res.method == "four-run"
    directions = m.angle_direction_words()
    convention = ANGLE_CONVENTION
    if no_phase:
        directions = directions.replace("the reference mark", "the chalk mark (0°)")
        convention = AMPLITUDE_ONLY_CONVENTION
    if no_phase:
        method = ("Method: amplitude-only balancing (four-run method: a reference run and one trial weight "
                  "at three angles per cycle); no reference mark, phase not used.")
    elif any(r.kind == "trial" for r in runs):
        method = ("Method: influence-coefficient balancing with trial weights (least squares over every run), "
                  "1x amplitude and phase from a reference mark.")
    else:
        method = (f"Method: influence-coefficient balancing without trial runs; coefficients {res.influence_source}; "
                  "1x amplitude and phase from a reference mark.")
    events = store.events(job_id)
    details = report_details(store, job_id)
    # the job's diagnoses (first = before, last = after) and its last speed run
    diagnoses = [e.data for e in events if e.kind == "diagnosis"]
    speed_runs = [e.data for e in events if e.kind == "speed_run"]
    diagnosis = None
    if diagnoses or speed_runs:
        diagnosis = Markup(diagnosis_section_html(diagnoses[0] if diagnoses else None,
                                                  diagnoses[-1] if len(diagnoses) > 1 else None,
                                                  speed_runs[-1] if speed_runs else None))
    before_speed = res.before_speed_rpm or m.speed_rpm
    after_speed = res.after_speed_rpm or m.speed_rpm
    before_after = []
    for i, ch in enumerate(res.channels, start=1):
        ba, bp = _amp_phase(ch.before)
        row = {"n": i, "label": ch.label, "before": vib_number(ba, before_speed, vib_unit),
               "before_phase": "-" if no_phase else phase_text(bp), "after": "-", "after_phase": "-", "change": "-"}
        if ch.after is not None:
            aa, ap = _amp_phase(ch.after)
            row.update(after=vib_number(aa, after_speed, vib_unit), after_phase="-" if no_phase else phase_text(ap),
                       change=percent_change_text(ba, aa) or "-")
        before_after.append(row)
    grade_rows = []
    residual = res.residual_unbalance_gmm or []
    unc = res.residual_uncertainty_gmm or [0.0] * len(residual)
    for i, perm in enumerate(res.permissible_unbalance_gmm, start=1):
        name = m.plane_name(i) if len(res.permissible_unbalance_gmm) == m.n_planes else str(i)
        if i <= len(residual):
            grade_rows.append({"name": name, **grade_row(residual[i - 1], unc[i - 1], perm)})
        else:
            grade_rows.append({"name": name, "residual": "-", "uncertainty": "-", "permissible": unbalance_text(perm),
                               "ratio": "-", "verdict": "-"})
    weights_on = []
    for w in res.weights_on:
        pos = position_number(m, w.plane, w.angle_deg)
        weights_on.append({
            "plane": m.plane_name(w.plane), "position": pos if pos is not None else "-",
            "angle": angle_text(w.angle_deg), "mass": mass_text(w.mass_g), "radius": format(w.radius_mm, "g"),
            "what": w.label + (f" ({' + '.join(mass_text(p) for p in w.pieces)})" if w.pieces else ""),
            "force": force_text(centrifugal_force_n(w.mass_g, w.radius_mm, m.speed_rpm)),
        })
    sketches = [
        {"svg": Markup(position_sketch_svg(m, plane, [w for w in res.weights_on if w.plane == plane],
                                           mark="chalk" if no_phase else "mark")),
         "plane": m.plane_name(plane), "side": _side_words(m, plane)}
        for plane in sorted({w.plane for w in res.weights_on})
    ]
    run_rows = []
    for run in runs:
        sp = run.reading.speed_rpm
        cells = [
            f"{vib_number(ch.amp_g, sp, vib_unit)} ± {vib_number(ch.confidence_g, sp, vib_unit)}" if no_phase
            else f"{vib_number(ch.amp_g, sp, vib_unit)} @ {phase_text(ch.phase_deg)} ± "
            f"{vib_number(ch.confidence_g, sp, vib_unit)}"
            for ch in run.reading.channels
        ]
        run_rows.append({"seq": run.seq, "kind": run.kind, "taken": local_time_text(run.taken_at),
                         "speed": f"{sp:.0f}", "cells": cells, "weights": weights_text(run.weights)})
    notes = sorted({r.reading.frontend_note for r in runs if r.reading.frontend_note and not no_phase})
    runs_of = {n: [r.seq for r in runs if r.reading.frontend_note == n] for n in notes}
    # one line when every run was corrected alike (same speed)
    frontend = "; ".join(n if len(notes) == 1 else f"run {', '.join(map(str, runs_of[n]))}: {n}" for n in notes)
    return {
        "css": Markup(_CSS), "job_id": job_id, "m": m, "res": res, "no_phase": no_phase, "vib_unit": vib_unit,
        "started": local_time_text(rec.started_at), "finished": local_time_text(rec.finished_at),
        "written": local_time_text(now_iso()), "verdict_class": verdict_class, "verdict": verdict,
        "details": [(label, details[key]) for key, label in REPORT_FIELDS if details[key]],
        "method": method, "standard": STANDARD, "diagnosis": diagnosis, "directions": directions,
        "convention": convention, "before_after": before_after, "runs": runs,
        "polar": [{"svg": Markup(polar_svg(runs, i, pk.label)), "n": i + 1, "label": pk.label}
                  for i, pk in enumerate(m.pickups)] if runs and not no_phase else [],
        "grade_rows": grade_rows,
        "weights_at_start": "; ".join(f"{m.plane_name(w.plane)}: {mass_text(w.mass_g)} at {angle_text(w.angle_deg)}"
                                      for w in res.weights_at_start),
        "weights_on": weights_on, "sketches": sketches, "run_rows": run_rows, "frontend": frontend,
        "hums": sorted({w for r in runs for w in r.reading.warnings}), "cautions": CAUTIONS, "version": __version__,
    }
