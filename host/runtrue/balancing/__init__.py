"""The balancing engine: influence coefficients, trial weights, four-run method, tolerance.

Pure functions on complex numbers and numpy arrays; no I/O, no UI.  Conventions (every
module): a reading is ``amp * e^{+j*lag}`` with the phase a LAG in degrees after the reference
mark; a weight's angle is measured from the mark AGAINST rotation, its unbalance is
``mass_g * radius_mm * e^{+j*angle}`` (g*mm); an influence coefficient is reading change per g*mm
at 0 deg; planes are numbered from 1; corrections are weights to ADD to the rotor in its
reference state (all trials removed); masses are >= 0, the angle carries the direction.
Bad input raises :class:`BalancingError` (a ``ValueError``) whose message says what to do.

Public API (``from runtrue.balancing import ...``):

Data (``model``)
    Weight(plane: int, mass_g: float, angle_deg: float, radius_mm: float)
        .unbalance_gmm -> complex;  Weight.from_unbalance(plane, unbalance_gmm, radius_mm) -> Weight
    Run(weights: Sequence[Weight], readings: Sequence[complex], spreads: Sequence[float] | None = None)
    Solution: corrections: list[Weight], influence: np.ndarray (pickups x planes),
        reference: list[complex], predicted: list[complex], warnings: list[str],
        condition_number: float, mass_sd_g: list[float] | None, angle_sd_deg: list[float] | None,
        fit_rms: float, method: str;  .correction_gmm -> list[complex]
    BalancingError(ValueError)
    phasor(amp, phase_deg) -> complex;  amp_phase(value) -> (amp, phase_deg);  wrap_deg(a) -> float

Influence coefficients (``influence``)
    solve(runs: Sequence[Run], radius_mm: Mapping[int, float] | None = None) -> Solution
        any pickups/planes; exactly determined or least squares (Goodman) over every run.
    correction_from_influence(influence, reading: Sequence[complex],
        radius_mm: Mapping[int, float] | Sequence[float], spreads: Sequence[float] | None = None) -> Solution
    net_correction(corrections: Sequence[Weight], fitted: Sequence[Weight],
        radius_mm: Mapping[int, float] | None = None) -> list[Weight]
        what to add when ``fitted`` weights (e.g. a trial left on) stay on the rotor.
    CONDITION_WARN: float  (warning threshold on Solution.condition_number)

Trial weights (``trial``)
    suggest_trial_weight(rotor_mass_kg, speed_rpm, radius_mm, n_planes=1, grade=None) -> TrialSuggestion
        10 % rotor-weight force (common practice); with grade, at least 5x the allowance (ours)
        TrialSuggestion: mass_g, radius_mm, force_n, rule (sentence, marked common practice)
    rotor_weight_share_n(rotor_mass_kg, n_planes=1) -> float      m * g_n / planes
    trial_force_limit_n(rotor_mass_kg, n_planes=1) -> float       30 % of that share (ours): above
        it a job asks the user to confirm a weight
    check_trial_effect(reference: complex, trial: complex, spread: float,
        trial_spread: float | None = None) -> TrialVerdict
        TrialVerdict: ok: bool, ratio: float, message: str, suggested_scale: float
    TRIAL_MIN_RATIO: float

Uncertainty (``uncertainty``)
    Give ``Run.spreads`` (or ``spreads=`` to correction_from_influence) and the Solution carries
    mass_sd_g / angle_sd_deg (1 standard deviation, first-order GUM propagation, sensitivities in
    closed form: cost linear in the number of runs); a spread of math.inf means "scatter
    unknown" (equal weights, no uncertainty, a warning);
    propagate(func, y, sd, c0) -> (sd along, sd across) is the general tool (finite differences);
    propagate_jacobian(d_re, d_im, sd, c0) the same from known sensitivities.

Amplitude only (``four_run``; the fit is ``amplitude_fit``, the cycle's decisions ``four_run_checks``,
all offered by ``four_run``): maximum-likelihood fit of the amplitudes (linear solution as start)
    four_run(amplitudes: Sequence[float], trial_mass_g: float, trial_angles_deg: Sequence[float],
        radius_mm: float, plane: int = 1, correction_radius_mm: float | None = None) -> Solution
        amplitudes[0] is the reference run, then one per trial angle (3 or more angles).
    solve_amplitude_only(runs: Sequence[Run], radius_mm: float | None = None) -> Solution
        the same from Run objects whose readings are amplitudes (any trial masses and angles);
        every pickup is used; with spreads on every run, mass_sd_g / angle_sd_deg are given.
    four_run.amplitude_only(amplitudes (runs [x pickups]), trial_gmm, radius_mm, plane=1,
        amp_sd=None) -> Solution      (Solution.amplitude_fit: AmplitudeFit)
    four_run.fit_amplitudes(amplitudes, trial_gmm, amp_sd=None) -> AmplitudeFit
        .unbalance_gmm, .gains (|a| per pickup), .cov, .gain_sd(pickup), .chi2, .dof
    four_run.residual_upper_bound_gmm(amp, amp_sd, gain, gain_sd) -> float
        upper 95 % bound of a check run's residual unbalance (inf when it cannot be bounded)
        NOTE: a four-run Solution's influence holds |a| only (phase unknown, shown as 0) and its
        predicted reading is an amplitude: never save it as a machine's stored coefficients.
    four_run.pickup_gain(solution, pickup) -> (|a|, sd | None)
    The decisions of a cycle (pickups numbered from 0):
    four_run.loudest_pickup(reference_amps: Sequence[float]) -> int   (first on a tie)
    four_run.amplitude_sd(spread) -> float                              spread / sqrt(2)
    four_run.trial_effect_ratio(gain, trial_gmm, reference_amp) -> float   (inf for a 0 reference)
    four_run.trial_effect(gain, trial_gmm, reference_amp) -> TrialEffect(ratio, ok, suggested_scale)
        ok when ratio >= MIN_TRIAL_EFFECT_FRACTION (0.25)
    four_run.first_trial_look(reference_amp, trial_amp) -> FirstTrialLook | None
        FirstTrialLook(fraction, percent, large_enough, suggested_scale)
    four_run.residual_check(amp, amp_sd, gain, gain_sd, permissible_gmm) -> ResidualCheck
        ResidualCheck(residual_gmm, upper_gmm, uncertainty_gmm, passed)   passed: upper 95 % <= permissible
    four_run.plan_amplitude_only(reference_amp, amp_sd, gain, permissible_gmm, max_trial_gmm,
        relative_sd=0.0, max_angles=6) -> AmplitudePlan(trial_gmm, trial_angles_deg,
        expected_relative_error, rule)

Static / couple (``static_couple``)
    static_couple(corrections: Sequence[Weight], radius_mm: float | None = None) -> StaticCouple
        StaticCouple: static_gmm: complex, couple_gmm: complex, static: Weight (plane 0 = "both"),
        couple: tuple[Weight, Weight]
    static_couple.split_kind(static_gmm, couple_gmm) -> str   "mostly static" | "mostly couple" |
        "static + couple" (one part at least DOMINANT_RATIO = 2 times the other per plane; ours)

Tolerance (``tolerance``)
    permissible_unbalance(grade: float, mass_kg: float, speed_rpm: float, planes: int = 1,
        distances_mm: tuple[float, float] | None = None) -> Tolerance
        Tolerance: grade, mass_kg, speed_rpm, permissible_unbalance_gmm, permissible_eccentricity_um,
        per_plane_gmm: list[float], rule: str, warnings: list[str]
    residual_unbalance_gmm(influence, reading: Sequence[complex]) -> list[float]
    check_grade(influence, reading, tolerance: Tolerance) -> GradeCheck
        GradeCheck: residual_gmm: list[float], permissible_gmm: list[float], passed: bool,
        ratio: list[float] (residual / permissible)
    api_limit_gmm(journal_load_kg: float, speed_rpm: float) -> float   (4W/N family, per journal)
    STANDARD_GRADES: tuple[float, ...]

Units (``units``)
    g_to_oz, oz_to_g, mm_to_in, in_to_mm, gmm_to_ozin, ozin_to_gmm
    convert_1x(value: complex, from_unit: str, to_unit: str, speed_rpm: float) -> complex
        units: "g", "m/s2", "mm/s", "in/s", "um", "mil"  (1x only; phase follows the lag convention)

Safety (``forces``: the one home of F = m * r * w^2)
    centrifugal_force_n(mass_g, radius_mm, speed_rpm) -> float        F = m * r * w^2, checked
    forces.force_at_speed_n(mass_g, radius_mm, speed_rpm) -> float    the same, unchecked (0 g -> 0 N)
    forces.mass_for_force_g(force_n, radius_mm, speed_rpm) -> float   m = F / (r * w^2), unchecked
    forces.shaft_speed_rad_s(speed_rpm) -> float                      w = 2*pi*n/60
    check_speed_rpm(speed_rpm) -> float; check_mass_g(mass_g, what="mass") -> float;
    check_radius_mm(radius_mm) -> float    (raise BalancingError with the reason)

Grades (``grades``)
    grades.parse_grade("G6.3" | "G 6.3" | "6.3" | 6.3) -> 6.3;  grades.grade_label("6.3") -> "G6.3"
"""

from __future__ import annotations

from runtrue.balancing.forces import centrifugal_force_n, check_mass_g, check_radius_mm, check_speed_rpm
from runtrue.balancing.four_run import four_run, solve_amplitude_only
from runtrue.balancing.influence import CONDITION_WARN, correction_from_influence, net_correction, solve
from runtrue.balancing.model import BalancingError, Run, Solution, Weight
from runtrue.balancing.static_couple import StaticCouple, static_couple
from runtrue.balancing.tolerance import (
    STANDARD_GRADES,
    GradeCheck,
    Tolerance,
    api_limit_gmm,
    check_grade,
    permissible_unbalance,
    residual_unbalance_gmm,
)
from runtrue.balancing.trial import (
    TRIAL_MIN_RATIO,
    TrialSuggestion,
    TrialVerdict,
    check_trial_effect,
    suggest_trial_weight,
)
from runtrue.balancing.units import (
    convert_1x,
    g_to_oz,
    gmm_to_ozin,
    in_to_mm,
    mm_to_in,
    oz_to_g,
    ozin_to_gmm,
)
from runtrue.readings.units import amp_phase, phasor, wrap_deg

__all__ = [
    "BalancingError", "Run", "Solution", "Weight", "amp_phase", "phasor", "wrap_deg",
    "CONDITION_WARN", "correction_from_influence", "net_correction", "solve",
    "TRIAL_MIN_RATIO", "TrialSuggestion", "TrialVerdict", "check_trial_effect", "suggest_trial_weight",
    "four_run", "solve_amplitude_only", "StaticCouple", "static_couple",
    "STANDARD_GRADES", "GradeCheck", "Tolerance", "api_limit_gmm", "check_grade",
    "permissible_unbalance", "residual_unbalance_gmm",
    "convert_1x", "g_to_oz", "gmm_to_ozin", "in_to_mm", "mm_to_in", "oz_to_g", "ozin_to_gmm",
    "centrifugal_force_n", "check_mass_g", "check_radius_mm", "check_speed_rpm",
]
