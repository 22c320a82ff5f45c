"""Exports of a job's runs: CSV (one row per run and pickup) and JSON (everything, with conventions).

Conventions in both: amplitude ``amp_g`` is the 1x acceleration peak in units of standard
gravity (g pk, not grams), ``amp_mm_s_rms`` the same as velocity RMS at the run's speed; phase is a lag in degrees of rotation after
the reference mark (0-360); weight angles are from the reference mark against rotation; planes
and pickups are numbered from 1.
"""

from __future__ import annotations

import csv
import io
from typing import Any

from runtrue.jobs.model import ANGLE_CONVENTION
from runtrue.jobs.store import JobStore
from runtrue.readings.numbers import VIB_MM_S_RMS, vib_value

CSV_COLUMNS = (
    "job_id", "run", "kind", "taken_at", "speed_rpm", "speed_sd_rpm", "n_revs", "source",
    "pickup", "pickup_label", "amp_g", "phase_deg", "spread_g", "confidence_g", "weights", "amp_mm_s_rms",
)


def _load(store: JobStore, job_id: int) -> Any:
    rec = store.get_job(job_id)
    if rec is None:
        raise ValueError(f"there is no job {job_id}; `runtrue jobs list` shows the jobs")
    return rec


def weights_text(weights: Any) -> str:
    """``plane 1: 5 g @ 45.0° r 160 mm; ...`` (empty when no weights are on)."""
    return "; ".join(
        f"plane {w.plane}: {w.mass_g:.4g} g @ {w.angle_deg:.1f}° r {w.radius_mm:g} mm" for w in weights
    )


def runs_csv(store: JobStore, job_id: int) -> str:
    """The job's runs as CSV text: one row per run and pickup, header first."""
    rec = _load(store, job_id)
    labels = [p.label for p in rec.machine.pickups]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_COLUMNS)
    for run in store.runs(job_id):
        rd = run.reading
        for i, ch in enumerate(rd.channels):
            w.writerow([
                job_id, run.seq, run.kind, run.taken_at, f"{rd.speed_rpm:.2f}", f"{rd.speed_sd_rpm:.2f}",
                rd.n_revs, rd.source, i + 1, labels[i] if i < len(labels) else "",
                f"{ch.amp_g:.6g}", f"{ch.phase_deg:.2f}" if rd.has_phase else "", f"{ch.spread_g:.6g}", f"{ch.confidence_g:.6g}",
                weights_text(run.weights), f"{vib_value(ch.amp_g, rd.speed_rpm, VIB_MM_S_RMS):.6g}",
            ])
    return buf.getvalue()


def job_json(store: JobStore, job_id: int) -> dict[str, Any]:
    """The whole job as a JSON-able dict: machine, options, runs, decisions, result, conventions."""
    rec = _load(store, job_id)
    runs = []
    for run in store.runs(job_id):
        runs.append({
            "run": run.seq,
            "kind": run.kind,
            "taken_at": run.taken_at,
            "speed_rpm": run.reading.speed_rpm,
            "speed_sd_rpm": run.reading.speed_sd_rpm,
            "n_revs": run.reading.n_revs,
            "source": run.reading.source,
            "channels": [
                {"pickup": i + 1, "amp_g": ch.amp_g, "phase_deg": ch.phase_deg if run.reading.has_phase else None, "spread_g": ch.spread_g,
                 "confidence_g": ch.confidence_g}
                for i, ch in enumerate(run.reading.channels)
            ],
            "weights": [w.to_dict() for w in run.weights],
            "note": run.note,
        })
    return {
        "format": "runtrue job",
        "format_version": 1,
        "conventions": {
            "amplitude": "1x acceleration peak in units of standard gravity (g pk, not grams)",
            "phase": "lag in degrees of rotation after the reference mark, 0-360",
            "weight_angle": "degrees from the reference mark, against the direction of rotation",
            "rotation": "seen from the drive end",
            "numbering": "planes and pickups from 1",
            "statement": ANGLE_CONVENTION,
        },
        "job": {
            "id": rec.id, "status": rec.status, "started_at": rec.started_at,
            "finished_at": rec.finished_at, "options": rec.options,
            "method": str(rec.options.get("method", "influence-coefficient")),
        },
        "machine": rec.machine.to_dict(),
        "runs": runs,
        "decisions": [{"kind": e.kind, "at": e.at, "data": e.data} for e in store.events(job_id)],
        "result": rec.result,
    }
