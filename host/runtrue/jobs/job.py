"""A balancing job as one small state machine, from the reference run to a result.

Steps (``BalanceJob.state.step``)::

    reference ──> trial ... ──> correction ──> trim ... ──> done
        └── machine has stored influence coefficients: straight to "correction"

The job keeps what every balancing job has: the runs and decisions, recorded in the
:class:`JobStore` before anything else changes (so :meth:`BalanceJob.resume` replays the same
event log into the same state after a crash); the checks on a reading (channels, speed, rated
speed); the force limit on weights; planned weights; stopping and finishing.  Everything that
depends on how the unbalance is found is its METHOD (a strategy object):

* :class:`~runtrue.jobs.method_influence.InfluenceMethod` - with a reference mark: influence
  coefficients from trial weights, one or more planes (least-squares refit over every run,
  Goodman's method), trim runs until the ISO 21940-11 grade is met;
* :class:`~runtrue.jobs.method_four_run.FourRunMethod` - amplitude only (no reference mark):
  the four-run method, one plane.

A user (the TUI, the headless demo, a test) drives a job like this::

    job = BalanceJob.start(store, machine)          # or BalanceJob.resume(store, job_id)
    while job.state.step != "done":
        show(job.instructions())                    # what to do physically, with cautions
        fit(job.planned_weights())                  # weights that should be on for the next run
        job.record_run(reading)                     # committed to the store before it returns
    show(job.result())

``record_run(reading, weights_present=None)``: ``weights_present`` defaults to
``planned_weights()``; pass the real list when the user fitted something else.  Every decision
(trial chosen, weak trial accepted, forces confirmed, stop) is recorded as an event.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import Any

from runtrue.balancing import Tolerance, permissible_unbalance
from runtrue.balancing.grades import parse_grade
from runtrue.jobs.limits import (
    ForceLimitExceeded,
    OverSpeed,
    force_limit_n,
    force_n,
    speed_warning,
)
from runtrue.jobs.method import BalancingMethod
from runtrue.jobs.method_four_run import FourRunMethod
from runtrue.jobs.method_influence import InfluenceMethod
from runtrue.jobs.model import Machine, RunReading, RunRecord, StoredInfluence, Weight
from runtrue.jobs.results import STANDARD, ChannelResult, ForceCheck, JobResult, JobState
from runtrue.jobs.store import JobStore, now_iso
from runtrue.jobs.weights import is_trial, start_weights_options, trial_label, weight_key
from runtrue.jobs.wording import CAUTIONS
from runtrue.readings.numbers import unbalance_text
from runtrue.readings.units import wrap_deg
from runtrue.validation import WEIGHT_MIN_G

DEFAULT_MAX_TRIM_RUNS = 5


class BalanceJob:
    """One balancing job, recorded in a :class:`JobStore` as it happens.

    Create with :meth:`start` or :meth:`resume`.  Options: ``trial_removed`` (take each trial
    weight off before the next run, default True; else trials stay on and the correction is net
    of them), ``use_stored_influence`` (default: when the machine has coefficients stored),
    ``max_trim_runs`` (the job stops, not passed, after this many trim runs),
    ``amplitude_only`` (the four-run method without phase, one plane only: :meth:`start` then
    returns an :class:`AmplitudeOnlyJob`).  ``method`` is the balancing method in use.
    """

    def __init__(self, store: JobStore, job_id: int, machine: Machine, options: dict[str, Any]) -> None:
        self.store = store
        self.job_id = job_id
        self.machine = machine
        self.options = options
        self.runs: list[RunRecord] = []
        self.state = JobState()
        self.tolerance: Tolerance = permissible_unbalance(
            parse_grade(machine.grade), machine.rotor_mass_kg, machine.speed_rpm, planes=machine.n_planes
        )
        self.replaying = False  # True while resume() rebuilds the state: nothing is written then
        self.weights_at_start: list[Weight] = [Weight.from_dict(d) for d in options.get("weights_at_start", [])]
        self._confirmed_forces: dict[int, set[tuple[int, float, float, float]]] = {}  # n_runs -> weights
        self.method: BalancingMethod = (FourRunMethod(self) if options.get("amplitude_only")
                                        else InfluenceMethod(self))
        self.state.method = self.method.name

    # -- creating and resuming --------------------------------------------------------------------
    @classmethod
    def start(
        cls,
        store: JobStore,
        machine: Machine,
        *,
        trial_removed: bool = True,
        use_stored_influence: bool | None = None,
        max_trim_runs: int = DEFAULT_MAX_TRIM_RUNS,
        amplitude_only: bool = False,
        weights_at_start: Sequence[Weight] = (),
        combine_at_start: bool = False,
        move_at_start: bool = False,
    ) -> BalanceJob:
        """Start and record a new job on ``machine`` (saved or not).

        ``amplitude_only=True``: the four-run method (reference, one trial weight at three
        angles, correction, check), using amplitudes only; one correction plane only (a
        ``ValueError`` says so for more); ``max_trim_runs`` then limits the extra four-run cycles.
        """
        if amplitude_only:
            options = FourRunMethod.start_options(
                machine, trial_removed=trial_removed, use_stored_influence=use_stored_influence,
                max_trim_runs=max_trim_runs,
            )
            options.update(start_weights_options(machine, list(weights_at_start), False))
        else:
            options = InfluenceMethod.start_options(
                machine, trial_removed=trial_removed, use_stored_influence=use_stored_influence,
                max_trim_runs=max_trim_runs,
            )
            options.update(start_weights_options(machine, weights_at_start, combine_at_start, move_at_start))
        job_id = store.new_job(machine, options)
        return job_class(options)(store, job_id, machine, options)

    @classmethod
    def resume(cls, store: JobStore, job_id: int) -> BalanceJob:
        """Rebuild a job from the store (after a crash, or to look at a finished one): its runs
        and events are replayed, in the order they were recorded, into the same state."""
        rec = store.get_job(job_id)
        if rec is None:
            raise ValueError(f"there is no job {job_id}; `runtrue jobs list` shows the jobs")
        job = job_class(rec.options)(store, job_id, rec.machine, rec.options)
        job.replaying = True
        runs = store.runs(job_id)
        events = store.events(job_id)
        ei = 0
        for k in range(len(runs) + 1):
            while ei < len(events) and int(events[ei].data.get("n_runs", 0)) <= k:
                job._apply_event(events[ei].kind, events[ei].data)
                ei += 1
            if k < len(runs):
                job._apply_run(runs[k])
        job.replaying = False
        job.method.after_replay()
        if rec.status != "open" and job.state.status == "open":
            job.state.status = rec.status
            job.state.step = "done"
        elif rec.status == "open" and job.state.status != "open":
            # Killed between the last run and closing the job: close it now.
            job.finish(job.state.status, "")
        return job

    # -- what the user sees ----------------------------------------------------------------------
    @property
    def step(self) -> str:
        return self.state.step

    def cautions(self) -> list[str]:
        return list(CAUTIONS)

    def weights_on(self) -> list[Weight]:
        """The weights on the rotor now (those of the last run, or those left on at the start)."""
        return list(self.runs[-1].weights) if self.runs else list(self.weights_at_start)

    def planned_weights(self) -> list[Weight]:
        """Every weight that should be on the rotor (relative to the reference state) for the next run."""
        s = self.state
        on = self.weights_on()
        if s.step == "reference" or s.step == "done":
            return on
        if s.step == "trial":
            assert s.trial is not None
            kept = [w for w in on if not is_trial(w)] if self.options["trial_removed"] else [
                w for w in on if not (is_trial(w) and w.plane == s.plane)
            ]
            return kept + [s.trial]
        if s.plan is None:  # the correction could not be worked out: nothing to change
            return on
        removed = set(s.plan.remove)
        # a piece lighter than the smallest weight anyone can fit (a strip cut of a few tenths of a
        # milligram) is nothing to fit: it is left out rather than recorded
        to_fit = [w for w in s.plan.weights_to_fit() if w.mass_g >= WEIGHT_MIN_G]
        return [w for w in on if w not in removed] + to_fit

    def suggested_trial(self) -> Weight | None:
        return self.state.trial if self.state.step == "trial" else None

    def instructions(self) -> list[str]:
        """What to do now, step by step, in plain sentences (conventions and cautions included)."""
        return self.method.instructions()

    def to_remove_before_trial(self) -> list[Weight]:
        """The trial weights to take off before the next trial run."""
        on = list(self.runs[-1].weights) if self.runs else []
        if self.options["trial_removed"]:
            return [w for w in on if is_trial(w)]
        return [w for w in on if is_trial(w) and w.plane == self.state.plane]

    @property
    def early_larger_trial(self) -> Weight | None:
        """Amplitude-only jobs, after a weak-looking trial run 1: the larger trial to fit instead."""
        return self.method.early_larger_trial

    # -- recording -------------------------------------------------------------------------------
    def record_run(
        self, reading: Any, weights_present: Sequence[Weight] | None = None, note: str = "",
        *, over_speed_confirmed: bool = False,
    ) -> RunRecord:
        """Record a taken reading for the current step (written to the store first), then advance.

        ``reading``: a ``runtrue.readings.Reading`` or a :class:`RunReading`; its channels must
        match the machine's pickups.  ``weights_present`` defaults to :meth:`planned_weights`.
        """
        if self.state.step == "done":
            raise ValueError("this job is finished; start a new job to balance again")
        rr = RunReading.from_reading(reading)
        if len(rr.channels) != self.machine.n_pickups:
            raise ValueError(
                f"the reading has {len(rr.channels)} channels but {self.machine.name} has "
                f"{self.machine.n_pickups} pickups: check the channels enabled on the meter"
            )
        for i, ch in enumerate(rr.channels, start=1):
            if not (math.isfinite(ch.mean.real) and math.isfinite(ch.mean.imag)):
                raise ValueError(f"pickup {i}: the reading is not a number; take the reading again")
        if not (rr.speed_rpm > 0 and math.isfinite(rr.speed_rpm)):
            raise ValueError("the reading has no valid speed; check the reference sensor and take it again")
        rated = self.machine.rated_speed_rpm
        if rated is not None and rr.speed_rpm > rated and not over_speed_confirmed:
            raise OverSpeed(rr.speed_rpm, rated)
        if rated is not None and rr.speed_rpm > rated:
            note = (note + " " if note else "") + f"recorded above the rated speed ({rr.speed_rpm:.0f} > {rated:g} rpm), confirmed by the user"
        for w in weights_present or ():
            if not 1 <= w.plane <= self.machine.n_planes:
                raise ValueError(f"weight in plane {w.plane}, but the machine has {self.machine.n_planes} plane(s)")
            if not (w.mass_g >= 0 and math.isfinite(w.mass_g) and w.radius_mm > 0 and math.isfinite(w.angle_deg)):
                raise ValueError(f"weight {w.label or ''} in plane {w.plane}: mass >= 0 g, radius > 0 mm and an angle, please")
        weights = list(weights_present) if weights_present is not None else self.planned_weights()
        kind = self.state.step
        run = self.store.add_run(self.job_id, kind, rr, weights, note)
        self._apply_run(run)
        return run

    def set_trial(
        self, mass_g: float, angle_deg: float, radius_mm: float | None = None, *, confirm_over_limit: bool = False
    ) -> Weight:
        """Use this trial weight instead of the suggestion (recorded).  A weight pulling with more
        than the force limit raises :class:`ForceLimitExceeded` unless ``confirm_over_limit``.
        The method may refuse a change at this point (the four-run method: only before the
        first trial run of a cycle)."""
        s = self.state
        if s.step != "trial" or s.plane is None:
            raise ValueError("a trial weight can be chosen only at a trial step")
        self.method.check_trial_change()
        if not (mass_g > 0 and math.isfinite(mass_g)):
            raise ValueError("the trial mass must be a positive number of grams")
        radius = radius_mm if radius_mm is not None else self.machine.planes[s.plane - 1].radius_mm
        candidate = Weight(s.plane, mass_g, wrap_deg(angle_deg), radius, trial_label(s.plane))
        force, limit = self.force_n(candidate), self.force_limit_n
        if force > limit and not confirm_over_limit:
            raise ForceLimitExceeded(candidate, force, limit)
        data = {"plane": s.plane, "mass_g": mass_g, "angle_deg": wrap_deg(angle_deg), "radius_mm": radius}
        self.store.add_event(self.job_id, "trial_set", {**data, "n_runs": len(self.runs)})
        self._apply_event("trial_set", data)
        if force > limit:
            self.confirm_forces()
        assert self.state.trial is not None
        return self.state.trial

    def poor_prediction(self) -> str:
        """When the pieces to fit cannot bring a plane within its permissible unbalance: what
        they leave and what to do; empty when the plan is predicted to pass."""
        plan = self.state.plan
        if plan is None or self.state.step not in ("correction", "trim"):
            return ""
        short = [(pc, self.plane_permissible(pc.plane)) for pc in plan.planes]
        short = [(pc, perm) for pc, perm in short if pc.residual_gmm > perm]
        if not short:
            return ""
        parts = "; ".join(f"{self.machine.plane_name(pc.plane)} {unbalance_text(pc.residual_gmm)} "
                          f"(allowed {unbalance_text(perm)})" for pc, perm in short)
        return (f"PREDICTED NOT TO PASS: the pieces available leave {parts}. Add weights of other sizes to the "
                "stock (machine screen), allow more pieces per position, or fit these and trim afterwards.")

    # -- the force limit ----------------------------------------------------------------------------
    @property
    def force_limit_n(self) -> float:
        return force_limit_n(self.machine)

    def force_n(self, w: Weight) -> float:
        """The centrifugal force of ``w`` at the machine's running speed, newtons."""
        return force_n(self.machine, w)

    def weights_over_limit(self) -> list[ForceCheck]:
        """Weights to fit for the next run whose force at running speed exceeds the force limit."""
        rest = self.weights_on()
        add = []
        for w in self.planned_weights():
            if w in rest:
                rest.remove(w)
            else:
                add.append(w)
        limit = self.force_limit_n
        return [ForceCheck(w, self.force_n(w), limit) for w in add if self.force_n(w) > limit]

    @property
    def forces_confirmed(self) -> bool:
        """True when no weight for the next run is over the limit, or the user confirmed them."""
        over = self.weights_over_limit()
        if not over:
            return True
        keys = self._confirmed_forces.get(len(self.runs), set())
        return all(weight_key(c.weight) in keys for c in over)

    def confirm_forces(self) -> None:
        """Record that the user saw and confirmed the forces of the weights over the limit."""
        over = self.weights_over_limit()
        data = {"weights": [c.weight.to_dict() for c in over], "forces_n": [c.force_n for c in over],
                "limit_n": self.force_limit_n}
        self.store.add_event(self.job_id, "forces_confirmed", {**data, "n_runs": len(self.runs)})
        self._apply_event("forces_confirmed", {**data, "n_runs": len(self.runs)})

    def accept_trial_anyway(self) -> None:
        """Go on with a trial whose effect looked too small (recorded; the warning stays)."""
        chk = self.state.last_trial_check
        if self.state.step != "trial" or chk is None or chk.ok:
            raise ValueError("there is no weak trial run to accept")
        data = {"plane": chk.plane}
        self.store.add_event(self.job_id, "trial_accepted", {**data, "n_runs": len(self.runs)})
        self._apply_event("trial_accepted", data)

    def stop(self, reason: str = "stopped by the user") -> None:
        """End the job here (recorded); the runs stay in the store and the report can be written."""
        if self.state.step == "done":
            return
        self.store.add_event(self.job_id, "stopped", {"reason": reason, "n_runs": len(self.runs)})
        self._apply_event("stopped", {"reason": reason})

    # -- results ---------------------------------------------------------------------------------
    @property
    def influence(self) -> list[list[complex]] | None:
        """The current influence coefficients ``[pickup][plane]`` (g per g·mm), or None."""
        return self.method.influence

    def result(self) -> JobResult:
        ref = next((r for r in self.runs if r.kind == "reference"), None)
        last = self.runs[-1] if self.runs else None
        after_run = last if last is not None and last.kind in ("correction", "trim") else None
        out = self.method.outcome()
        tol = self.tolerance
        return JobResult(
            job_id=self.job_id,
            machine_name=self.machine.name,
            grade=self.machine.grade,
            standard=STANDARD,
            speed_rpm=self.machine.speed_rpm,
            channels=out.channels,
            residual_unbalance_gmm=out.residual_gmm,
            permissible_unbalance_gmm=list(tol.per_plane_gmm),
            permissible_total_gmm=float(tol.permissible_unbalance_gmm),
            passed=out.passed,
            runs=len(self.runs),
            status=self.state.status,
            weights_on=list(last.weights) if last else [],
            influence=out.influence,
            warnings=list(self.state.warnings),
            tolerance_rule=str(getattr(tol, "rule", "")),
            residual_uncertainty_gmm=out.uncertainty_gmm,
            method=self.method.name,
            influence_magnitude=out.influence_magnitude,
            before_speed_rpm=ref.reading.speed_rpm if ref else None,
            after_speed_rpm=after_run.reading.speed_rpm if after_run else None,
            influence_source=out.influence_source,
            weights_at_start=list(self.weights_at_start),
        )

    def influence_source(self) -> str:
        """Where the influence coefficients in use came from, in words for the report."""
        return self.method.outcome().influence_source

    # -- what the methods share --------------------------------------------------------------------
    def plane_permissible(self, plane: int) -> float:
        """The permissible residual unbalance of one correction plane, g·mm."""
        per = list(self.tolerance.per_plane_gmm)
        if len(per) == self.machine.n_planes:
            return float(per[plane - 1])
        return float(self.tolerance.permissible_unbalance_gmm) / self.machine.n_planes

    def channel_results(self, before_run: RunRecord | None, after_run: RunRecord | None,
                        amplitudes_only: bool = False) -> list[ChannelResult]:
        """Each pickup before (``before_run``) and after (``after_run``): complex readings, or,
        with ``amplitudes_only``, their amplitudes at phase 0."""
        out = []
        for i, p in enumerate(self.machine.pickups):
            if amplitudes_only:
                before = complex(before_run.reading.channels[i].amp_g, 0.0) if before_run else 0j
                after = complex(after_run.reading.channels[i].amp_g, 0.0) if after_run else None
            else:
                before = before_run.reading.channels[i].mean if before_run else 0j
                after = after_run.reading.channels[i].mean if after_run else None
            out.append(ChannelResult(p.label, before, after))
        return out

    def save_progress(self) -> None:
        """Store the result so far (not while a resume replays the runs)."""
        if not self.replaying:
            self.store.save_result(self.job_id, self.result().to_dict())

    def max_trim_runs(self) -> int:
        return int(self.options.get("max_trim_runs", DEFAULT_MAX_TRIM_RUNS))

    def guarded(self, transition: Callable[[], None], what: str) -> None:
        """Run a transition; if the maths refuses (a ``ValueError`` such as ``BalancingError``),
        the state is put back as it was and the reason is shown."""
        before = replace(self.state, warnings=list(self.state.warnings))
        try:
            transition()
        except ValueError as exc:
            self.state = before
            self.state.message = f"{what}: {exc}"
            if self.state.message not in self.state.warnings:
                self.state.warnings.append(self.state.message)

    def finish(self, status: str, reason: str) -> None:
        """End the job (``passed`` or ``stopped``); a passed job's influence coefficients are
        stored with the machine for the next job."""
        s = self.state
        s.step = "done"
        s.status = status
        s.plane = None
        s.trial = None
        s.plan = None
        if reason:
            s.message = reason.capitalize() + "."
        if reason and reason not in s.warnings:
            s.warnings.append(reason)
        if self.replaying:
            return
        res = self.result()
        self.store.finish_job(self.job_id, status, res.to_dict())
        influence = self.method.influence
        if status == "passed" and self.machine.id is not None and influence is not None:
            saved = self.store.get_machine(self.machine.id)
            if saved is not None and (saved.influence is None or saved.influence.job_id != self.job_id):
                self.store.store_influence(
                    self.machine.id,
                    StoredInfluence(influence, self.runs[-1].reading.speed_rpm, now_iso(), self.job_id),
                )

    # -- internals: the event log ------------------------------------------------------------------
    def _apply_event(self, kind: str, data: dict[str, Any]) -> None:
        if kind == "stopped":
            self.finish("stopped", str(data.get("reason", "")))
        elif kind == "forces_confirmed":
            keys = self._confirmed_forces.setdefault(int(data.get("n_runs", len(self.runs))), set())
            keys.update(weight_key(Weight.from_dict(d)) for d in data.get("weights", []))
        else:
            self.method.apply_event(kind, data)

    def _apply_run(self, run: RunRecord) -> None:
        """Advance on a recorded run.  If the maths refuses (a ``ValueError`` such as
        ``BalancingError``), the run stays recorded, the step stays where it was and the reason
        is shown: the user can take another run or change the weights."""
        self.runs.append(run)
        self.guarded(lambda: self._advance(run), f"Run {run.seq} is recorded, but the job cannot go on from it")

    def _advance(self, run: RunRecord) -> None:
        s = self.state
        s.message = ""
        warning = speed_warning(self.machine, run.kind, run.seq, run.reading.speed_rpm, self.runs[0].reading.speed_rpm)
        if warning:
            s.warnings.append(warning)
        if run.kind == "reference":
            self.method.on_reference(run)
        elif run.kind == "trial":
            self.method.on_trial(run)
        else:
            self.method.on_check(run)


class AmplitudeOnlyJob(BalanceJob):
    """A :class:`BalanceJob` whose method is the four-run method (one plane, amplitudes only).

    Create it with ``BalanceJob.start(store, machine, amplitude_only=True)``; ``BalanceJob.resume``
    returns one for a job started so.  The API is that of :class:`BalanceJob`; the state also
    has ``method == "four-run"``, ``cycle``, ``trial_number`` and ``trial_angles_deg``.
    """


def job_class(options: dict[str, Any]) -> type[BalanceJob]:
    """The job class for a job's recorded options."""
    return AmplitudeOnlyJob if options.get("amplitude_only") else BalanceJob
