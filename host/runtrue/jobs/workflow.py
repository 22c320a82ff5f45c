"""The balancing workflow: one job from the reference run to a result, independent of any UI.

Method: influence-coefficient balancing with trial weights, least-squares refit of the
coefficients over every run (Goodman's method), trim runs until the ISO 21940-11 balance
quality grade is met; all maths comes from ``runtrue.balancing`` and ``runtrue.allocation``.
The order of steps and the sizing of trial weights are common practice.

Steps (``BalanceJob.state.step``)::

    reference ──> trial (plane 1) ──> trial (plane 2, two-plane rotors) ──> correction ──> trim ... ──> done
        │          └── trial too small: stays at "trial" with a larger suggested mass
        └── machine has stored influence coefficients: straight to "correction"

A user (the TUI, the headless demo, a test) drives it like this::

    job = BalanceJob.start(store, machine)          # or BalanceJob.resume(store, job_id)
    while job.state.step != "done":
        show(job.instructions())                    # what to do physically, with cautions
        fit(job.planned_weights())                  # weights that should be on for the next run
        job.record_run(reading)                     # committed to the store before it returns
    show(job.result())

``record_run(reading, weights_present=None)``: ``weights_present`` defaults to
``planned_weights()``; pass the real list when the user fitted something else.  Every decision
(trial chosen, weak trial accepted, stop) is recorded too, so :meth:`BalanceJob.resume` rebuilds
exactly the same state after a crash.

Conventions: see ``runtrue.jobs.model`` (phase lag; weight angles from the mark against
rotation; rotation seen from the drive end; planes and pickups numbered from 1).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

from runtrue.balancing.grades import parse_grade
from runtrue.jobs.model import ANGLE_CONVENTION, Machine, RunReading, RunRecord, StoredInfluence, Weight
from runtrue.jobs.store import JobStore, now_iso
from runtrue.readings.numbers import force_text, mass_text
from runtrue.validation import WEIGHT_MIN_G

STANDARD = "ISO 21940-11"
DEFAULT_MAX_TRIM_RUNS = 5
STEPS = ("reference", "trial", "correction", "trim", "done")
SPEED_TOLERANCE = 0.05  # runs more than 5 % apart in speed get a warning (common practice)

CAUTIONS: tuple[str, ...] = (
    "Stop the machine and lock it out (isolate and tag the supply) before touching the rotor or fitting weights.",
    "Never run above the rated speed of the rotor, wheel or machine.",
    "Secure every weight for the centrifugal force shown; a loose weight is a projectile.",
    "Stand clear of the plane of rotation when starting up; keep guards in place.",
    "Follow the machine maker's instructions, local codes and licensed practice; they take precedence.",
)


def force_limit_n(machine: Machine) -> float:
    """The largest centrifugal force a weight may pull with before the user must confirm it:
    ``TRIAL_FORCE_CAP_FRACTION`` (30 %) of the rotor's weight share per plane, in newtons."""
    from runtrue.balancing.trial import STANDARD_GRAVITY_M_S2, TRIAL_FORCE_CAP_FRACTION

    return TRIAL_FORCE_CAP_FRACTION * machine.rotor_mass_kg * STANDARD_GRAVITY_M_S2 / machine.n_planes


def force_limit_basis(machine: Machine) -> str:
    """The limit and where it comes from, in one sentence (said once where it matters)."""
    from runtrue.balancing.trial import TRIAL_FORCE_CAP_FRACTION

    per_plane = " per plane" if machine.n_planes > 1 else ""
    return (
        f"Force limit {force_limit_n(machine):.3g} N: {TRIAL_FORCE_CAP_FRACTION * 100:.0f} % of the rotor's weight{per_plane}. "
        "This is runtrue's own figure, not from a standard (common practice sizes a trial weight near 10 %); "
        "a weight above it needs your confirmation."
    )


def _start_weights_options(machine: Machine, weights: Sequence[Weight], combine: bool,
                           move: bool = False) -> dict[str, Any]:
    """Job options for weights already on the rotor when the job starts (left by an earlier job):
    ``combine`` - the correction replaces them; ``move`` - the correction may leave each where it
    is, move it to another position, or take it off (the allocator decides, with the stock)."""
    out: dict[str, Any] = {}
    for w in weights:
        if not 1 <= w.plane <= machine.n_planes:
            raise ValueError(f"a weight left on is in plane {w.plane}, but {machine.name!r} has {machine.n_planes} plane(s)")
    if combine and move:
        raise ValueError("weights left on are either combined into the correction or moved, not both")
    if weights:
        out["weights_at_start"] = [w.to_dict() for w in weights]
        out["combine_at_start"] = bool(combine)
        if move:
            out["move_at_start"] = True
    return out


def weights_left_on(store: JobStore, machine: Machine) -> tuple[int, str, list[Weight]] | None:
    """What the latest earlier job on ``machine`` left on the rotor: (job id, when it ended, the
    weights, relative to the rotor as found before any job), or None (no earlier job with weights)."""
    if machine.id is None:
        return None
    jobs = [j for j in store.machine_history(machine.id) if j.n_runs > 0]
    if not jobs:
        return None
    last = max(jobs, key=lambda j: j.id)
    runs = store.runs(last.id)
    weights = list(runs[-1].weights) if runs else []
    if not weights:
        return None
    return last.id, last.finished_at or runs[-1].taken_at, weights


class ForceLimitExceeded(ValueError):
    """A weight would pull with more than the force limit; the user must confirm it first."""

    def __init__(self, weight: Weight, force_n: float, limit_n: float) -> None:
        self.weight = weight
        self.force_n = force_n
        self.limit_n = limit_n
        self.multiple = force_n / limit_n if limit_n > 0 else math.inf
        super().__init__(
            f"{weight.mass_g:.3g} g at radius {weight.radius_mm:g} mm pulls with {force_n:.0f} N at speed, "
            f"{self.multiple:.1f} times the {limit_n:.3g} N force limit: confirm it to go on"
        )


class OverSpeed(ValueError):
    """A run's measured speed is above the machine's rated speed; the user must confirm it."""

    def __init__(self, speed_rpm: float, rated_rpm: float) -> None:
        self.speed_rpm = speed_rpm
        self.rated_rpm = rated_rpm
        super().__init__(
            f"the run was at {speed_rpm:.0f} rpm, above the rated {rated_rpm:g} rpm of the machine: "
            "stop it now; record the run only if the maker allows this speed"
        )


@dataclass(frozen=True)
class ForceCheck:
    """A weight to fit for the next run, its force at running speed and the multiple of the limit."""

    weight: Weight
    force_n: float
    limit_n: float

    @property
    def multiple(self) -> float:
        return self.force_n / self.limit_n if self.limit_n > 0 else math.inf


#: The trade's rule for a trial run worth using (common practice, no standard): the trial moves
#: the 1x amplitude by at least 30 % or its phase by at least 30 degrees.
TRIAL_GOOD_CHANGE_PCT = 30.0
TRIAL_GOOD_CHANGE_DEG = 30.0


def trial_change(before: complex, after: complex) -> tuple[float, float]:
    """(amplitude change in percent, phase change in degrees, -180..180) from one run to the next."""
    pct = (abs(after) / abs(before) - 1.0) * 100.0 if abs(before) > 0 else math.inf
    if abs(before) == 0 or abs(after) == 0:
        return pct, 0.0
    deg = (math.degrees(math.atan2(after.imag, after.real) - math.atan2(before.imag, before.real)) + 180.0) % 360.0 - 180.0
    return pct, deg


def trial_change_words(pct: float, deg: float, with_phase: bool = True) -> str:
    """``amplitude +35 %, phase +42°`` and whether that meets the common-practice rule."""
    big = abs(pct) >= TRIAL_GOOD_CHANGE_PCT or (with_phase and abs(deg) >= TRIAL_GOOD_CHANGE_DEG)
    text = f"amplitude {pct:+.0f} %" + (f", phase {deg:+.0f}°" if with_phase else "")
    rule = (f"at least {TRIAL_GOOD_CHANGE_PCT:.0f} % or {TRIAL_GOOD_CHANGE_DEG:.0f}° (common practice)" if with_phase
            else f"at least {TRIAL_GOOD_CHANGE_PCT:.0f} % (common practice)")
    return f"{text}; {'meets' if big else 'under'} the usual {rule}"


@dataclass(frozen=True)
class TrialCheck:
    """Was the trial weight's effect big enough to trust, compared with the readings' scatter?"""

    plane: int
    ok: bool
    ratio: float
    message: str
    suggested_scale: float
    accepted_anyway: bool = False


@dataclass
class PlaneCorrection:
    """What to fit in one plane: the computed correction and the allocator's placements.

    ``correction`` is the weight to add now (relative to the weights already on);
    ``fit`` are the placements as :class:`Weight` (one per position); ``sheet`` the fitting
    sheet rows (``runtrue.allocation.SheetRow``: number, angle_deg, radius_mm, what, mass_g,
    force_n, action); ``residual_gmm`` what the placements leave of the correction.
    """

    plane: int
    correction: Weight
    fit: list[Weight]
    sheet: list[Any]
    residual_gmm: float
    residual_fraction: float
    warnings: list[str] = field(default_factory=list)
    taken_off: list[Weight] = field(default_factory=list)  # weights already on that come off (moved or removed)


@dataclass
class CorrectionPlan:
    """A correction or trim step: weights to remove first, then per plane what to fit."""

    kind: str  # "correction" | "trim"
    remove: list[Weight]
    planes: list[PlaneCorrection]
    predicted: list[complex]
    method: str
    condition_number: float
    warnings: list[str] = field(default_factory=list)

    def weights_to_fit(self) -> list[Weight]:
        return [w for pc in self.planes for w in pc.fit]


@dataclass(frozen=True)
class ChannelResult:
    """One pickup before (reference run) and after (last run), complex g, phase-lag convention."""

    label: str
    before: complex
    after: complex | None

    @property
    def before_amp_g(self) -> float:
        return abs(self.before)

    @property
    def after_amp_g(self) -> float | None:
        return abs(self.after) if self.after is not None else None


@dataclass
class JobResult:
    """A job's outcome: before/after per channel and the grade check per plane.

    ``residual_unbalance_gmm`` is the engine's estimate from the last reading and the influence
    coefficients, ``residual_uncertainty_gmm`` its 95 % uncertainty from the reading's scatter;
    ``passed`` is True only when every plane's residual plus its uncertainty is within its
    permissible share (``None`` while no correction run has been taken).
    """

    job_id: int
    machine_name: str
    grade: str
    standard: str
    speed_rpm: float
    channels: list[ChannelResult]
    residual_unbalance_gmm: list[float] | None
    permissible_unbalance_gmm: list[float]
    permissible_total_gmm: float
    passed: bool | None
    runs: int
    status: str
    weights_on: list[Weight]
    influence: list[list[complex]] | None
    warnings: list[str]
    tolerance_rule: str = ""
    residual_uncertainty_gmm: list[float] | None = None
    method: str = "influence-coefficient"
    influence_magnitude: float | None = None
    before_speed_rpm: float | None = None  # measured speed of the reference run
    after_speed_rpm: float | None = None  # measured speed of the last correction or trim run
    influence_source: str = ""  # where the coefficients came from, in words
    weights_at_start: list[Weight] = field(default_factory=list)  # left on by an earlier job

    def to_dict(self) -> dict[str, Any]:
        extra: dict[str, Any] = {"method": self.method}
        if self.influence_magnitude is not None:
            extra["influence_magnitude_g_per_gmm"] = self.influence_magnitude
        extra["influence_source"] = self.influence_source
        extra["before_speed_rpm"] = self.before_speed_rpm
        extra["after_speed_rpm"] = self.after_speed_rpm
        extra["weights_at_start"] = [w.to_dict() for w in self.weights_at_start]
        return {
            "job_id": self.job_id,
            "machine": self.machine_name,
            "grade": self.grade,
            "standard": self.standard,
            "speed_rpm": self.speed_rpm,
            "initial": [c.before_amp_g for c in self.channels],
            "final": [c.after_amp_g for c in self.channels],
            "residual_unbalance_gmm": self.residual_unbalance_gmm,
            "residual_uncertainty_gmm": self.residual_uncertainty_gmm,
            "permissible_unbalance_gmm": self.permissible_unbalance_gmm,
            "permissible_total_gmm": self.permissible_total_gmm,
            "passed": self.passed,
            "runs": self.runs,
            "status": self.status,
            "weights_on": [w.to_dict() for w in self.weights_on],
            "warnings": list(self.warnings),
            **extra,
        }


@dataclass
class JobState:
    """Where a job stands.  ``step`` is one of :data:`STEPS`; ``plane`` is the trial's plane
    during the ``trial`` step; ``trial`` the trial weight to fit; ``last_trial_check`` the verdict
    on the last trial run; ``plan`` the correction or trim to fit; ``status`` ``open``,
    ``passed`` or ``stopped``.

    Amplitude-only jobs (``method == "four-run"``, see :mod:`runtrue.jobs.four_run_job`) also
    fill ``cycle`` (the four-run cycle, from 1), ``trial_number`` (1-3 during a trial step) and
    ``trial_angles_deg`` (the cycle's three trial angles)."""

    step: str = "reference"
    plane: int | None = None
    trial: Weight | None = None
    last_trial_check: TrialCheck | None = None
    plan: CorrectionPlan | None = None
    trims_done: int = 0
    status: str = "open"
    message: str = ""
    warnings: list[str] = field(default_factory=list)
    method: str = "influence-coefficient"
    cycle: int = 0
    trial_number: int | None = None
    trial_angles_deg: list[float] = field(default_factory=list)


class BalanceJob:
    """One balancing job, recorded in a :class:`JobStore` as it happens.

    Create with :meth:`start` or :meth:`resume`.  Options: ``trial_removed`` (take each trial
    weight off before the next run, default True; else trials stay on and the correction is net
    of them), ``use_stored_influence`` (default: when the machine has coefficients stored),
    ``max_trim_runs`` (the job stops, not passed, after this many trim runs),
    ``amplitude_only`` (the four-run method without phase, one plane only; see
    :mod:`runtrue.jobs.four_run_job`: :meth:`start` then returns an ``AmplitudeOnlyJob``).
    """

    def __init__(self, store: JobStore, job_id: int, machine: Machine, options: dict[str, Any]) -> None:
        self.store = store
        self.job_id = job_id
        self.machine = machine
        self.options = options
        self.runs: list[RunRecord] = []
        self.state = JobState()
        self._accepted: dict[int, RunRecord] = {}  # plane -> accepted trial run
        self._trial_override: dict[int, Weight] = {}
        self._influence: list[list[complex]] | None = None
        self._influence_warnings: list[str] = []
        self._tolerance = self._make_tolerance()
        self._replaying = False  # True while resume() rebuilds the state: nothing is written then
        self._plan_pending: str | None = None
        self._capped_note = ""  # set when a larger trial is held back by the force limit
        self._confirmed_forces: dict[int, set[tuple[int, float, float, float]]] = {}  # n_runs -> weights
        self._weights_at_start: list[Weight] = [Weight.from_dict(d) for d in options.get("weights_at_start", [])]
        self._enter_reference()

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
            from runtrue.jobs.four_run_job import AmplitudeOnlyJob

            return AmplitudeOnlyJob.start_new(
                store, machine, trial_removed=trial_removed, use_stored_influence=use_stored_influence,
                max_trim_runs=max_trim_runs, weights_at_start=weights_at_start,
            )
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
        options = {
            "trial_removed": bool(trial_removed),
            "use_stored_influence": bool(use_stored_influence),
            "max_trim_runs": int(max_trim_runs),
            **_start_weights_options(machine, weights_at_start, combine_at_start, move_at_start),
        }
        job_id = store.new_job(machine, options)
        return cls(store, job_id, machine, options)

    @classmethod
    def resume(cls, store: JobStore, job_id: int) -> BalanceJob:
        """Rebuild a job from the store (after a crash, or to look at a finished one)."""
        rec = store.get_job(job_id)
        if rec is None:
            raise ValueError(f"there is no job {job_id}; `runtrue jobs list` shows the jobs")
        if rec.options.get("amplitude_only") and cls is BalanceJob:
            from runtrue.jobs.four_run_job import AmplitudeOnlyJob

            return AmplitudeOnlyJob.resume(store, job_id)
        job = cls(store, job_id, rec.machine, rec.options)
        job._replaying = True
        runs = store.runs(job_id)
        events = store.events(job_id)
        ei = 0
        for k in range(len(runs) + 1):
            while ei < len(events) and int(events[ei].data.get("n_runs", 0)) <= k:
                job._apply_event(events[ei].kind, events[ei].data)
                ei += 1
            if k < len(runs):
                job._apply_run(runs[k])
        job._replaying = False
        pending = job._plan_pending
        if pending is not None and job.state.step == pending:
            job._guarded(lambda: job._enter_correction(pending), "The correction cannot be worked out")
        if rec.status != "open" and job.state.status == "open":
            job.state.status = rec.status
            job.state.step = "done"
        elif rec.status == "open" and job.state.status != "open":
            # Killed between the last run and closing the job: close it now.
            job._finish(job.state.status, "")
        return job

    # -- what the user sees ----------------------------------------------------------------------
    @property
    def step(self) -> str:
        return self.state.step

    def cautions(self) -> list[str]:
        return list(CAUTIONS)

    def planned_weights(self) -> list[Weight]:
        """Every weight that should be on the rotor (relative to the reference state) for the next run."""
        s = self.state
        on = list(self.runs[-1].weights) if self.runs else list(self._weights_at_start)
        if s.step == "reference" or s.step == "done":
            return on
        if s.step == "trial":
            assert s.trial is not None
            kept = [w for w in on if not self._is_trial(w)] if self.options["trial_removed"] else [
                w for w in on if not (self._is_trial(w) and w.plane == s.plane)
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
        s, m = self.state, self.machine
        speed = f"{m.speed_rpm:g} rpm"
        out: list[str] = []
        if s.message:
            out.append(s.message)
        if s.step == "reference":
            left = self._weights_at_start
            as_found = (f"with the {len(left)} weight(s) left by the last job still on and nothing added" if left
                        else "as found, with no weights added")
            out += [
                f"Reference run: run {m.name} at its working speed ({speed}), {as_found}.",
                "Stand clear of the plane of rotation when starting up; never exceed the rated speed.",
                "Take the reading when it has settled.",
            ]
            if self.options.get("use_stored_influence"):
                out.append("Stored influence coefficients will be used: the next step is the correction.")
        elif s.step == "trial":
            t = s.trial
            assert t is not None and s.plane is not None
            pos = position_number(m, s.plane, t.angle_deg)
            where = f"position {pos} ({t.angle_deg:.1f}°)" if pos is not None else f"{t.angle_deg:.1f}°"
            verdict_first = 1 if s.message and "TOO SMALL" in s.message else 0
            out.insert(verdict_first, f"Fit {mass_text(t.mass_g)} at {where} in {m.plane_name(s.plane)}, radius "
                                      f"{t.radius_mm:g} mm - secure it for {force_text(self._force_n(t))} - then r.")
            out.append("Stop the machine and lock it out first.")
            removing = self._to_remove_before_trial()
            for w in removing:
                out.append(f"Take off the {'trial weight' if self._is_trial(w) else (w.label or 'weight')}: {mass_text(w.mass_g)} at {w.angle_deg:.1f}° "
                           f"in {m.plane_name(w.plane)}.")
            staying = [w for w in (self.runs[-1].weights if self.runs else ()) if w not in removing]
            if staying:
                out.append(f"Leave the {len(staying)} weight(s) already fitted where they are.")
            out.append(m.angle_direction_words(s.plane))
            out.append(f"Stand clear, start up, run at {speed} (never above the rated speed) and take the reading.")
        elif s.step in ("correction", "trim"):
            plan = s.plan
            what = "Correction" if s.step == "correction" else f"Trim run {s.trims_done + 1}"
            if plan is None:
                out.append(f"{what}: no correction could be worked out (see above). Take another run or stop the job.")
                out.append(ANGLE_CONVENTION)
                return out
            rows = [(pc, row) for pc in plan.planes for row in pc.sheet if getattr(row, "action", "fit") == "fit"]
            if len(rows) == 1:
                pc, row = rows[0]
                at = f"position {row.number} ({row.angle_deg:.1f}°)" if row.number is not None else f"{row.angle_deg:.1f}°"
                head = (f"Fit {row.what} ({mass_text(row.mass_g)}) at {at} in {m.plane_name(pc.plane)} - "
                        f"secure for {force_text(row.force_n)} - then r.")
            else:
                head = f"{what}: fit the {len(rows)} pieces below (f: the list to tick off), then r."
            poor = self.poor_prediction()
            out[0:0] = [poor, head] if poor else [head]
            out.append(f"{what}: stop the machine and lock it out first.")
            for w in plan.remove:
                out.append(f"Take off the {'trial weight' if self._is_trial(w) else (w.label or 'weight')}: {mass_text(w.mass_g)} at {w.angle_deg:.1f}° "
                           f"in {m.plane_name(w.plane)}.")
            staying = [w for w in (self.runs[-1].weights if self.runs else ()) if w not in plan.remove]
            if staying:
                out.append(f"Leave the {len(staying)} weight(s) already fitted where they are; add:")
            for pc in plan.planes:
                c = pc.correction
                out.append(
                    f"{m.plane_name(pc.plane)}: the correction is {mass_text(c.mass_g)} at {c.angle_deg:.1f}°, "
                    f"radius {c.radius_mm:g} mm."
                )
                for row in pc.sheet:
                    at = f"position {row.number} " if row.number is not None else ""
                    out.append(
                        f"  Fit {row.what} at {at}{row.angle_deg:.1f}°, radius {row.radius_mm:g} mm "
                        f"({mass_text(row.mass_g)}, secure for {force_text(row.force_n)})."
                    )
                out.append(m.angle_direction_words(pc.plane))
            out.append(f"Stand clear, start up, run at {speed} (never above the rated speed) and take the reading.")
        else:
            r = self.result()
            if r.passed:
                out.append(f"Done: residual unbalance within {r.grade} ({STANDARD}). Remove the meter and tape; refit the guards.")
            else:
                out.append("Stopped before the grade was met. The runs so far are kept with the job.")
        if s.step not in ("trial", "correction", "trim"):  # those say how to count angles for their plane
            out.append(ANGLE_CONVENTION)
        return out

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
        than the force limit raises :class:`ForceLimitExceeded` unless ``confirm_over_limit``."""
        s = self.state
        if s.step != "trial" or s.plane is None:
            raise ValueError("a trial weight can be chosen only at a trial step")
        if not (mass_g > 0 and math.isfinite(mass_g)):
            raise ValueError("the trial mass must be a positive number of grams")
        radius = radius_mm if radius_mm is not None else self.machine.planes[s.plane - 1].radius_mm
        candidate = Weight(s.plane, mass_g, angle_deg % 360.0, radius, f"trial weight, plane {s.plane}")
        force, limit = self._force_n(candidate), self.force_limit_n
        if force > limit and not confirm_over_limit:
            raise ForceLimitExceeded(candidate, force, limit)
        data = {"plane": s.plane, "mass_g": mass_g, "angle_deg": angle_deg % 360.0, "radius_mm": radius}
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
        short = [(pc, self._plane_permissible(pc.plane)) for pc in plan.planes]
        short = [(pc, perm) for pc, perm in short if pc.residual_gmm > perm]
        if not short:
            return ""
        from runtrue.readings.numbers import unbalance_text

        parts = "; ".join(f"{self.machine.plane_name(pc.plane)} {unbalance_text(pc.residual_gmm)} "
                          f"(allowed {unbalance_text(perm)})" for pc, perm in short)
        return (f"PREDICTED NOT TO PASS: the pieces available leave {parts}. Add weights of other sizes to the "
                "stock (machine screen), allow more pieces per position, or fit these and trim afterwards.")

    # -- the force limit ----------------------------------------------------------------------------
    @property
    def force_limit_n(self) -> float:
        return force_limit_n(self.machine)

    def weights_over_limit(self) -> list[ForceCheck]:
        """Weights to fit for the next run whose force at running speed exceeds the force limit."""
        on = list(self.runs[-1].weights) if self.runs else list(self._weights_at_start)
        rest = list(on)
        add = []
        for w in self.planned_weights():
            if w in rest:
                rest.remove(w)
            else:
                add.append(w)
        limit = self.force_limit_n
        return [ForceCheck(w, self._force_n(w), limit) for w in add if self._force_n(w) > limit]

    @property
    def forces_confirmed(self) -> bool:
        """True when no weight for the next run is over the limit, or the user confirmed them."""
        over = self.weights_over_limit()
        if not over:
            return True
        keys = self._confirmed_forces.get(len(self.runs), set())
        return all(_weight_key(c.weight) in keys for c in over)

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
        return self._influence

    def result(self) -> JobResult:
        ref = next((r for r in self.runs if r.kind == "reference"), None)
        last = self.runs[-1] if self.runs else None
        after_run = last if last is not None and last.kind in ("correction", "trim") else None
        chans = []
        for i, p in enumerate(self.machine.pickups):
            before = ref.reading.channels[i].mean if ref else 0j
            after = after_run.reading.channels[i].mean if after_run else None
            chans.append(ChannelResult(p.label, before, after))
        residual = None
        uncertainty = None
        passed: bool | None = None
        if after_run is not None and self._influence is not None:
            residual, uncertainty, passed = self._grade_with_uncertainty(after_run)
        tol = self._tolerance
        return JobResult(
            job_id=self.job_id,
            machine_name=self.machine.name,
            grade=self.machine.grade,
            standard=STANDARD,
            speed_rpm=self.machine.speed_rpm,
            channels=chans,
            residual_unbalance_gmm=residual,
            permissible_unbalance_gmm=list(tol.per_plane_gmm),
            permissible_total_gmm=float(tol.permissible_unbalance_gmm),
            passed=passed,
            runs=len(self.runs),
            status=self.state.status,
            weights_on=list(last.weights) if last else [],
            influence=self._influence,
            warnings=list(self.state.warnings),
            tolerance_rule=str(getattr(tol, "rule", "")),
            residual_uncertainty_gmm=uncertainty,
            before_speed_rpm=ref.reading.speed_rpm if ref else None,
            after_speed_rpm=after_run.reading.speed_rpm if after_run else None,
            influence_source=self.influence_source(),
            weights_at_start=list(self._weights_at_start),
        )

    def influence_source(self) -> str:
        """Where the influence coefficients in use came from, in words for the report."""
        if self._influence is None:
            return "not known yet (no trial run)"
        inf = self.machine.influence
        if self.options.get("use_stored_influence") and inf is not None:
            trial_runs = [r.seq for r in self.runs if r.kind in ("correction", "trim")]
            when = inf.measured_at[:10] if inf.measured_at else "an earlier date"
            head = f"stored from job {inf.job_id} on {when}" if inf.job_id is not None else f"stored on {when}"
            if len(trial_runs) > 1:
                return head + ", refitted with the runs of this job"
            return head
        seqs = [r.seq for r in self.runs]
        return f"measured in this job (runs {seqs[0]}-{seqs[-1]})" if len(seqs) > 1 else "measured in this job"

    # -- internals: transitions -------------------------------------------------------------------
    def _make_tolerance(self) -> Any:
        from runtrue.balancing import permissible_unbalance

        m = self.machine
        return permissible_unbalance(parse_grade(m.grade), m.rotor_mass_kg, m.speed_rpm, planes=m.n_planes)

    def _force_n(self, w: Weight) -> float:
        from runtrue.balancing import centrifugal_force_n

        return float(centrifugal_force_n(w.mass_g, w.radius_mm, self.machine.speed_rpm))

    def _limit_mass_g(self, radius_mm: float) -> float:
        """The mass at ``radius_mm`` that pulls exactly the force limit at running speed."""
        omega = 2 * math.pi * self.machine.speed_rpm / 60.0
        return self.force_limit_n / ((radius_mm / 1000.0) * omega * omega) * 1000.0

    @staticmethod
    def _is_trial(w: Weight) -> bool:
        return w.label.startswith("trial")

    def _to_remove_before_trial(self) -> list[Weight]:
        s = self.state
        on = list(self.runs[-1].weights) if self.runs else []
        if self.options["trial_removed"]:
            return [w for w in on if self._is_trial(w)]
        return [w for w in on if self._is_trial(w) and w.plane == s.plane]

    def _enter_reference(self) -> None:
        self.state.step = "reference"
        self.state.plane = None
        self.state.trial = None
        self.state.plan = None

    def _enter_trial(self, plane: int, scale: float = 1.0, previous: Weight | None = None) -> None:
        s = self.state
        s.step = "trial"
        s.plane = plane
        s.plan = None
        if plane in self._trial_override:
            s.trial = self._trial_override[plane]
            return
        s.trial = self._suggest_trial(plane, scale, previous)

    def _suggest_trial(self, plane: int, scale: float, previous: Weight | None) -> Weight:
        from runtrue.balancing import suggest_trial_weight
        from runtrue.jobs import fitting

        m = self.machine
        spec = m.planes[plane - 1]
        if previous is None:
            sug = suggest_trial_weight(m.rotor_mass_kg, m.speed_rpm, spec.radius_mm, n_planes=m.n_planes,
                                       grade=parse_grade(m.grade))
            mass = float(sug.mass_g)
            self.state.message = (
                f"Trial weight sized to move the reading clearly (common practice) and kept under the "
                f"{force_text(self.force_limit_n)} force limit."
            )
            angle = None
        else:
            mass = previous.mass_g * scale
            angle = previous.angle_deg
            self._capped_note = ""
            limit_mass = self._limit_mass_g(spec.radius_mm)
            if mass > limit_mass:
                needed = mass
                mass = max(limit_mass, previous.mass_g)
                self._capped_note = (
                    f"A trial of {needed:.3g} g would be needed, but that pulls "
                    f"{needed / limit_mass:.1f} times the {self.force_limit_n:.3g} N force limit: "
                    f"the suggestion stays at {mass:.3g} g. Average longer (more revolutions), or choose a "
                    "larger trial with w and confirm its force."
                )
        on = list(self.runs[-1].weights) if self.runs else []
        staying = [w for w in on if not self._is_trial(w)] if self.options["trial_removed"] else [
            w for w in on if not (self._is_trial(w) and w.plane == plane)
        ]
        capped = previous is not None and bool(self._capped_note)
        in_use = [p for w in staying for p in w.pieces]
        return self._within_force_limit(
            lambda mass_g, at_least: fitting.trial_weight(m, plane, mass_g, angle, in_use, at_least=at_least),
            mass, at_least=previous is not None and not capped,
        )

    def _within_force_limit(self, make: Any, mass_g: float, at_least: bool) -> Weight:
        """``make(mass_g, at_least)`` rounds a trial to what the stock can make; when that rounding
        lands above the force limit (and the wish was not), ask for a little less, a few times."""
        w = make(mass_g, at_least)
        limit = self.force_limit_n
        if self._force_n(Weight(w.plane, mass_g, 0.0, w.radius_mm)) > limit:
            return w  # asked for more than the limit on purpose: the user confirms it
        for _ in range(4):
            force = self._force_n(w)
            if force <= limit:
                break
            mass_g *= 0.97 * limit / force
            w = make(mass_g, False)
        return w

    def _apply_event(self, kind: str, data: dict[str, Any]) -> None:
        s = self.state
        if kind == "trial_set":
            plane = int(data["plane"])
            w = Weight(plane, float(data["mass_g"]), float(data["angle_deg"]), float(data["radius_mm"]), f"trial weight, plane {plane}")
            self._trial_override[plane] = w
            if s.step == "trial" and s.plane == plane:
                s.trial = w
                s.message = "Trial weight chosen by the user."
        elif kind == "trial_accepted":
            plane = int(data["plane"])
            chk = s.last_trial_check
            trial_run = self.runs[-1]
            if chk is not None:
                s.last_trial_check = TrialCheck(chk.plane, chk.ok, chk.ratio, chk.message, chk.suggested_scale, True)
                s.warnings.append(f"Plane {plane}: trial effect small ({chk.message}); accepted by the user.")
            self._accepted[plane] = trial_run
            self._guarded(lambda: self._after_trial_accepted(plane), "The trial run cannot be used")
        elif kind == "stopped":
            self._finish("stopped", str(data.get("reason", "")))
        elif kind == "forces_confirmed":
            keys = self._confirmed_forces.setdefault(int(data.get("n_runs", len(self.runs))), set())
            keys.update(_weight_key(Weight.from_dict(d)) for d in data.get("weights", []))

    def _apply_run(self, run: RunRecord) -> None:
        """Advance on a recorded run.  If the maths refuses (a ``ValueError`` such as
        ``BalancingError``), the run stays recorded, the step stays where it was and the reason
        is shown: the user can take another run or change the weights."""
        self.runs.append(run)
        self._guarded(lambda: self._advance(run), f"Run {run.seq} is recorded, but the job cannot go on from it")

    def _guarded(self, transition: Any, what: str) -> None:
        before = replace(self.state, warnings=list(self.state.warnings))
        try:
            transition()
        except ValueError as exc:
            self.state = before
            self.state.message = f"{what}: {exc}"
            if self.state.message not in self.state.warnings:
                self.state.warnings.append(self.state.message)

    def _check_speed(self, run: RunRecord) -> None:
        """Warn when a run's speed differs from the reference run's or the machine's."""
        s = self.state
        ref_speed = self.runs[0].reading.speed_rpm
        speed = run.reading.speed_rpm
        if ref_speed > 0 and abs(speed - ref_speed) > SPEED_TOLERANCE * ref_speed:
            s.warnings.append(
                f"Run {run.seq} was at {speed:.0f} rpm but the reference run at {ref_speed:.0f} rpm: the "
                "machine's response changes with speed; run at the same speed every time."
            )
        elif run.kind == "reference" and abs(speed - self.machine.speed_rpm) > SPEED_TOLERANCE * self.machine.speed_rpm:
            s.warnings.append(
                f"The reference run was at {speed:.0f} rpm, not the {self.machine.speed_rpm:g} rpm given for the machine; "
                "the grade is checked at the machine's running speed."
            )

    def _advance(self, run: RunRecord) -> None:
        s = self.state
        s.message = ""
        self._check_speed(run)
        if run.kind == "reference":
            if self.options.get("use_stored_influence") and self.machine.influence is not None:
                self._influence = [list(r) for r in self.machine.influence.coefficients]
                inf = self.machine.influence
                if abs(inf.speed_rpm - run.reading.speed_rpm) > 0.05 * inf.speed_rpm:
                    s.warnings.append(
                        f"Stored influence coefficients were measured at {inf.speed_rpm:g} rpm but this run was at "
                        f"{run.reading.speed_rpm:.0f} rpm; the machine's response changes with speed, so expect trim runs."
                    )
                self._enter_correction("correction")
            else:
                self._enter_trial(1)
            return
        if run.kind == "trial":
            self._check_trial(run)
            return
        # correction or trim run
        if run.kind == "trim":
            s.trims_done += 1
        self._refit()
        residual, passed = self._grade(run)
        if not self._replaying:
            self.store.save_result(self.job_id, self.result().to_dict())
        if passed:
            self._finish("passed", "")
            return
        if s.trims_done >= int(self.options.get("max_trim_runs", DEFAULT_MAX_TRIM_RUNS)):
            self._finish("stopped", f"trim run limit ({self.options.get('max_trim_runs')}) reached before the grade was met")
            return
        self._enter_correction("trim")
        worst = max(r / p for r, p in zip(residual, self._tolerance.per_plane_gmm))
        s.message = f"Residual unbalance is {worst:.1f} times the permissible value: a trim run is needed."

    def _check_trial(self, run: RunRecord) -> None:
        from runtrue.balancing import check_trial_effect

        s = self.state
        plane = s.plane or 1
        trial_ws = [w for w in run.weights if self._is_trial(w) and w.plane == plane]
        base = self._baseline_for(run, trial_ws)
        best = None
        for i in range(self.machine.n_pickups):
            b, t = base.reading.channels[i], run.reading.channels[i]
            v = check_trial_effect(b.mean, t.mean, b.spread_g, t.spread_g)
            if best is None or v.ratio > best.ratio:
                best = v
        assert best is not None
        chk = TrialCheck(plane, bool(best.ok), float(best.ratio), str(best.message), float(best.suggested_scale))
        s.last_trial_check = chk
        # the pickup the trial moved most, in the trade's terms: percent and degrees
        moved = max(range(self.machine.n_pickups),
                    key=lambda i: abs(run.reading.channels[i].mean - base.reading.channels[i].mean))
        pct, deg = trial_change(base.reading.channels[moved].mean, run.reading.channels[moved].mean)
        change = f"{self.machine.pickup_name(moved)}: {trial_change_words(pct, deg)}"
        if chk.ok:
            self._accepted[plane] = run
            self._after_trial_accepted(plane)
            verdict = f"Trial in {self.machine.plane_name(plane)} GOOD - {change}."
            s.message = verdict + (" " + s.message if s.message else "")
        else:
            prev = trial_ws[0] if trial_ws else s.trial
            self._trial_override.pop(plane, None)
            scale = chk.suggested_scale if math.isfinite(chk.suggested_scale) else 4.0
            # 20 % margin over the bare minimum: the next reading's scatter is random too.
            self._enter_trial(plane, max(scale * 1.2, 1.5), prev)
            bigger = f"fit {s.trial.mass_g:.3g} g instead" if s.trial is not None else "fit a larger trial"
            s.message = (f"Trial in {self.machine.plane_name(plane)} TOO SMALL - {change}; {bigger} and run again. "
                         f"{chk.message}")
            if self._capped_note:
                s.message += " " + self._capped_note

    def _baseline_for(self, run: RunRecord, trial_ws: list[Weight]) -> RunRecord:
        """The latest earlier run with the same weights as ``run`` less its trial in this plane."""
        target = _plane_sums(w for w in run.weights if w not in trial_ws)
        for r in reversed(self.runs[:-1]):
            if _same_sums(_plane_sums(r.weights), target):
                return r
        return self.runs[0]

    def _after_trial_accepted(self, plane: int) -> None:
        if plane < self.machine.n_planes:
            self._enter_trial(plane + 1)
        else:
            self._refit()
            self._enter_correction("correction")

    def _refit(self) -> None:
        """Least-squares influence coefficients over every run (Goodman); stored ones if too few runs."""
        from runtrue.balancing import BalancingError, Run, solve

        runs = [_engine_run(r) for r in self.runs]
        radii = {i + 1: p.radius_mm for i, p in enumerate(self.machine.planes)}
        first = _plane_sums(self.runs[0].weights)  # weights on in every run (left on) separate nothing
        seen = {p for r in self.runs for p, u in _plane_sums(r.weights).items() if abs(u - first.get(p, 0j)) > 1e-9}
        missing = [p for p in range(1, self.machine.n_planes + 1) if p not in seen]
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
        _ = Run
        self._solution = sol
        self._influence = [[complex(sol.influence[i, j]) for j in range(sol.influence.shape[1])] for i in range(sol.influence.shape[0])]
        self._influence_warnings = list(sol.warnings)

    def _enter_correction(self, kind: str) -> None:
        from runtrue.balancing import correction_from_influence
        from runtrue.jobs import fitting

        s = self.state
        s.step = kind
        s.plane = None
        s.trial = None
        if self._replaying:
            # Only the last step's plan matters after a resume: work it out once, at the end.
            s.plan = None
            self._plan_pending = kind
            return
        self._plan_pending = None
        on = list(self.runs[-1].weights)
        remove = [w for w in on if self._is_trial(w)] if self.options["trial_removed"] else []
        now = [w for w in on if w not in remove]
        radii = [p.radius_mm for p in self.machine.planes]
        assert self._influence is not None
        # The reading of the state the correction starts from: the latest run with exactly these weights.
        base = next((r for r in reversed(self.runs) if _same_sums(_plane_sums(r.weights), _plane_sums(now))), None)
        if base is None:
            base = self.runs[-1]
            remove, now = [], on
        spreads = [c.spread_g for c in base.reading.channels]
        sol = correction_from_influence(self._influence, base.reading.vector(), radii, spreads=spreads if any(spreads) else None)
        planes = []
        # Combine: the weights left on by the last job come off, and the correction takes their place.
        old = [w for w in now if w in self._weights_at_start] if self.options.get("combine_at_start") else []
        if old and kind == "correction":
            remove = remove + old
            now = [w for w in now if w not in old]
        else:
            old = []
        old_sums = _plane_sums(old)
        # Move: the weights left on by the last job may stay, move to another position or come off,
        # whichever the allocator finds best for the correction (their effect is in the reading).
        movable = ([w for w in now if w in self._weights_at_start]
                   if self.options.get("move_at_start") and kind == "correction" else [])
        in_use = [m for w in now for m in w.pieces]
        for w in sol.corrections:
            pc = fitting.plan_plane(
                self.machine, w.plane, w.unbalance_gmm + old_sums.get(w.plane, 0j), kind, s.trims_done + 1,
                self._plane_permissible(w.plane), in_use, existing=[x for x in movable if x.plane == w.plane]
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

    def _plane_permissible(self, plane: int) -> float:
        per = list(self._tolerance.per_plane_gmm)
        if len(per) == self.machine.n_planes:
            return float(per[plane - 1])
        return float(self._tolerance.permissible_unbalance_gmm) / self.machine.n_planes

    def _grade(self, run: RunRecord) -> tuple[list[float], bool]:
        residual, _unc, passed = self._grade_with_uncertainty(run)
        return residual, passed

    def _grade_with_uncertainty(self, run: RunRecord) -> tuple[list[float], list[float], bool]:
        """Residual unbalance per plane (engine's least-squares estimate), its 95 % uncertainty
        from the reading's confidence radii, and pass/fail: passed only when residual plus
        uncertainty is within the permissible value of every plane (so a pass is a pass even
        allowing for the measurement's scatter)."""
        import numpy as np

        from runtrue.balancing import check_grade

        assert self._influence is not None
        gc = check_grade(self._influence, run.reading.vector(), self._tolerance)
        residual = [float(x) for x in gc.residual_gmm]
        pinv = np.linalg.pinv(np.array(self._influence, dtype=complex))
        conf = np.array([c.confidence_g if math.isfinite(c.confidence_g) else 0.0 for c in run.reading.channels])
        unc = [float(np.sqrt(np.sum(np.abs(row) ** 2 * conf**2))) for row in pinv]
        if len(unc) != len(residual):  # one tolerance plane for several correction planes: summed
            unc = [float(sum(unc))]
        passed = all(r + u <= p for r, u, p in zip(residual, unc, gc.permissible_gmm))
        return residual, unc, passed

    def _finish(self, status: str, reason: str) -> None:
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
        if self._replaying:
            return
        res = self.result()
        self.store.finish_job(self.job_id, status, res.to_dict())
        if status == "passed" and self.machine.id is not None and self._influence is not None:
            saved = self.store.get_machine(self.machine.id)
            if saved is not None and (saved.influence is None or saved.influence.job_id != self.job_id):
                self.store.store_influence(
                    self.machine.id,
                    StoredInfluence(self._influence, self.runs[-1].reading.speed_rpm, now_iso(), self.job_id),
                )


def position_number(machine: Machine, plane: int, angle_deg: float) -> int | None:
    """The 1-based position number at ``angle_deg`` in ``plane`` (None in a groove or between)."""
    angles = machine.planes[plane - 1].position_angles_deg()
    if angles is None:
        return None
    for n, a in enumerate(angles, start=1):
        if abs((a - angle_deg + 180.0) % 360.0 - 180.0) < 1e-6:
            return n
    return None


def _weight_key(w: Weight) -> tuple[int, float, float, float]:
    return (w.plane, round(w.mass_g, 4), round(w.angle_deg % 360.0, 3), round(w.radius_mm, 3))


def _plane_sums(weights: Any) -> dict[int, complex]:
    out: dict[int, complex] = {}
    for w in weights:
        out[w.plane] = out.get(w.plane, 0j) + w.unbalance_gmm
    return out


def _same_sums(a: dict[int, complex], b: dict[int, complex], tol_gmm: float = 1e-6) -> bool:
    for p in set(a) | set(b):
        if abs(a.get(p, 0j) - b.get(p, 0j)) > tol_gmm * max(1.0, abs(a.get(p, 0j)), abs(b.get(p, 0j))):
            return False
    return True


def _engine_run(r: RunRecord) -> Any:
    from runtrue.balancing import Run
    from runtrue.balancing import Weight as EngineWeight

    spreads = [c.spread_g for c in r.reading.channels]
    return Run(
        weights=[EngineWeight(w.plane, w.mass_g, w.angle_deg, w.radius_mm) for w in r.weights],
        readings=r.reading.vector(),
        spreads=spreads if any(spreads) else None,
    )
