"""The job store's questions across many jobs: the job list and a machine's trend.

Each reads rows through an open connection and gives records (``runtrue.jobs.store_rows``); a
job whose record cannot be used is listed with its ``problem``, never left out silently.
:class:`runtrue.jobs.store.JobStore` asks them under its lock.
"""

from __future__ import annotations

import math
import sqlite3
from typing import Any

from runtrue.jobs.store_rows import JobSummary, RecordError, TrendPoint, finite_floats, load_json


def list_jobs(db: sqlite3.Connection, machine_id: int | None = None, status: str | None = None) -> list[JobSummary]:
    """Jobs, newest first; optionally of one machine and/or one status."""
    sql = (
        "SELECT j.id, j.machine_id, j.machine, j.status, j.started_at, j.finished_at, j.result, "
        "(SELECT COUNT(*) FROM runs r WHERE r.job_id = j.id) AS n_runs FROM jobs j"
    )
    where: list[str] = []
    params: list[Any] = []
    if machine_id is not None:
        where.append("j.machine_id = ?")
        params.append(machine_id)
    if status is not None:
        where.append("j.status = ?")
        params.append(status)
    if where:
        sql += " WHERE " + " AND ".join(where)
    sql += " ORDER BY j.id DESC"
    out = []
    for r in db.execute(sql, params).fetchall():
        problem = ""
        name = "?"
        passed = None
        try:
            result = load_json(r["result"], "jobs", r["id"]) if r["result"] else None
            machine = load_json(r["machine"], "jobs", r["id"])
            if not isinstance(machine, dict) or not isinstance(machine.get("name"), str):
                raise RecordError("jobs", r["id"], "the machine it was started on has no name")
            name = machine["name"]
            passed = result.get("passed") if isinstance(result, dict) else None
            passed = passed if isinstance(passed, bool) else None
        except RecordError as exc:
            problem = str(exc)
        out.append(
            JobSummary(
                id=r["id"],
                machine_id=r["machine_id"],
                machine_name=name,
                status=str(r["status"]),
                started_at=str(r["started_at"]),
                finished_at=r["finished_at"],
                n_runs=r["n_runs"],
                passed=passed,
                problem=problem,
            )
        )
    return out


def trend(db: sqlite3.Connection, machine_id: int) -> list[TrendPoint]:
    """The machine's finished jobs, oldest first: initial and final 1× and residual unbalance."""
    rows = db.execute(
        "SELECT id, started_at, result FROM jobs WHERE machine_id=? AND status != 'open' "
        "AND result IS NOT NULL ORDER BY id",
        (machine_id,),
    ).fetchall()
    points = []
    for r in rows:
        try:
            res = load_json(r["result"], "jobs", r["id"])
        except RecordError:
            continue  # listed as unreadable by list_jobs; no point for the trend
        if not isinstance(res, dict):
            continue
        residual = finite_floats(res.get("residual_unbalance_gmm"))
        permissible = finite_floats(res.get("permissible_unbalance_gmm"))
        if len(residual) != len(permissible) or any(p <= 0 for p in permissible):
            residual, permissible = [], []  # a ratio of these would mean nothing
        passed = res.get("passed")
        speed = res.get("speed_rpm")
        points.append(
            TrendPoint(
                job_id=r["id"],
                date=str(r["started_at"]),
                initial_amp_g=finite_floats(res.get("initial")),
                final_amp_g=finite_floats(res.get("final")),
                residual_unbalance_gmm=residual,
                permissible_unbalance_gmm=permissible,
                passed=passed if isinstance(passed, bool) else None,
                speed_rpm=float(speed) if isinstance(speed, (int, float)) and math.isfinite(speed) else None,
            )
        )
    return points


def schema_history(db: sqlite3.Connection) -> list[dict[str, Any]]:
    """Every upgrade the file went through, oldest first: ``version``, ``applied_at`` (UTC),
    ``runtrue`` (the version that ran it) and ``what``; empty for a file never upgraded."""
    rows = db.execute("SELECT version, applied_at, runtrue, what FROM schema_history ORDER BY version").fetchall()
    return [{"version": r[0], "applied_at": r[1], "runtrue": r[2], "what": r[3]} for r in rows]
