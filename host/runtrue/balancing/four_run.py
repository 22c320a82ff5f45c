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
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from runtrue.balancing.forces import check_mass_g, check_radius_mm
from runtrue.balancing.model import BalancingError, Solution, Weight, phasor

#: Warn when the trial weight's effect is smaller than this fraction of the reference amplitude.
#: The circles of the graphical method then nearly coincide and the intersection is poorly
#: defined (common practice: the trial should change the amplitude by 20-30 % or more).
MIN_TRIAL_EFFECT_FRACTION = 0.25
#: Warn when the fitted model leaves more than this fraction of the reference amplitude after
#: correction: with consistent data it leaves nothing (our choice).
INCONSISTENT_FRACTION = 0.3


def amplitude_only(
    amplitudes: Sequence[float],
    trial_gmm: Sequence[complex],
    radius_mm: float,
    plane: int = 1,
) -> Solution:
    """General amplitude-only solution: ``amplitudes[k]`` measured with trial unbalance
    ``trial_gmm[k]`` (g*mm, weight convention; 0 for the reference run) present.  The correction
    is expressed at ``radius_mm``.  Needs at least three distinct non-zero trial positions."""
    try:
        with np.errstate(all="ignore"):
            sol = _amplitude_only(amplitudes, trial_gmm, radius_mm, plane)
    except np.linalg.LinAlgError:
        raise BalancingError("the amplitudes could not be solved (numbers out of range)") from None
    values = [sol.corrections[0].mass_g, sol.corrections[0].angle_deg, abs(sol.predicted[0])]
    if not all(math.isfinite(v) for v in values):
        raise BalancingError("the numbers are out of range (too large or too small); check units and readings")
    return sol


def _amplitude_only(
    amplitudes: Sequence[float],
    trial_gmm: Sequence[complex],
    radius_mm: float,
    plane: int,
) -> Solution:
    v = np.array([float(x) for x in amplitudes])
    t = np.array([complex(z) for z in trial_gmm])
    if v.shape != t.shape:
        raise BalancingError("one amplitude per run, and one trial position per run")
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise BalancingError("amplitudes must be finite numbers >= 0; re-take the bad reading")
    r_mm = check_radius_mm(radius_mm)
    if len(v) < 4:
        raise BalancingError(
            f"{len(v)} runs; the amplitude-only method needs the reference run and the trial weight "
            "at three or more angles (four runs)"
        )
    x = np.column_stack([np.ones(len(v)), np.abs(t) ** 2, 2.0 * t.real, 2.0 * t.imag])
    sv = np.linalg.svd(x / np.maximum(np.linalg.norm(x, axis=0), 1e-300), compute_uv=False)
    if sv[-1] < 1e-9 * sv[0]:
        raise BalancingError(
            "the trial positions do not determine the unbalance; place the trial weight at three or "
            "more different angles (120 deg apart is best) and keep a reference run without it"
        )
    c0, s, qr, qi = np.linalg.lstsq(x, v**2, rcond=None)[0]
    warnings: list[str] = []
    if not (s > 0 and math.isfinite(s)):
        raise BalancingError(
            "the amplitudes are inconsistent with a linear machine (the trial weight appears to have "
            "no effect); use a larger trial weight and steadier readings"
        )
    u = complex(qr, qi) / s
    a_mag = math.sqrt(s)
    resid2 = x @ np.array([c0, s, qr, qi]) - v**2
    dof = len(v) - 4
    fit_rms = float(np.sqrt(np.mean(np.abs(resid2)))) if dof > 0 else 0.0
    t_max = float(np.max(np.abs(t)))
    v0 = float(v[0]) if v[0] > 0 else float(np.max(v))
    if v0 > 0 and a_mag * t_max < MIN_TRIAL_EFFECT_FRACTION * v0:
        warnings.append(
            f"The trial weight's effect ({a_mag * t_max:.3g}) is under {MIN_TRIAL_EFFECT_FRACTION:.0%} of the "
            f"reference amplitude ({v0:.3g}): the amplitude-only solution is poorly defined. Use a trial "
            f"weight about {MIN_TRIAL_EFFECT_FRACTION * v0 / max(a_mag * t_max, 1e-300):.1f} times larger."
        )
    residual2 = c0 - s * abs(u) ** 2
    predicted_amp = math.sqrt(max(float(residual2), 0.0))
    if v0 > 0 and predicted_amp > INCONSISTENT_FRACTION * v0:
        warnings.append(
            f"The amplitudes do not fit one linear machine well: the model leaves {predicted_amp:.3g} "
            f"of the reference {v0:.3g} after correction. Check that the readings were steady, the "
            "speed the same in every run, and the trial angles logged correctly."
        )
    warnings.append(
        "Amplitude-only method: the influence coefficient's phase and the predicted reading's "
        "phase are unknown; confirm the result with a check run."
    )
    correction = Weight.from_unbalance(plane, -u, r_mm)
    return Solution(
        corrections=[correction],
        influence=np.array([[complex(a_mag, 0.0)]]),
        reference=[complex(float(v[0]), 0.0)],
        predicted=[complex(predicted_amp, 0.0)],
        warnings=warnings,
        condition_number=1.0,
        mass_sd_g=None,
        angle_sd_deg=None,
        fit_rms=fit_rms,
        method="four-run",
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


def solve_amplitude_only(runs: Sequence, radius_mm: float | None = None) -> Solution:
    """Amplitude-only solution from :class:`~runtrue.balancing.model.Run` objects whose readings
    are amplitudes (floats): ``runs[0]`` the reference, every later run one trial weight in one
    and the same plane (moved to three or more angles).  With several pickups each is solved
    alone and the pickup with the largest reference amplitude is used (a warning says so)."""
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
    if n_pickups == 1:
        return amplitude_only([float(abs(run.readings[0])) for run in runs], t, r, plane)
    refs = [float(abs(z)) for z in runs[0].readings]
    best = int(np.argmax(refs))
    sol = amplitude_only([float(abs(run.readings[best])) for run in runs], t, r, plane)
    sol.warnings.insert(
        0,
        f"Amplitude-only method uses one pickup: pickup {best + 1}, which has the largest reference "
        "amplitude; the others were not used.",
    )
    return sol
