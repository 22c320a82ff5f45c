"""Amplitude-only balancing as a job: the four-run method, for machines with no usable reference mark.

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
from typing import Any

from runtrue.balancing.grades import parse_grade
from runtrue.jobs.model import ANGLE_CONVENTION, Machine, RunRecord, Weight
from runtrue.jobs.store import JobStore
from runtrue.jobs.workflow import (
    DEFAULT_MAX_TRIM_RUNS,
    STANDARD,
    BalanceJob,
    ChannelResult,
    CorrectionPlan,
    JobResult,
    TrialCheck,
    _plane_sums,
    _start_weights_options,
)
from runtrue.readings.numbers import force_text, mass_text, unbalance_text

METHOD = "four-run"
#: The classic trial angles of the four-run method (degrees from the chalk mark).
CLASSIC_TRIAL_ANGLES_DEG = (0.0, 120.0, 240.0)
#: A later cycle's trial unbalance, as a multiple of the estimated residual unbalance: large
#: enough that the trial, not the reading's scatter, sets the amplitudes (our choice).
LATER_TRIAL_MULTIPLE = 2.0
#: When the amplitudes cannot be solved at all, the trial weight is made this much larger (our choice).
UNSOLVED_TRIAL_SCALE = 3.0

#: The convention sentence of an amplitude-only job (there is no reference mark: a chalk mark
#: takes its place for angles, and phase is not used).
AMPLITUDE_ONLY_CONVENTION = (
    "Weight angles are measured from the chalk mark (0°) against the direction of rotation; "
    "phase is not used (amplitude-only method)."
)

PHASE_NOT_USED = (
    "Amplitude-only balancing (four-run method): only the 1x amplitude of each run is used; "
    "a phase shown by the meter is ignored."
)


def three_trial_angles_deg(machine: Machine, plane: int, first_deg: float) -> list[float]:
    """The three trial angles of a cycle: ``first_deg`` and the usable positions closest to
    ``first_deg + 120°`` and ``+ 240°`` (exactly those in a groove).  ValueError when the plane
    has fewer than three usable positions."""
    spec = machine.planes[plane - 1]
    angles = spec.position_angles_deg()
    if angles is None:
        return [(first_deg + a) % 360.0 for a in CLASSIC_TRIAL_ANGLES_DEG]
    usable = [a % 360.0 for n, a in enumerate(angles, start=1) if n not in spec.excluded]
    if len(usable) < 3:
        raise ValueError(
            f"plane {plane} has {len(usable)} usable position(s); the four-run method needs the trial "
            "weight at three different angles: free more positions"
        )
    chosen = [first_deg % 360.0]
    for target in CLASSIC_TRIAL_ANGLES_DEG[1:]:
        want = (first_deg + target) % 360.0
        left = [a for a in usable if all(_ang_dist(a, c) > 1e-6 for c in chosen)]
        chosen.append(min(left, key=lambda a: (_ang_dist(a, want), a)))
    return chosen


def _chalk(line: str) -> str:
    if line == ANGLE_CONVENTION:
        return AMPLITUDE_ONLY_CONVENTION
    return line.replace("the reference mark", "the chalk mark (0°)")


def _ang_dist(a: float, b: float) -> float:
    return abs((a - b + 180.0) % 360.0 - 180.0)


class AmplitudeOnlyJob(BalanceJob):
    """A :class:`BalanceJob` by the four-run method (one plane, amplitudes only).

    Create it with ``BalanceJob.start(store, machine, amplitude_only=True)``; ``BalanceJob.resume``
    returns one for a job started so.  The public API is that of :class:`BalanceJob`; the state
    also has ``method == "four-run"``, ``cycle``, ``trial_number`` and ``trial_angles_deg``.
    """

    def __init__(self, store: JobStore, job_id: int, machine: Machine, options: dict[str, Any]) -> None:
        self._cycle_base = 0  # index in self.runs of the current cycle's reference run
        self._checks: dict[int, tuple[int, float, float | None]] = {}  # check run seq -> (pickup, |H|, its sd)
        self._user_trial: tuple[int, Weight] | None = None  # (cycle, trial chosen by the user)
        self._early_larger: Weight | None = None  # suggested after a weak-looking trial run 1
        super().__init__(store, job_id, machine, options)
        self.state.method = METHOD

    @classmethod
    def start_new(
        cls,
        store: JobStore,
        machine: Machine,
        *,
        trial_removed: bool = True,
        use_stored_influence: bool | None = None,
        max_trim_runs: int = DEFAULT_MAX_TRIM_RUNS,
        weights_at_start: Any = (),
    ) -> AmplitudeOnlyJob:
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
        options = {
            "trial_removed": True,
            "use_stored_influence": False,
            "max_trim_runs": int(max_trim_runs),
            "amplitude_only": True,
            "method": METHOD,
            **_start_weights_options(machine, list(weights_at_start), False),
        }
        job_id = store.new_job(machine, options)
        return cls(store, job_id, machine, options)

    # -- what the user sees ----------------------------------------------------------------------
    def instructions(self) -> list[str]:
        """What to do now (as :meth:`BalanceJob.instructions`), with the chalk mark in place of
        the reference mark."""
        return [_chalk(line) for line in self._instructions()]

    def _instructions(self) -> list[str]:
        s, m = self.state, self.machine
        speed = f"{m.speed_rpm:g} rpm"
        out: list[str] = [PHASE_NOT_USED]
        if s.step == "reference":
            if s.message:
                out.append(s.message)
            out += [
                "Chalk or paint a mark on the rotor and call it 0°: any point will do"
                + self._holes_words()
                + ". Every angle in this job is measured from that mark, against the direction of rotation.",
                f"Reference run: run {m.name} at its working speed ({speed}), "
                + (f"with the {len(self._weights_at_start)} weight(s) left by the last job still on and nothing added."
                   if self._weights_at_start else "as found, with no weights added."),
                "Stand clear of the plane of rotation when starting up; never exceed the rated speed.",
                "Take the reading (amplitude) when it has settled.",
                ANGLE_CONVENTION,
            ]
            return out
        if s.step == "trial":
            t = s.trial
            assert t is not None and s.trial_number is not None
            if s.message:
                out.insert(0, s.message)  # the verdict on the last run comes first
            k = s.trial_number
            head_at = 1 if s.message and ("SMALL" in s.message or "GOOD" in s.message) else 0
            force = force_text(self._force_n(t))
            if k == 1:
                out.insert(head_at, f"Fit {mass_text(t.mass_g)} at {self._where(t)} from the chalk mark - secure it "
                                    f"for {force} - then r.")
            else:
                out.insert(head_at, f"Move the trial weight to {self._where(t)} - secure it for {force} - then r.")
            out.append(f"Four-run cycle {s.cycle}, trial run {k} of 3: stop the machine and lock it out.")
            if s.cycle > 1 and k == 1:
                out.append(
                    "This cycle starts from the corrected rotor: leave the correction weights where they are; "
                    "the last check run is this cycle's reference run."
                )
            where = self._where(t)
            if k == 1:
                out.append(
                    f"Fit the trial weight: {t.mass_g:.3g} g at {where}, radius {t.radius_mm:g} mm, "
                    "measured from the chalk mark against rotation."
                )
            else:
                prev = s.trial_angles_deg[k - 2]
                out.append(
                    f"Move the same trial weight ({t.mass_g:.3g} g) from {prev:.1f}° to {where}, "
                    f"radius {t.radius_mm:g} mm."
                )
            out.append(
                "The three trial angles of this cycle: " + ", ".join(f"{a:.1f}°" for a in s.trial_angles_deg)
                + " (the positions closest to 0°, 120° and 240° from the first one)."
            )
            out.append(m.angle_direction_words(1))
            out.append(f"Stand clear, start up, run at {speed} (never above the rated speed) and take the reading.")
            out.append(ANGLE_CONVENTION)
            return out
        base = super().instructions()
        if s.step in ("correction", "trim"):
            out.append(f"Correction from four-run cycle {s.cycle} (amplitudes only).")
            out += base
            out.insert(
                len(out) - 1,
                "This run checks the correction: the residual unbalance is estimated from its amplitude.",
            )
            return out
        r = self.result()
        if r.residual_unbalance_gmm:
            out.append(
                f"Residual unbalance about {unbalance_text(r.residual_unbalance_gmm[0])}, estimated from the amplitude "
                f"alone (no phase); permissible {unbalance_text(r.permissible_unbalance_gmm[0])}."
            )
        return out + base

    def set_trial(
        self, mass_g: float, angle_deg: float, radius_mm: float | None = None, *, confirm_over_limit: bool = False
    ) -> Weight:
        """Use this trial weight (mass, first angle from the chalk mark, radius) for the cycle;
        only before its first trial run (the three angles follow from the first)."""
        if self.state.step == "trial" and self.state.trial_number != 1 and self.early_larger_trial is None:
            raise ValueError("the trial weight can be changed only before the first trial run of a cycle")
        return super().set_trial(mass_g, angle_deg, radius_mm, confirm_over_limit=confirm_over_limit)

    # -- results ---------------------------------------------------------------------------------
    def result(self) -> JobResult:
        res = super().result()
        ref = next((r for r in self.runs if r.kind == "reference"), None)
        check = next((r for r in reversed(self.runs) if r.kind in ("correction", "trim")), None)
        chans = []
        for i, p in enumerate(self.machine.pickups):
            before = complex(ref.reading.channels[i].amp_g, 0.0) if ref else 0j
            after = complex(check.reading.channels[i].amp_g, 0.0) if check else None
            chans.append(ChannelResult(p.label, before, after))
        residual = unc = None
        passed: bool | None = None
        h_mag: float | None = None
        if check is not None and check.seq in self._checks:
            pick, h_mag, h_sd = self._checks[check.seq]
            residual, unc, passed = self._estimate(check, pick, h_mag, h_sd)
        res.channels = chans
        res.residual_unbalance_gmm = residual
        res.residual_uncertainty_gmm = unc
        res.passed = passed
        res.influence = None  # |H| only: never a coefficient to store or reuse
        res.influence_magnitude = h_mag
        res.method = METHOD
        return res

    # -- internals -------------------------------------------------------------------------------
    def _holes_words(self) -> str:
        spec = self.machine.planes[0]
        if spec.position_angles_deg() is None:
            return ""
        first = (spec.position_angles_deg() or [0.0])[0]
        return (
            f" (with numbered positions, put it where they are counted from, so that position 1 is at "
            f"{first:g}° from it)"
        )

    def _where(self, t: Weight) -> str:
        from runtrue.jobs.workflow import position_number

        pos = position_number(self.machine, 1, t.angle_deg)
        return f"position {pos} ({t.angle_deg:.1f}°)" if pos is not None else f"{t.angle_deg:.1f}°"

    def _estimate(
        self, run: RunRecord, pick: int, h_mag: float, h_sd: float | None
    ) -> tuple[list[float], list[float], bool]:
        from runtrue.balancing.four_run import residual_upper_bound_gmm

        ch = run.reading.channels[pick]
        residual = ch.amp_g / h_mag
        # Upper 95 % bound from the amplitude's scatter AND the fitted |H|'s uncertainty.
        upper = residual_upper_bound_gmm(ch.amp_g, ch.spread_g / math.sqrt(2.0), h_mag, h_sd)
        perm = float(list(self._tolerance.per_plane_gmm)[0])
        return [residual], [upper - residual], upper <= perm

    def _cycle_solution(self, base: int, end: int) -> tuple[Any, int]:
        """The four-run solution from runs ``base`` (the cycle's reference) up to ``end`` and the
        pickup it uses (the largest reference amplitude).  Amplitudes only; trial unbalance
        relative to the cycle's reference run."""
        from runtrue.balancing.four_run import amplitude_only

        runs = self.runs[base:end]
        ref = runs[0]
        amps0 = [c.amp_g for c in ref.reading.channels]
        pick = max(range(len(amps0)), key=lambda i: amps0[i])
        u0 = _plane_sums(ref.weights).get(1, 0j)
        trials = [_plane_sums(r.weights).get(1, 0j) - u0 for r in runs]
        amps = [[c.amp_g for c in r.reading.channels] for r in runs]
        sds = [[c.spread_g / math.sqrt(2.0) for c in r.reading.channels] for r in runs]
        sol = amplitude_only(amps, trials, self.machine.planes[0].radius_mm, plane=1, amp_sd=sds)
        return sol, pick

    def _advance(self, run: RunRecord) -> None:
        s = self.state
        s.message = ""
        self._check_speed(run)
        if run.kind == "reference":
            self._start_cycle(len(self.runs) - 1, 1)
            return
        if run.kind == "trial":
            k = s.trial_number or 1
            if k < 3:
                self._set_trial_number(k + 1)
                if k == 1:
                    self._judge_first_trial(run)
            else:
                self._early_larger = None
                self._check_cycle()
            return
        # The check run after a correction.
        base = self._cycle_base
        sol, pick = self._cycle_solution(base, len(self.runs) - 1)
        h_mag = float(abs(sol.influence[pick, 0]))
        h_sd = sol.amplitude_fit.gain_sd(pick)
        residual, unc, passed = self._estimate(run, pick, h_mag, h_sd)
        if run.kind == "trim":
            s.trims_done += 1
        self._checks[run.seq] = (pick, h_mag, h_sd)
        if not self._replaying:
            self.store.save_result(self.job_id, self.result().to_dict())
        if passed:
            self._finish("passed", "")
            return
        perm = float(list(self._tolerance.per_plane_gmm)[0])
        if s.trims_done >= int(self.options.get("max_trim_runs", DEFAULT_MAX_TRIM_RUNS)):
            self._finish(
                "stopped",
                f"four-run cycle limit reached ({1 + s.trims_done} cycles) before the grade was met",
            )
            return
        self._start_cycle(len(self.runs) - 1, s.cycle + 1)
        s.message = (
            f"Check run: residual unbalance about {unbalance_text(residual[0])} ± {unbalance_text(unc[0])} "
            f"(estimated from the amplitude alone, without phase), {residual[0] / perm:.1f} times the "
            f"permissible {unbalance_text(perm)}: not passed. Trimming by the amplitude-only method is not standard; "
            "another four-run cycle starts from the corrected state (this run is its reference), or stop the job here."
        )

    def _start_cycle(self, base: int, cycle: int, scale: float = 1.0, previous: Weight | None = None) -> None:
        """Enter trial 1 of a cycle whose reference run is ``self.runs[base]``.  Everything is
        worked out first and assigned last, so a refusal (ValueError) changes nothing."""
        from runtrue.balancing import suggest_trial_weight
        from runtrue.jobs import fitting

        m = self.machine
        spec = m.planes[0]
        ref = self.runs[base]
        message = ""
        capped_note = ""
        user = self._user_trial[1] if self._user_trial and self._user_trial[0] == cycle and previous is None else None
        if user is not None:
            mass, angle = user.mass_g, user.angle_deg
        elif previous is not None:
            mass, angle = previous.mass_g * scale, previous.angle_deg
            limit_mass = self._limit_mass_g(spec.radius_mm)
            if mass > limit_mass:
                capped_note = (
                    f"A trial of {mass:.3g} g would be needed, but that pulls {mass / limit_mass:.1f} times the "
                    f"{self.force_limit_n:.3g} N force limit: the suggestion stays at {max(limit_mass, previous.mass_g):.3g} g. "
                    "Average longer, or choose a larger trial with w and confirm its force."
                )
                mass = max(limit_mass, previous.mass_g)
        elif cycle > 1 and self._checks:
            pick, h_mag, _sd = self._checks[ref.seq] if ref.seq in self._checks else next(reversed(self._checks.values()))
            first = next((w for r in self.runs for w in r.weights if self._is_trial(w)), None)
            u_est = ref.reading.channels[pick].amp_g / h_mag
            perm = float(list(self._tolerance.per_plane_gmm)[0])
            # Trial size from the expected error of the cycle (three positions, as every cycle),
            # never above the first cycle's trial.
            from runtrue.balancing.four_run import plan_amplitude_only

            ch = ref.reading.channels[pick]
            limit = abs(first.unbalance_gmm) if first is not None else max(LATER_TRIAL_MULTIPLE * u_est, perm)
            sd = ch.spread_g / math.sqrt(2.0) if math.isfinite(ch.spread_g) else 0.0
            plan = plan_amplitude_only(ch.amp_g, sd, h_mag, perm, limit, max_angles=3)
            mass, angle = plan.trial_gmm / spec.radius_mm, None
            message = plan.rule
        else:
            sug = suggest_trial_weight(m.rotor_mass_kg, m.speed_rpm, spec.radius_mm, n_planes=1,
                                       grade=parse_grade(m.grade))
            mass, angle = float(sug.mass_g), None
            message = (f"Trial weight sized to move the reading clearly (common practice) and kept under the "
                       f"{force_text(self.force_limit_n)} force limit.")
        staying = [w for w in ref.weights if not self._is_trial(w)]
        if user is not None:
            trial = Weight(1, user.mass_g, user.angle_deg, user.radius_mm, "trial weight, plane 1")
        else:
            in_use = [p for w in staying for p in w.pieces]
            trial = self._within_force_limit(
                lambda mass_g, at_least: fitting.trial_weight(m, 1, mass_g, angle, in_use, at_least=at_least),
                mass, at_least=previous is not None and not capped_note,
            )
        angles = three_trial_angles_deg(m, 1, trial.angle_deg)
        s = self.state
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
        from runtrue.balancing.four_run import MIN_TRIAL_EFFECT_FRACTION
        from runtrue.jobs.workflow import trial_change_words

        s = self.state
        ref = self.runs[self._cycle_base]
        pick = max(range(self.machine.n_pickups), key=lambda i: ref.reading.channels[i].amp_g)
        a0, a1 = ref.reading.channels[pick].amp_g, run.reading.channels[pick].amp_g
        if a0 <= 0:
            return
        frac = abs(a1 - a0) / a0
        pct = (a1 / a0 - 1.0) * 100.0
        words = f"{self.machine.pickup_name(pick)}: {trial_change_words(pct, 0.0, with_phase=False)}"
        self._early_larger = None
        if frac >= MIN_TRIAL_EFFECT_FRACTION:
            s.message = f"Trial run 1 GOOD - {words}: the trial is large enough; go on with trial run 2."
            return
        t = s.trial
        assert t is not None
        scale = min(4.0, 1.2 * MIN_TRIAL_EFFECT_FRACTION / max(frac, 0.05))
        mass = t.mass_g * scale
        limit_mass = self._limit_mass_g(t.radius_mm)
        held = ""
        if mass > limit_mass:
            mass = max(limit_mass, t.mass_g)
            held = f" (held at the {self.force_limit_n:.3g} N force limit)"
        self._early_larger = Weight(1, round(mass, 1), t.angle_deg, t.radius_mm, "trial weight, plane 1")
        s.message = (
            f"Trial run 1 SMALL SO FAR - {words}. The trial may be too small, or sit near 90° from the heavy "
            f"spot. Fit {mass:.3g} g instead{held} now (w; the run taken is kept), or go on with trial run 2."
        )

    @property
    def early_larger_trial(self) -> Weight | None:
        """After a weak-looking trial run 1: the larger trial to fit instead (None otherwise)."""
        s = self.state
        return self._early_larger if s.step == "trial" and s.trial_number == 2 else None

    def _set_trial_number(self, k: int) -> None:
        s = self.state
        assert s.trial is not None
        t = s.trial
        s.trial_number = k
        s.trial = Weight(t.plane, t.mass_g, s.trial_angles_deg[k - 1], t.radius_mm, t.label, t.pieces)

    def _check_cycle(self) -> None:
        """After the third trial run: is the trial's effect big enough?  Then the correction."""
        from runtrue.balancing import BalancingError
        from runtrue.balancing.four_run import MIN_TRIAL_EFFECT_FRACTION

        s = self.state
        base = self._cycle_base
        try:
            sol, pick = self._cycle_solution(base, len(self.runs))
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
        v0 = self.runs[base].reading.channels[pick].amp_g
        u0 = _plane_sums(self.runs[base].weights).get(1, 0j)
        t_max = max(abs(_plane_sums(r.weights).get(1, 0j) - u0) for r in self.runs[base:])
        ratio = h_mag * t_max / v0 if v0 > 0 else math.inf
        ok = ratio >= MIN_TRIAL_EFFECT_FRACTION
        scale = MIN_TRIAL_EFFECT_FRACTION / ratio if ratio > 0 else 4.0
        msg = (
            f"the trial weight changed the amplitude by about {ratio:.0%} of the cycle's reference amplitude"
            f" (at least {MIN_TRIAL_EFFECT_FRACTION:.0%} is needed)"
        )
        s.last_trial_check = TrialCheck(1, ok, float(ratio), msg, float(scale))
        if ok:
            self._after_trial_accepted(1)
            return
        prev = s.trial
        self._start_cycle(base, s.cycle, max(scale * 1.2, 1.5), prev)
        s.message = (
            f"The trial weight was too small to trust: {msg}. Take the three trial runs again with this larger "
            "trial weight (the runs already taken are kept in the solution), or accept the weak trial."
        )
        if self._capped_note:
            s.message += " " + self._capped_note

    def _after_trial_accepted(self, plane: int) -> None:
        self._enter_correction("correction" if self.state.cycle <= 1 else "trim")

    def _apply_event(self, kind: str, data: dict[str, Any]) -> None:
        s = self.state
        if kind == "trial_set":
            w = Weight(1, float(data["mass_g"]), float(data["angle_deg"]), float(data["radius_mm"]), "trial weight, plane 1")
            if s.step != "trial":
                return
            angles = three_trial_angles_deg(self.machine, 1, w.angle_deg)
            self._user_trial = (s.cycle, w)
            self._early_larger = None
            s.trial_number = 1
            s.trial_angles_deg = angles
            s.trial = w
            s.message = "Trial weight chosen by the user."
            return
        if kind == "trial_accepted":
            chk = s.last_trial_check
            if chk is not None:
                s.last_trial_check = TrialCheck(chk.plane, chk.ok, chk.ratio, chk.message, chk.suggested_scale, True)
                s.warnings.append(f"Plane 1: trial effect small ({chk.message}); accepted by the user.")
            self._guarded(lambda: self._after_trial_accepted(1), "The trial runs cannot be used")
            return
        super()._apply_event(kind, data)

    def _enter_correction(self, kind: str) -> None:
        from runtrue.jobs import fitting

        s = self.state
        # Worked out in full even while a resume replays the runs (unlike the phase method, which
        # defers it): a four-run job has few cycles, and its warnings then survive a resume.
        sol, _pick = self._cycle_solution(self._cycle_base, len(self.runs))
        on = list(self.runs[-1].weights)
        remove = [w for w in on if self._is_trial(w)]
        now = [w for w in on if w not in remove]
        correction_gmm = complex(sol.corrections[0].unbalance_gmm)
        pc = fitting.plan_plane(
            self.machine, 1, correction_gmm, kind, s.trims_done + 1, self._plane_permissible(1),
            [p for w in now for p in w.pieces],
        )
        self._plan_pending = None
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


__all__ = ["AMPLITUDE_ONLY_CONVENTION", "AmplitudeOnlyJob", "METHOD", "PHASE_NOT_USED", "STANDARD", "three_trial_angles_deg"]
