"""Balancing with a reference mark: the influence-coefficient method as a job's method.

Method: influence-coefficient balancing with trial weights, least-squares refit of the
coefficients over every run (Goodman's method), trim runs until the ISO 21940-11 balance
quality grade is met; all maths comes from ``runtrue.balancing`` and ``runtrue.allocation``.
The order of steps and the sizing of trial weights are common practice.

Steps::

    reference ──> trial (plane 1) ──> trial (plane 2, two-plane rotors) ──> correction ──> trim ... ──> done
        │          └── trial too small: stays at "trial" with a larger suggested mass
        └── machine has stored influence coefficients: straight to "correction"
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

from runtrue.balancing import (
    BalancingError,
    Solution,
    check_grade,
    check_trial_effect,
    correction_from_influence,
    solve,
    suggest_trial_weight,
)
from runtrue.balancing.grades import parse_grade
from runtrue.jobs.engine import engine_run, influence_rows
from runtrue.jobs.fitting import plan_plane, trial_weight
from runtrue.jobs.limits import capped_trial_mass, speeds_differ, within_force_limit
from runtrue.jobs.method import GradeOutcome, next_trial_scale
from runtrue.jobs.model import Machine, RunRecord, Weight
from runtrue.jobs.results import INFLUENCE_METHOD, CorrectionPlan, PlaneCorrection, TrialCheck
from runtrue.jobs.weights import is_trial, plane_sums, same_sums, trial_label
from runtrue.jobs.wording import (
    TRIAL_CHOSEN_BY_USER,
    first_trial_words,
    influence_instructions,
    trial_change,
    trial_change_words,
)

if TYPE_CHECKING:
    from runtrue.jobs.job import BalanceJob


class InfluenceMethod:
    """Influence coefficients from trial weights (one or more planes), with a reference mark."""

    name = INFLUENCE_METHOD

    def __init__(self, job: BalanceJob) -> None:
        self.job = job
        self._accepted: dict[int, RunRecord] = {}  # plane -> accepted trial run
        self._trial_override: dict[int, Weight] = {}
        self._influence: list[list[complex]] | None = None
        self._influence_warnings: list[str] = []
        self._solution: Solution | None = None
        self._plan_pending: str | None = None
        self._capped_note = ""  # set when a larger trial is held back by the force limit

    @staticmethod
    def start_options(machine: Machine, *, trial_removed: bool, use_stored_influence: bool | None,
                      max_trim_runs: int) -> dict[str, Any]:
        """The recorded options of a new job by this method (ValueError when they cannot work)."""
        if use_stored_influence is None:
            use_stored_influence = machine.influence is not None
        if use_stored_influence and machine.influence is None:
            raise ValueError(f"machine {machine.name!r} has no stored influence coefficients; run trial weights")
        if use_stored_influence and machine.influence is not None:
            rows = machine.influence.coefficients
            if len(rows) != machine.n_pickups or any(len(r) != machine.n_planes for r in rows):
                raise ValueError(
                    f"the stored influence coefficients are for {len(rows)} pickup(s) x "
                    f"{len(rows[0]) if rows else 0} plane(s) but {machine.name!r} now has "
                    f"{machine.n_pickups} x {machine.n_planes}: run trial weights to measure them again"
                )
        return {
            "trial_removed": bool(trial_removed),
            "use_stored_influence": bool(use_stored_influence),
            "max_trim_runs": int(max_trim_runs),
        }

    # -- what the job asks -------------------------------------------------------------------------
    @property
    def influence(self) -> list[list[complex]] | None:
        return self._influence

    @property
    def early_larger_trial(self) -> Weight | None:
        return None

    def instructions(self) -> list[str]:
        return influence_instructions(self.job)

    def check_trial_change(self) -> None:
        """A trial weight may be changed at any trial step."""

    def after_replay(self) -> None:
        """Only the last step's plan matters after a resume: it is worked out once, at the end."""
        job = self.job
        pending = self._plan_pending
        if pending is not None and job.state.step == pending:
            job.guarded(lambda: self._enter_correction(pending), "The correction cannot be worked out")

    def outcome(self) -> GradeOutcome:
        job = self.job
        ref = next((r for r in job.runs if r.kind == "reference"), None)
        last = job.runs[-1] if job.runs else None
        after_run = last if last is not None and last.kind in ("correction", "trim") else None
        residual = uncertainty = None
        passed: bool | None = None
        if after_run is not None and self._influence is not None:
            residual, uncertainty, passed = self._grade_with_uncertainty(after_run)
        return GradeOutcome(
            channels=job.channel_results(ref, after_run),
            residual_gmm=residual,
            uncertainty_gmm=uncertainty,
            passed=passed,
            influence=self._influence,
            influence_magnitude=None,
            influence_source=self.influence_source(),
        )

    def influence_source(self) -> str:
        """Where the influence coefficients in use came from, in words for the report."""
        job = self.job
        if self._influence is None:
            return "not known yet (no trial run)"
        inf = job.machine.influence
        if job.options.get("use_stored_influence") and inf is not None:
            trial_runs = [r.seq for r in job.runs if r.kind in ("correction", "trim")]
            when = inf.measured_at[:10] if inf.measured_at else "an earlier date"
            head = f"stored from job {inf.job_id} on {when}" if inf.job_id is not None else f"stored on {when}"
            if len(trial_runs) > 1:
                return head + ", refitted with the runs of this job"
            return head
        seqs = [r.seq for r in job.runs]
        return f"measured in this job (runs {seqs[0]}-{seqs[-1]})" if len(seqs) > 1 else "measured in this job"

    # -- the runs ------------------------------------------------------------------------------------
    def on_reference(self, run: RunRecord) -> None:
        job, s = self.job, self.job.state
        inf = job.machine.influence
        if job.options.get("use_stored_influence") and inf is not None:
            self._influence = [list(r) for r in inf.coefficients]
            if speeds_differ(run.reading.speed_rpm, inf.speed_rpm):
                s.warnings.append(
                    f"Stored influence coefficients were measured at {inf.speed_rpm:g} rpm but this run was at "
                    f"{run.reading.speed_rpm:.0f} rpm; the machine's response changes with speed, so expect trim runs."
                )
            self._enter_correction("correction")
        else:
            self._enter_trial(1)

    def on_check(self, run: RunRecord) -> None:
        job, s = self.job, self.job.state
        if run.kind == "trim":
            s.trims_done += 1
        self._refit()
        residual, _unc, passed = self._grade_with_uncertainty(run)
        job.save_progress()
        if passed:
            job.finish("passed", "")
            return
        if s.trims_done >= job.max_trim_runs():
            job.finish("stopped", f"trim run limit ({job.options.get('max_trim_runs')}) reached before the grade was met")
            return
        self._enter_correction("trim")
        worst = max(r / p for r, p in zip(residual, job.tolerance.per_plane_gmm))
        s.message = f"Residual unbalance is {worst:.1f} times the permissible value: a trim run is needed."

    def on_trial(self, run: RunRecord) -> None:
        s, m = self.job.state, self.job.machine
        plane = s.plane or 1
        trial_ws = [w for w in run.weights if is_trial(w) and w.plane == plane]
        base = self._baseline_for(run, trial_ws)
        best = None
        for i in range(m.n_pickups):
            b, t = base.reading.channels[i], run.reading.channels[i]
            v = check_trial_effect(b.mean, t.mean, b.spread_g, t.spread_g)
            if best is None or v.ratio > best.ratio:
                best = v
        assert best is not None
        chk = TrialCheck(plane, bool(best.ok), float(best.ratio), str(best.message), float(best.suggested_scale))
        s.last_trial_check = chk
        # the pickup the trial moved most, in the trade's terms: percent and degrees
        moved = max(range(m.n_pickups),
                    key=lambda i: abs(run.reading.channels[i].mean - base.reading.channels[i].mean))
        pct, deg = trial_change(base.reading.channels[moved].mean, run.reading.channels[moved].mean)
        change = f"{m.pickup_name(moved)}: {trial_change_words(pct, deg)}"
        if chk.ok:
            self._accepted[plane] = run
            self._after_trial_accepted(plane)
            verdict = f"Trial in {m.plane_name(plane)} GOOD - {change}."
            s.message = verdict + (" " + s.message if s.message else "")
        else:
            prev = trial_ws[0] if trial_ws else s.trial
            self._trial_override.pop(plane, None)
            self._enter_trial(plane, next_trial_scale(chk.suggested_scale), prev)
            bigger = f"fit {s.trial.mass_g:.3g} g instead" if s.trial is not None else "fit a larger trial"
            s.message = (f"Trial in {m.plane_name(plane)} TOO SMALL - {change}; {bigger} and run again. "
                         f"{chk.message}")
            if self._capped_note:
                s.message += " " + self._capped_note

    def apply_event(self, kind: str, data: dict[str, Any]) -> None:
        job, s = self.job, self.job.state
        if kind == "trial_set":
            plane = int(data["plane"])
            w = Weight(plane, float(data["mass_g"]), float(data["angle_deg"]), float(data["radius_mm"]), trial_label(plane))
            self._trial_override[plane] = w
            if s.step == "trial" and s.plane == plane:
                s.trial = w
                s.message = TRIAL_CHOSEN_BY_USER
        elif kind == "trial_accepted":
            plane = int(data["plane"])
            chk = s.last_trial_check
            trial_run = job.runs[-1]
            if chk is not None:
                s.last_trial_check = TrialCheck(chk.plane, chk.ok, chk.ratio, chk.message, chk.suggested_scale, True)
                s.warnings.append(f"Plane {plane}: trial effect small ({chk.message}); accepted by the user.")
            self._accepted[plane] = trial_run
            job.guarded(lambda: self._after_trial_accepted(plane), "The trial run cannot be used")

    # -- internals ------------------------------------------------------------------------------------
    def _enter_trial(self, plane: int, scale: float = 1.0, previous: Weight | None = None) -> None:
        s = self.job.state
        s.step = "trial"
        s.plane = plane
        s.plan = None
        if plane in self._trial_override:
            s.trial = self._trial_override[plane]
            return
        s.trial = self._suggest_trial(plane, scale, previous)

    def _suggest_trial(self, plane: int, scale: float, previous: Weight | None) -> Weight:
        job = self.job
        m = job.machine
        spec = m.planes[plane - 1]
        if previous is None:
            sug = suggest_trial_weight(m.rotor_mass_kg, m.speed_rpm, spec.radius_mm, n_planes=m.n_planes,
                                       grade=parse_grade(m.grade))
            mass = float(sug.mass_g)
            job.state.message = first_trial_words(job.force_limit_n)
            angle = None
        else:
            mass, self._capped_note = capped_trial_mass(m, previous.mass_g * scale, previous.mass_g, spec.radius_mm)
            angle = previous.angle_deg
        on = list(job.runs[-1].weights) if job.runs else []
        staying = [w for w in on if not is_trial(w)] if job.options["trial_removed"] else [
            w for w in on if not (is_trial(w) and w.plane == plane)
        ]
        capped = previous is not None and bool(self._capped_note)
        in_use = [p for w in staying for p in w.pieces]
        return within_force_limit(
            m, lambda mass_g, at_least: trial_weight(m, plane, mass_g, angle, in_use, at_least=at_least),
            mass, at_least=previous is not None and not capped,
        )

    def _baseline_for(self, run: RunRecord, trial_ws: list[Weight]) -> RunRecord:
        """The latest earlier run with the same weights as ``run`` less its trial in this plane."""
        runs = self.job.runs
        target = plane_sums(w for w in run.weights if w not in trial_ws)
        for r in reversed(runs[:-1]):
            if same_sums(plane_sums(r.weights), target):
                return r
        return runs[0]

    def _after_trial_accepted(self, plane: int) -> None:
        if plane < self.job.machine.n_planes:
            self._enter_trial(plane + 1)
        else:
            self._refit()
            self._enter_correction("correction")

    def _refit(self) -> None:
        """Least-squares influence coefficients over every run (Goodman); stored ones if too few runs."""
        job = self.job
        runs = [engine_run(r) for r in job.runs]
        radii = {i + 1: p.radius_mm for i, p in enumerate(job.machine.planes)}
        first = plane_sums(job.runs[0].weights)  # weights on in every run (left on) separate nothing
        seen = {p for r in job.runs for p, u in plane_sums(r.weights).items() if abs(u - first.get(p, 0j)) > 1e-9}
        missing = [p for p in range(1, job.machine.n_planes + 1) if p not in seen]
        if missing:
            if self._influence is not None:
                return  # stored coefficients: keep them until every plane has had a weight
            raise BalancingError(
                f"no run has a weight in plane {missing[0]}, so its influence is unknown: "
                "fit a trial weight there and take a run (the runs do not separate the planes)"
            )
        try:
            sol = solve(runs, radius_mm=radii)
        except BalancingError as exc:
            if self._influence is None:
                raise
            self._influence_warnings = [f"Influence coefficients not refitted ({exc}); using the stored ones."]
            return
        self._solution = sol
        self._influence = influence_rows(sol.influence)
        self._influence_warnings = list(sol.warnings)

    def _enter_correction(self, kind: str) -> None:
        job = self.job
        s = job.state
        s.step = kind
        s.plane = None
        s.trial = None
        if job.replaying:
            # Only the last step's plan matters after a resume: work it out once, at the end.
            s.plan = None
            self._plan_pending = kind
            return
        self._plan_pending = None
        on = list(job.runs[-1].weights)
        remove = [w for w in on if is_trial(w)] if job.options["trial_removed"] else []
        now = [w for w in on if w not in remove]
        radii = [p.radius_mm for p in job.machine.planes]
        assert self._influence is not None
        # The reading of the state the correction starts from: the latest run with exactly these weights.
        base = next((r for r in reversed(job.runs) if same_sums(plane_sums(r.weights), plane_sums(now))), None)
        if base is None:
            base = job.runs[-1]
            remove, now = [], on
        spreads = [c.spread_g for c in base.reading.channels]
        sol = correction_from_influence(self._influence, base.reading.vector(), radii, spreads=spreads if any(spreads) else None)
        planes: list[PlaneCorrection] = []
        # Combine: the weights left on by the last job come off, and the correction takes their place.
        old = [w for w in now if w in job.weights_at_start] if job.options.get("combine_at_start") else []
        if old and kind == "correction":
            remove = remove + old
            now = [w for w in now if w not in old]
        else:
            old = []
        old_sums = plane_sums(old)
        # Move: the weights left on by the last job may stay, move to another position or come off,
        # whichever the allocator finds best for the correction (their effect is in the reading).
        movable = ([w for w in now if w in job.weights_at_start]
                   if job.options.get("move_at_start") and kind == "correction" else [])
        in_use = [m for w in now for m in w.pieces]
        for w in sol.corrections:
            pc = plan_plane(
                job.machine, w.plane, w.unbalance_gmm + old_sums.get(w.plane, 0j), kind, s.trims_done + 1,
                job.plane_permissible(w.plane), in_use, existing=[x for x in movable if x.plane == w.plane]
            )
            in_use += [m for f in pc.fit for m in f.pieces]
            remove = remove + [x for x in pc.taken_off if x not in remove]
            planes.append(pc)
        s.plan = CorrectionPlan(
            kind=kind,
            remove=remove,
            planes=planes,
            predicted=list(sol.predicted),
            method=str(sol.method),
            condition_number=float(sol.condition_number),
            warnings=list(self._influence_warnings) + list(sol.warnings) + [w for pc in planes for w in pc.warnings],
        )
        for text in s.plan.warnings:
            if text not in s.warnings:
                s.warnings.append(text)

    def _grade_with_uncertainty(self, run: RunRecord) -> tuple[list[float], list[float], bool]:
        """Residual unbalance per plane (engine's least-squares estimate), its 95 % uncertainty
        from the reading's confidence radii, and pass/fail: passed only when residual plus
        uncertainty is within the permissible value of every plane (so a pass is a pass even
        allowing for the measurement's scatter)."""
        assert self._influence is not None
        gc = check_grade(self._influence, run.reading.vector(), self.job.tolerance)
        residual = [float(x) for x in gc.residual_gmm]
        pinv = np.linalg.pinv(np.array(self._influence, dtype=complex))
        conf = np.array([c.confidence_g if math.isfinite(c.confidence_g) else 0.0 for c in run.reading.channels])
        unc = [float(np.sqrt(np.sum(np.abs(row) ** 2 * conf**2))) for row in pinv]
        if len(unc) != len(residual):  # one tolerance plane for several correction planes: summed
            unc = [float(sum(unc))]
        passed = all(r + u <= p for r, u, p in zip(residual, unc, gc.permissible_gmm))
        return residual, unc, passed
