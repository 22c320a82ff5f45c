"""Balancing without a reference mark: the four-run method (amplitudes only) as a job's method.

Method: the four-run method (a reference run, then one trial weight moved to three angles,
classically 0°, 120° and 240°) as taught in field balancing texts, e.g. Wowk, *Machinery
Vibration: Balancing*, McGraw-Hill 1995, "balancing without phase" (from memory).  The maths is
``runtrue.balancing.four_run.amplitude_only``: a maximum-likelihood fit of the amplitudes of
every pickup (started from linear least squares on the squared amplitudes), which accepts any
trial angles (three or more), so on a rotor with fixed holes the three
positions closest to 0°/120°/240° are used at their true angles.

What this module adds to the method, and why (our choices, stated to the user):

* **Angles from a chalk mark.**  There is no reference mark, so the user marks any point of the
  rotor as 0° and measures every angle from it against rotation.  The method needs only that all
  angles of a job are measured from the same point in the same sense (its amplitudes do not
  change if every angle is mirrored), so the weight angles convention of the rest of runtrue holds.
* **Only amplitudes are used.**  A meter's reading may carry a phase; it is ignored (a reading
  typed in with amplitudes only has phase ``None`` and works the same).
* **Grade check without phase.**  The residual unbalance is estimated as
  ``U_res ≈ amplitude / |H|`` with ``|H|`` the influence magnitude the four-run solution finds
  (g per g·mm) on the pickup with the largest reference amplitude; it is an estimate without
  phase (it cannot tell the unbalance from other 1× vibration).  Its upper 95 % bound takes in
  both the amplitude's scatter and the uncertainty of the fitted ``|H|``
  (``four_run.residual_upper_bound_gmm``); passed means that upper bound is within the
  permissible value.
* **Trims.**  Trim runs by the amplitude-only method are not standard.  When the check run after
  the correction does not pass, the job says so and offers another four-run cycle starting from
  the corrected state: the check run is that cycle's reference run, the correction weights stay
  on, and the trial weight goes to three angles again, sized from the expected error of the
  cycle (``four_run.plan_amplitude_only``: the estimated residual, the reading's scatter and the
  fitted ``|H|``), never above the first cycle's trial.  The
  user may stop instead.  ``max_trim_runs`` limits these extra cycles.
* **Weak trial.**  When the trial's effect (``|H|`` times the trial unbalance) is under the
  engine's ``MIN_TRIAL_EFFECT_FRACTION`` of the cycle's reference amplitude, the solution is
  poorly defined: the job asks for the three trial runs again with a larger trial weight (the
  runs already taken stay in the solution), or the user accepts the weak trial.

Run kinds stay those of every job: ``reference``, ``trial`` (three per cycle), ``correction``
(the check run of cycle 1) and ``trim`` (the check run of each later cycle).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from runtrue.balancing import BalancingError, Solution, suggest_trial_weight
from runtrue.balancing.four_run import (
    MIN_TRIAL_EFFECT_FRACTION,
    amplitude_only,
    amplitude_sd,
    first_trial_look,
    loudest_pickup,
    plan_amplitude_only,
    residual_check,
    trial_effect,
)
from runtrue.balancing.grades import parse_grade
from runtrue.jobs.fitting import plan_plane, trial_weight
from runtrue.jobs.limits import capped_trial_mass, within_force_limit
from runtrue.jobs.method import GradeOutcome, next_trial_scale
from runtrue.jobs.model import Machine, RunRecord, Weight
from runtrue.jobs.results import FOUR_RUN_METHOD, CorrectionPlan, TrialCheck
from runtrue.jobs.weights import is_trial, plane_sums, trial_label
from runtrue.jobs.wording import (
    TRIAL_CHOSEN_BY_USER,
    first_trial_words,
    four_run_instructions,
    trial_change_words,
)
from runtrue.readings.numbers import unbalance_text
from runtrue.readings.units import angle_between_deg, wrap_deg

if TYPE_CHECKING:
    from runtrue.jobs.job import BalanceJob

METHOD = FOUR_RUN_METHOD
#: The classic trial angles of the four-run method (degrees from the chalk mark).
CLASSIC_TRIAL_ANGLES_DEG = (0.0, 120.0, 240.0)
#: A later cycle's trial unbalance, as a multiple of the estimated residual unbalance: large
#: enough that the trial, not the reading's scatter, sets the amplitudes (our choice).
LATER_TRIAL_MULTIPLE = 2.0
#: When the amplitudes cannot be solved at all, the trial weight is made this much larger (our choice).
UNSOLVED_TRIAL_SCALE = 3.0


def three_trial_angles_deg(machine: Machine, plane: int, first_deg: float) -> list[float]:
    """The three trial angles of a cycle: ``first_deg`` and the usable positions closest to
    ``first_deg + 120°`` and ``+ 240°`` (exactly those in a groove).  ValueError when the plane
    has fewer than three usable positions."""
    spec = machine.planes[plane - 1]
    angles = spec.position_angles_deg()
    if angles is None:
        return [wrap_deg(first_deg + a) for a in CLASSIC_TRIAL_ANGLES_DEG]
    usable = [wrap_deg(a) for n, a in enumerate(angles, start=1) if n not in spec.excluded]
    if len(usable) < 3:
        raise ValueError(
            f"plane {plane} has {len(usable)} usable position(s); the four-run method needs the trial "
            "weight at three different angles: free more positions"
        )
    chosen = [wrap_deg(first_deg)]
    for target in CLASSIC_TRIAL_ANGLES_DEG[1:]:
        want = wrap_deg(first_deg + target)
        left = [a for a in usable if all(angle_between_deg(a, c) > 1e-6 for c in chosen)]
        chosen.append(min(left, key=lambda a: (angle_between_deg(a, want), a)))
    return chosen


class FourRunMethod:
    """The four-run method (one plane, amplitudes only) as a job's method.

    The job's state also has ``method == "four-run"``, ``cycle``, ``trial_number`` and
    ``trial_angles_deg``.
    """

    name = METHOD

    def __init__(self, job: BalanceJob) -> None:
        self.job = job
        self._cycle_base = 0  # index in job.runs of the current cycle's reference run
        self._checks: dict[int, tuple[int, float, float | None]] = {}  # check run seq -> (pickup, |H|, its sd)
        self._user_trial: tuple[int, Weight] | None = None  # (cycle, trial chosen by the user)
        self._early_larger: Weight | None = None  # suggested after a weak-looking trial run 1
        self._capped_note = ""  # set when a larger trial is held back by the force limit

    @staticmethod
    def start_options(machine: Machine, *, trial_removed: bool, use_stored_influence: bool | None,
                      max_trim_runs: int) -> dict[str, Any]:
        """The recorded options of a new job by this method (ValueError when they cannot work)."""
        if machine.n_planes != 1:
            raise ValueError(
                f"amplitude-only (four-run) balancing corrects one plane, but {machine.name!r} has "
                f"{machine.n_planes} correction planes: use the phase method with a reference mark, "
                "or describe the machine with one plane"
            )
        if use_stored_influence:
            raise ValueError(
                "stored influence coefficients hold phase, which the amplitude-only method cannot use: "
                "start the amplitude-only job without them"
            )
        if not trial_removed:
            raise ValueError("in the four-run method the trial weight is moved and then taken off; it cannot be left on")
        return {
            "trial_removed": True,
            "use_stored_influence": False,
            "max_trim_runs": int(max_trim_runs),
            "amplitude_only": True,
            "method": METHOD,
        }

    # -- what the job asks -------------------------------------------------------------------------
    @property
    def influence(self) -> list[list[complex]] | None:
        """None: the method finds ``|H|`` only, never a coefficient to store or reuse."""
        return None

    @property
    def early_larger_trial(self) -> Weight | None:
        """After a weak-looking trial run 1: the larger trial to fit instead (None otherwise)."""
        s = self.job.state
        return self._early_larger if s.step == "trial" and s.trial_number == 2 else None

    def instructions(self) -> list[str]:
        return four_run_instructions(self.job)

    def check_trial_change(self) -> None:
        """The trial weight (mass, first angle from the chalk mark, radius) may be changed only
        before the first trial run of a cycle (the three angles follow from the first), or to the
        larger trial offered after a weak-looking first run."""
        s = self.job.state
        if s.step == "trial" and s.trial_number != 1 and self.early_larger_trial is None:
            raise ValueError("the trial weight can be changed only before the first trial run of a cycle")

    def after_replay(self) -> None:
        """Nothing deferred: a four-run job works its correction out in full even while a resume
        replays the runs (it has few cycles, and its warnings then survive a resume)."""

    def outcome(self) -> GradeOutcome:
        job = self.job
        ref = next((r for r in job.runs if r.kind == "reference"), None)
        check = next((r for r in reversed(job.runs) if r.kind in ("correction", "trim")), None)
        residual = unc = None
        passed: bool | None = None
        h_mag: float | None = None
        if check is not None and check.seq in self._checks:
            pick, h_mag, h_sd = self._checks[check.seq]
            residual, unc, passed = self._estimate(check, pick, h_mag, h_sd)
        return GradeOutcome(
            channels=job.channel_results(ref, check, amplitudes_only=True),
            residual_gmm=residual,
            uncertainty_gmm=unc,
            passed=passed,
            influence=None,  # |H| only: never a coefficient to store or reuse
            influence_magnitude=h_mag,
            influence_source="not known yet (no trial run)",
        )

    # -- the runs ------------------------------------------------------------------------------------
    def on_reference(self, run: RunRecord) -> None:
        self._start_cycle(len(self.job.runs) - 1, 1)

    def on_trial(self, run: RunRecord) -> None:
        k = self.job.state.trial_number or 1
        if k < 3:
            self._set_trial_number(k + 1)
            if k == 1:
                self._judge_first_trial(run)
        else:
            self._early_larger = None
            self._check_cycle()

    def on_check(self, run: RunRecord) -> None:
        """The check run after a correction."""
        job, s = self.job, self.job.state
        base = self._cycle_base
        sol, pick = self._cycle_solution(base, len(job.runs) - 1)
        h_mag = float(abs(sol.influence[pick, 0]))
        h_sd = sol.amplitude_fit.gain_sd(pick)
        residual, unc, passed = self._estimate(run, pick, h_mag, h_sd)
        if run.kind == "trim":
            s.trims_done += 1
        self._checks[run.seq] = (pick, h_mag, h_sd)
        job.save_progress()
        if passed:
            job.finish("passed", "")
            return
        perm = job.plane_permissible(1)
        if s.trims_done >= job.max_trim_runs():
            job.finish(
                "stopped",
                f"four-run cycle limit reached ({1 + s.trims_done} cycles) before the grade was met",
            )
            return
        self._start_cycle(len(job.runs) - 1, s.cycle + 1)
        s.message = (
            f"Check run: residual unbalance about {unbalance_text(residual[0])} ± {unbalance_text(unc[0])} "
            f"(estimated from the amplitude alone, without phase), {residual[0] / perm:.1f} times the "
            f"permissible {unbalance_text(perm)}: not passed. Trimming by the amplitude-only method is not standard; "
            "another four-run cycle starts from the corrected state (this run is its reference), or stop the job here."
        )

    def apply_event(self, kind: str, data: dict[str, Any]) -> None:
        job, s = self.job, self.job.state
        if kind == "trial_set":
            w = Weight(1, float(data["mass_g"]), float(data["angle_deg"]), float(data["radius_mm"]), trial_label(1))
            if s.step != "trial":
                return
            angles = three_trial_angles_deg(job.machine, 1, w.angle_deg)
            self._user_trial = (s.cycle, w)
            self._early_larger = None
            s.trial_number = 1
            s.trial_angles_deg = angles
            s.trial = w
            s.message = TRIAL_CHOSEN_BY_USER
        elif kind == "trial_accepted":
            chk = s.last_trial_check
            if chk is not None:
                s.last_trial_check = TrialCheck(chk.plane, chk.ok, chk.ratio, chk.message, chk.suggested_scale, True)
                s.warnings.append(f"Plane 1: trial effect small ({chk.message}); accepted by the user.")
            job.guarded(self._after_trial_accepted, "The trial runs cannot be used")

    # -- internals ------------------------------------------------------------------------------------
    def _estimate(
        self, run: RunRecord, pick: int, h_mag: float, h_sd: float | None
    ) -> tuple[list[float], list[float], bool]:
        ch = run.reading.channels[pick]
        check = residual_check(ch.amp_g, amplitude_sd(ch.spread_g), h_mag, h_sd, self.job.plane_permissible(1))
        return [check.residual_gmm], [check.uncertainty_gmm], check.passed

    def _cycle_solution(self, base: int, end: int) -> tuple[Solution, int]:
        """The four-run solution from runs ``base`` (the cycle's reference) up to ``end`` and the
        pickup it uses (the largest reference amplitude).  Amplitudes only; trial unbalance
        relative to the cycle's reference run."""
        runs = self.job.runs[base:end]
        ref = runs[0]
        pick = loudest_pickup([c.amp_g for c in ref.reading.channels])
        u0 = plane_sums(ref.weights).get(1, 0j)
        trials = [plane_sums(r.weights).get(1, 0j) - u0 for r in runs]
        amps = [[c.amp_g for c in r.reading.channels] for r in runs]
        sds = [[amplitude_sd(c.spread_g) for c in r.reading.channels] for r in runs]
        sol = amplitude_only(amps, trials, self.job.machine.planes[0].radius_mm, plane=1, amp_sd=sds)
        return sol, pick

    def _start_cycle(self, base: int, cycle: int, scale: float = 1.0, previous: Weight | None = None) -> None:
        """Enter trial 1 of a cycle whose reference run is ``job.runs[base]``.  Everything is
        worked out first and assigned last, so a refusal (ValueError) changes nothing."""
        job = self.job
        m = job.machine
        spec = m.planes[0]
        ref = job.runs[base]
        message = ""
        capped_note = ""
        user = self._user_trial[1] if self._user_trial and self._user_trial[0] == cycle and previous is None else None
        angle: float | None
        if user is not None:
            mass, angle = user.mass_g, user.angle_deg
        elif previous is not None:
            mass, capped_note = capped_trial_mass(m, previous.mass_g * scale, previous.mass_g, spec.radius_mm)
            angle = previous.angle_deg
        elif cycle > 1 and self._checks:
            pick, h_mag, _sd = self._checks[ref.seq] if ref.seq in self._checks else next(reversed(self._checks.values()))
            first = next((w for r in job.runs for w in r.weights if is_trial(w)), None)
            u_est = ref.reading.channels[pick].amp_g / h_mag
            perm = job.plane_permissible(1)
            # Trial size from the expected error of the cycle (three positions, as every cycle),
            # never above the first cycle's trial.
            ch = ref.reading.channels[pick]
            limit = abs(first.unbalance_gmm) if first is not None else max(LATER_TRIAL_MULTIPLE * u_est, perm)
            sd = amplitude_sd(ch.spread_g) if math.isfinite(ch.spread_g) else 0.0
            plan = plan_amplitude_only(ch.amp_g, sd, h_mag, perm, limit, max_angles=3)
            mass, angle = plan.trial_gmm / spec.radius_mm, None
            message = plan.rule
        else:
            sug = suggest_trial_weight(m.rotor_mass_kg, m.speed_rpm, spec.radius_mm, n_planes=1,
                                       grade=parse_grade(m.grade))
            mass, angle = float(sug.mass_g), None
            message = first_trial_words(job.force_limit_n)
        staying = [w for w in ref.weights if not is_trial(w)]
        if user is not None:
            trial = Weight(1, user.mass_g, user.angle_deg, user.radius_mm, trial_label(1))
        else:
            in_use = [p for w in staying for p in w.pieces]
            trial = within_force_limit(
                m, lambda mass_g, at_least: trial_weight(m, 1, mass_g, angle, in_use, at_least=at_least),
                mass, at_least=previous is not None and not capped_note,
            )
        angles = three_trial_angles_deg(m, 1, trial.angle_deg)
        s = job.state
        self._cycle_base = base
        s.step = "trial"
        s.plane = 1
        s.plan = None
        s.cycle = cycle
        s.trial_number = 1
        s.trial_angles_deg = angles
        s.trial = trial
        if message:
            s.message = message
        self._capped_note = capped_note

    def _judge_first_trial(self, run: RunRecord) -> None:
        """After trial run 1, the trade's early look: the amplitude change is a lower bound on the
        trial's effect (|A1 - A0| <= |H T|), so a change of MIN_TRIAL_EFFECT_FRACTION or more
        proves the trial large enough; a smaller change may be a small trial or one placed near
        90 degrees from the heavy spot - the user may fit a larger one now instead of two more runs."""
        job, s = self.job, self.job.state
        ref = job.runs[self._cycle_base]
        pick = loudest_pickup([c.amp_g for c in ref.reading.channels])
        look = first_trial_look(ref.reading.channels[pick].amp_g, run.reading.channels[pick].amp_g)
        if look is None:
            return
        words = f"{job.machine.pickup_name(pick)}: {trial_change_words(look.percent, 0.0, with_phase=False)}"
        self._early_larger = None
        if look.large_enough:
            s.message = f"Trial run 1 GOOD - {words}: the trial is large enough; go on with trial run 2."
            return
        t = s.trial
        assert t is not None
        mass, note = capped_trial_mass(job.machine, t.mass_g * look.suggested_scale, t.mass_g, t.radius_mm)
        held = f" (held at the {job.force_limit_n:.3g} N force limit)" if note else ""
        self._early_larger = Weight(1, round(mass, 1), t.angle_deg, t.radius_mm, trial_label(1))
        s.message = (
            f"Trial run 1 SMALL SO FAR - {words}. The trial may be too small, or sit near 90° from the heavy "
            f"spot. Fit {mass:.3g} g instead{held} now (w; the run taken is kept), or go on with trial run 2."
        )

    def _set_trial_number(self, k: int) -> None:
        s = self.job.state
        assert s.trial is not None
        t = s.trial
        s.trial_number = k
        s.trial = Weight(t.plane, t.mass_g, s.trial_angles_deg[k - 1], t.radius_mm, t.label, t.pieces)

    def _check_cycle(self) -> None:
        """After the third trial run: is the trial's effect big enough?  Then the correction."""
        job, s = self.job, self.job.state
        base = self._cycle_base
        try:
            sol, pick = self._cycle_solution(base, len(job.runs))
        except BalancingError as exc:
            # Typically a trial too small for the readings' scatter: ask for a larger one.
            s.last_trial_check = TrialCheck(1, False, 0.0, str(exc), UNSOLVED_TRIAL_SCALE)
            self._start_cycle(base, s.cycle, UNSOLVED_TRIAL_SCALE, s.trial)
            s.message = (
                f"The four-run solution failed ({exc}). Take the three trial runs again with this larger "
                "trial weight (the runs already taken are kept in the solution)."
            )
            return
        h_mag = float(abs(sol.influence[pick, 0]))
        v0 = job.runs[base].reading.channels[pick].amp_g
        u0 = plane_sums(job.runs[base].weights).get(1, 0j)
        t_max = max(abs(plane_sums(r.weights).get(1, 0j) - u0) for r in job.runs[base:])
        effect = trial_effect(h_mag, t_max, v0)
        ratio, ok, scale = effect.ratio, effect.ok, effect.suggested_scale
        msg = (
            f"the trial weight changed the amplitude by about {ratio:.0%} of the cycle's reference amplitude"
            f" (at least {MIN_TRIAL_EFFECT_FRACTION:.0%} is needed)"
        )
        s.last_trial_check = TrialCheck(1, ok, float(ratio), msg, float(scale))
        if ok:
            self._after_trial_accepted()
            return
        prev = s.trial
        self._start_cycle(base, s.cycle, next_trial_scale(scale), prev)
        s.message = (
            f"The trial weight was too small to trust: {msg}. Take the three trial runs again with this larger "
            "trial weight (the runs already taken are kept in the solution), or accept the weak trial."
        )
        if self._capped_note:
            s.message += " " + self._capped_note

    def _after_trial_accepted(self) -> None:
        self._enter_correction("correction" if self.job.state.cycle <= 1 else "trim")

    def _enter_correction(self, kind: str) -> None:
        job = self.job
        s = job.state
        # Worked out in full even while a resume replays the runs (unlike the phase method, which
        # defers it): a four-run job has few cycles, and its warnings then survive a resume.
        sol, _pick = self._cycle_solution(self._cycle_base, len(job.runs))
        on = list(job.runs[-1].weights)
        remove = [w for w in on if is_trial(w)]
        now = [w for w in on if w not in remove]
        correction_gmm = complex(sol.corrections[0].unbalance_gmm)
        pc = plan_plane(
            job.machine, 1, correction_gmm, kind, s.trims_done + 1, job.plane_permissible(1),
            [p for w in now for p in w.pieces],
        )
        s.step = kind
        s.plane = None
        s.trial = None
        s.trial_number = None
        s.plan = CorrectionPlan(
            kind=kind,
            remove=remove,
            planes=[pc],
            predicted=list(sol.predicted),
            method=METHOD,
            condition_number=1.0,
            warnings=list(sol.warnings) + list(pc.warnings),
        )
        for text in s.plan.warnings:
            if text not in s.warnings:
                s.warnings.append(text)
