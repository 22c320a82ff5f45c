"""Amplitude-only balancing (the four-run method) for rotors with no usable reference mark.

Source: the four-run (reference + trial weight at three angles) method as taught in field
balancing texts, e.g. Wowk, *Machinery Vibration: Balancing*, McGraw-Hill 1995, "balancing
without phase"; also Rao, *Mechanical Vibrations*, balancing of rotating machines.  The usual
graphical solution (three circles about the points 120 deg apart) is replaced here by the
equivalent algebra, solved by linear least squares so that any number (>= 3) of trial angles,
at any spacing, can be used.

Derivation.  With one plane, the reading at the pickup is ``a * (u + T)``: ``a`` the (unknown,
complex) influence coefficient, ``u`` the rotor's unbalance expressed in the weight convention
(g*mm), ``T`` the trial unbalance ``m * r * e^{j*theta}``.  Only amplitudes ``V = |a| * |u + T|``
are measured.  Squaring::

    V_k^2 = s*|u|^2 + s*|T_k|^2 + 2*Re(q * conj(T_k)),   s = |a|^2,  q = s*u

is LINEAR in the four real unknowns ``c0 = s|u|^2``, ``s``, ``Re q``, ``Im q``.  The reference
run (T = 0) and each trial run give one equation.  Then ``u = q / s``, the correction is
``-u`` and ``|a| = sqrt(s)``.  The phase of ``a`` cannot be found without a phase reference (and
is not needed).

That linear solution is only the starting point: the estimate is the maximum-likelihood fit of
the amplitudes themselves, every pickup at once, each weighted by its noise
(``runtrue.balancing.amplitude_fit``, where its sources are).  The decisions a four-run cycle
takes on the way (which pickup judges, whether the trial moved the amplitude enough, whether the
check run passes, the next trial's size) are ``runtrue.balancing.four_run_checks``; this module
re-exports them, so ``runtrue.balancing.four_run`` offers the whole method.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import numpy.typing as npt

from runtrue.balancing.amplitude_fit import AmplitudeFit, along_across_sd, fit_amplitudes
from runtrue.balancing.forces import check_mass_g, check_radius_mm
from runtrue.balancing.four_run_checks import (
    MIN_TRIAL_EFFECT_FRACTION,
    Z95,
    Z95_ONE_SIDED,
    AmplitudePlan,
    FirstTrialLook,
    ResidualCheck,
    TrialEffect,
    amplitude_sd,
    expected_relative_error,
    first_trial_look,
    loudest_pickup,
    plan_amplitude_only,
    residual_check,
    residual_upper_bound_gmm,
    trial_effect,
    trial_effect_ratio,
)
from runtrue.balancing.model import BalancingError, Run, Solution, Weight
from runtrue.readings.units import phasor

#: Warn when the correction is this uncertain (1 sd): relative mass, or degrees (as the phase method).
MASS_SD_WARN = 0.2
ANGLE_SD_WARN_DEG = 10.0
#: Warn when the fitted model leaves more than this fraction of the reference amplitude after
#: correction: with consistent data it leaves nothing (our choice).
INCONSISTENT_FRACTION = 0.3


def amplitude_only(
    amplitudes: npt.ArrayLike,
    trial_gmm: Sequence[complex],
    radius_mm: float,
    plane: int = 1,
    amp_sd: npt.ArrayLike | None = None,
) -> Solution:
    """General amplitude-only solution: ``amplitudes[k]`` measured with trial unbalance
    ``trial_gmm[k]`` (g*mm, weight convention; 0 for the reference run) present; one value per
    run, or one row per run with one amplitude per pickup (all pickups are used, each weighted
    by its noise).  ``amp_sd``: the standard deviation of each amplitude (same shape); with it
    the Solution carries ``mass_sd_g``/``angle_sd_deg`` (95 % intervals: +/- ``Z95`` of them).
    The correction is expressed at ``radius_mm``.  Needs at least three distinct non-zero trial
    positions."""
    try:
        with np.errstate(all="ignore"):
            sol = _amplitude_only(amplitudes, trial_gmm, radius_mm, plane, amp_sd)
    except np.linalg.LinAlgError:
        raise BalancingError("the amplitudes could not be solved (numbers out of range)") from None
    values = [sol.corrections[0].mass_g, sol.corrections[0].angle_deg, *(abs(z) for z in sol.influence[:, 0])]
    if not all(math.isfinite(v) for v in values):
        raise BalancingError("the numbers are out of range (too large or too small); check units and readings")
    return sol


def _amplitude_only(
    amplitudes: npt.ArrayLike,
    trial_gmm: Sequence[complex],
    radius_mm: float,
    plane: int,
    amp_sd: npt.ArrayLike | None,
) -> Solution:
    v = np.array(amplitudes, dtype=float)
    if v.ndim == 1:
        v = v[:, None]
    t = np.array([complex(z) for z in trial_gmm])
    if v.ndim != 2 or v.shape[0] != t.shape[0]:
        raise BalancingError("one amplitude per run, and one trial position per run")
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise BalancingError("amplitudes must be finite numbers >= 0; re-take the bad reading")
    r_mm = check_radius_mm(radius_mm)
    if len(v) < 4:
        raise BalancingError(
            f"{len(v)} runs; the amplitude-only method needs the reference run and the trial weight "
            "at three or more angles (four runs)"
        )
    x = np.column_stack([np.ones(len(t)), np.abs(t) ** 2, 2.0 * t.real, 2.0 * t.imag])
    sv = np.linalg.svd(x / np.maximum(np.linalg.norm(x, axis=0), 1e-300), compute_uv=False)
    if sv[-1] < 1e-9 * sv[0]:
        raise BalancingError(
            "the trial positions do not determine the unbalance; place the trial weight at three or "
            "more different angles (120 deg apart is best) and keep a reference run without it"
        )
    if not np.any(v[1:] != v[0]):
        raise BalancingError(
            "the amplitudes are inconsistent with a linear machine (the trial weight appears to have "
            "no effect); use a larger trial weight and steadier readings"
        )
    fit = fit_amplitudes(v, t, amp_sd)
    gains = fit.gains
    if not np.any(gains > 0):
        raise BalancingError(
            "the amplitudes are inconsistent with a linear machine (the trial weight appears to have "
            "no effect); use a larger trial weight and steadier readings"
        )
    u = fit.unbalance_gmm
    warnings: list[str] = []
    t_max = float(np.max(np.abs(t)))
    loud = loudest_pickup([float(x) for x in v[0]])
    a_mag = float(gains[loud])
    v0 = float(v[0, loud]) if v[0, loud] > 0 else float(np.max(v[:, loud]))
    if v0 > 0 and a_mag * t_max < MIN_TRIAL_EFFECT_FRACTION * v0:
        warnings.append(
            f"The trial weight's effect ({a_mag * t_max:.3g}) is under {MIN_TRIAL_EFFECT_FRACTION:.0%} of the "
            f"reference amplitude ({v0:.3g}): the amplitude-only solution is poorly defined. Use a trial "
            f"weight about {MIN_TRIAL_EFFECT_FRACTION * v0 / max(a_mag * t_max, 1e-300):.1f} times larger."
        )
    model = gains[None, :] * np.abs(u + t)[:, None]
    misfit = float(np.sqrt(np.mean((model - v) ** 2)))
    fit_rms = misfit if fit.dof > 0 else 0.0
    if fit.cov is not None and fit.dof > 0:
        chi = math.sqrt(fit.chi2 / fit.dof)
        if chi > 3.0:
            warnings.append(
                f"The amplitudes disagree with one linear machine by {chi:.1f} times their own scatter: check "
                "that the readings were steady, the speed the same in every run, and the trial angles logged "
                "correctly."
            )
    elif v0 > 0 and fit.dof > 0 and misfit > INCONSISTENT_FRACTION * v0:
        warnings.append(
            f"The amplitudes do not fit one linear machine well (misfit {misfit:.3g} against the reference "
            f"{v0:.3g}). Check that the readings were steady, the speed the same in every run, and the "
            "trial angles logged correctly."
        )
    warnings.append(
        "Amplitude-only method: the influence coefficient's phase and the predicted reading's "
        "phase are unknown; confirm the result with a check run."
    )
    correction = Weight.from_unbalance(plane, -u, r_mm)
    mass_sd = angle_sd = None
    if fit.cov is not None:
        along, across = along_across_sd(-u, fit.cov[:2, :2])
        mass_sd = [along / r_mm]
        angle_sd = [math.degrees(across / abs(u)) if abs(u) > 0 else 180.0]
        m = correction.mass_g
        if m > 0 and (mass_sd[0] > MASS_SD_WARN * m or angle_sd[0] > ANGLE_SD_WARN_DEG):
            warnings.append(
                f"The correction is uncertain (mass {m:.3g} g +/- {mass_sd[0]:.2g} g, angle +/- "
                f"{angle_sd[0]:.0f} deg, 1 standard deviation) because of the readings' scatter; average "
                "more revolutions, use a larger trial weight or add trial positions."
            )
    return Solution(
        corrections=[correction],
        influence=np.array([[complex(float(g), 0.0)] for g in gains]),
        reference=[complex(float(x), 0.0) for x in v[0]],
        predicted=[0j for _ in gains],
        warnings=warnings,
        condition_number=1.0,
        mass_sd_g=mass_sd,
        angle_sd_deg=angle_sd,
        fit_rms=fit_rms,
        method="four-run",
        amplitude_fit=fit,
    )


def four_run(
    amplitudes: Sequence[float],
    trial_mass_g: float,
    trial_angles_deg: Sequence[float],
    radius_mm: float,
    plane: int = 1,
    correction_radius_mm: float | None = None,
) -> Solution:
    """The four-run method: ``amplitudes[0]`` without the trial weight, then one amplitude per
    entry of ``trial_angles_deg`` with the trial weight (``trial_mass_g`` at ``radius_mm``) at
    that angle (classically 0, 120, 240).  Correction at ``correction_radius_mm`` (default the
    trial radius).  ``Solution.influence`` holds |a| only (phase unknown)."""
    m = check_mass_g(trial_mass_g, "trial weight mass")
    r = check_radius_mm(radius_mm)
    if len(amplitudes) != len(trial_angles_deg) + 1:
        raise BalancingError(
            f"{len(amplitudes)} amplitude(s) for {len(trial_angles_deg)} trial angle(s); give the "
            "reference amplitude first, then one per trial angle"
        )
    for ang in trial_angles_deg:
        if not math.isfinite(float(ang)):
            raise BalancingError("trial angles must be finite numbers of degrees")
    t = [0j] + [phasor(m * r, float(ang)) for ang in trial_angles_deg]
    return amplitude_only(amplitudes, t, r if correction_radius_mm is None else correction_radius_mm, plane)


def solve_amplitude_only(runs: Sequence[Run], radius_mm: float | None = None) -> Solution:
    """Amplitude-only solution from :class:`~runtrue.balancing.model.Run` objects whose readings
    are amplitudes (floats): ``runs[0]`` the reference, every later run one trial weight in one
    and the same plane (moved to three or more angles).  Every pickup is used (one gain each, one
    common unbalance), weighted by its scatter when every run has ``spreads`` (a reading's spread
    is that of its vector, so its amplitude's standard deviation is spread / sqrt(2))."""
    if len(runs) < 4:
        raise BalancingError(
            f"{len(runs)} runs; without phase the reference run and the trial weight at three or more "
            "angles are needed (four runs)"
        )
    if runs[0].weights:
        raise BalancingError("the first run is the reference and carries no weights")
    planes = {w.plane for run in runs[1:] for w in run.weights}
    if len(planes) != 1 or any(len(run.weights) != 1 for run in runs[1:]):
        raise BalancingError(
            "without phase, every run after the reference must carry exactly one trial weight, "
            "in one and the same plane (the amplitude-only method balances one plane)"
        )
    plane = planes.pop()
    for k, run in enumerate(runs, start=1):
        w = run.weights[0] if run.weights else None
        if w is not None:
            check_mass_g(w.mass_g, f"run {k} weight mass")
            check_radius_mm(w.radius_mm)
    t = [0j] + [run.weights[0].unbalance_gmm for run in runs[1:]]
    r = runs[1].weights[0].radius_mm if radius_mm is None else radius_mm
    n_pickups = len(runs[0].readings)
    if any(len(run.readings) != n_pickups for run in runs):
        raise BalancingError("give one reading per pickup in every run, in the same order")
    amps = [[float(abs(z)) for z in run.readings] for run in runs]
    sd = None
    spreads = [run.spreads for run in runs if run.spreads is not None]
    if len(spreads) == len(runs):
        if any(len(run_spreads) != n_pickups for run_spreads in spreads):
            raise BalancingError("give one spread per reading in every run")
        sd = [[amplitude_sd(float(s)) for s in run_spreads] for run_spreads in spreads]
    return amplitude_only(amps, t, r, plane, amp_sd=sd)


def pickup_gain(solution: Solution, pickup: int) -> tuple[float, float | None]:
    """``(|a|, its standard deviation)`` of ``pickup`` (0-based) in an amplitude-only solution:
    the size of its influence coefficient (reading unit per g*mm) and one standard deviation
    (``None`` when the readings' scatter is unknown)."""
    gain = float(abs(solution.influence[pickup, 0]))
    fit = solution.amplitude_fit
    return gain, (fit.gain_sd(pickup) if isinstance(fit, AmplitudeFit) else None)


__all__ = [
    "ANGLE_SD_WARN_DEG", "INCONSISTENT_FRACTION", "MASS_SD_WARN", "MIN_TRIAL_EFFECT_FRACTION", "Z95",
    "Z95_ONE_SIDED", "AmplitudeFit", "AmplitudePlan", "FirstTrialLook", "ResidualCheck", "TrialEffect",
    "along_across_sd", "amplitude_only", "amplitude_sd", "expected_relative_error",
    "first_trial_look", "fit_amplitudes", "four_run", "loudest_pickup", "pickup_gain",
    "plan_amplitude_only", "residual_check", "residual_upper_bound_gmm", "solve_amplitude_only",
    "trial_effect", "trial_effect_ratio",
]
