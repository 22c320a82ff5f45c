"""The decisions of a four-run (amplitude-only) cycle: which pickup judges, whether the trial
weight moved the amplitude enough, whether the check run passes, and how large the next trial is.

Source: the four-run method of field balancing (Wowk, *Machinery Vibration: Balancing*,
McGraw-Hill 1995, "balancing without phase"; from memory): without phase, the trial must change
the amplitude clearly (common practice: by 20-30 % or more of the reference amplitude, else the
circles of the graphical method nearly coincide), and the residual unbalance after the
correction can only be estimated from the amplitude as ``U_res ~= V / |a|``.  The 95 % bounds use
the normal distribution's quantiles (two-sided 1.95996, one-sided 1.64485) and Bonferroni's
inequality for a pair of bounds.  The fit that supplies ``|a|`` and its uncertainty is
``runtrue.balancing.amplitude_fit``; the method is ``runtrue.balancing.four_run``.

Conventions: pickups are numbered from 0 here (list indices); amplitudes are in any one reading
unit, ``gain`` = ``|a|`` in that unit per g*mm.  A reading's ``spread`` is the standard deviation of
its vector (``runtrue.balancing.model``); its amplitude's standard deviation is
``spread / sqrt(2)`` (:func:`amplitude_sd`).  Every choice that is ours says so.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from runtrue.balancing.model import BalancingError
from runtrue.readings.units import phasor

#: The trial weight's effect (``|a| * |T|``) should reach this fraction of the reference amplitude;
#: below it the circles of the graphical method nearly coincide and the intersection is poorly
#: defined (common practice: the trial should change the amplitude by 20-30 % or more).
MIN_TRIAL_EFFECT_FRACTION = 0.25
#: The stated intervals are +/- this many standard deviations (two-sided 95 %, normal).
Z95 = 1.959963984540054
#: One-sided 95 % (the upper bound of a residual).
Z95_ONE_SIDED = 1.6448536269514722
#: After a weak-looking first trial run: the larger trial suggested is the one that would just
#: reach MIN_TRIAL_EFFECT_FRACTION, times this margin, the change counted as at least
#: FIRST_TRIAL_FLOOR, and at most FIRST_TRIAL_MAX_SCALE times the trial (our choices).
FIRST_TRIAL_MARGIN = 1.2
FIRST_TRIAL_FLOOR = 0.05
FIRST_TRIAL_MAX_SCALE = 4.0
#: A trial with no measurable effect at all: suggest this many times larger (our choice).
NO_EFFECT_SCALE = 4.0


def amplitude_sd(spread: float) -> float:
    """One standard deviation of a reading's amplitude from its spread (the standard deviation of
    the complex reading, ``E|error|^2 = spread^2``): ``spread / sqrt(2)``, the part of the error
    along the vector."""
    return spread / math.sqrt(2.0)


def loudest_pickup(reference_amps: Sequence[float]) -> int:
    """The pickup (0-based) with the largest reference amplitude, the first one on a tie: the
    pickup whose amplitude judges the trial's effect and the check run (our choice: the loudest
    reading is the one least swamped by its scatter)."""
    if not reference_amps:
        raise BalancingError("no reference amplitudes: give one per pickup")
    return max(range(len(reference_amps)), key=lambda i: reference_amps[i])


def trial_effect_ratio(gain: float, trial_gmm: float, reference_amp: float) -> float:
    """The trial weight's effect as a fraction of the reference amplitude: ``gain * trial_gmm /
    reference_amp`` (``|a|`` times the largest trial unbalance present in the cycle, g*mm);
    ``math.inf`` when the reference amplitude is 0."""
    return gain * trial_gmm / reference_amp if reference_amp > 0 else math.inf


@dataclass(frozen=True)
class TrialEffect:
    """Whether a cycle's trial moved the amplitude enough: ``ratio`` (see
    :func:`trial_effect_ratio`), ``ok`` when it is at least MIN_TRIAL_EFFECT_FRACTION, and
    ``suggested_scale``, the factor that would just reach it (NO_EFFECT_SCALE when the trial had
    no effect; below 1 when ``ok``)."""

    ratio: float
    ok: bool
    suggested_scale: float


def trial_effect(gain: float, trial_gmm: float, reference_amp: float) -> TrialEffect:
    """The verdict on a cycle's trial weight after its trial runs (see :class:`TrialEffect`)."""
    ratio = trial_effect_ratio(gain, trial_gmm, reference_amp)
    scale = MIN_TRIAL_EFFECT_FRACTION / ratio if ratio > 0 else NO_EFFECT_SCALE
    return TrialEffect(ratio, ratio >= MIN_TRIAL_EFFECT_FRACTION, scale)


@dataclass(frozen=True)
class FirstTrialLook:
    """The early look after the first trial run of a cycle: ``fraction`` = ``|A1 - A0| / A0``,
    ``percent`` the signed change ``(A1 / A0 - 1) * 100``, ``large_enough`` when the fraction
    reaches MIN_TRIAL_EFFECT_FRACTION (proven: ``|A1 - A0| <= |a T|``, so the trial's effect is at
    least that), and ``suggested_scale``, how much larger a trial to fit instead when it is not
    (the trial may also sit near 90 degrees from the heavy spot)."""

    fraction: float
    percent: float
    large_enough: bool
    suggested_scale: float


def first_trial_look(reference_amp: float, trial_amp: float) -> FirstTrialLook | None:
    """The early look after trial run 1 (see :class:`FirstTrialLook`); ``None`` when the
    reference amplitude is 0 (nothing to compare with)."""
    if reference_amp <= 0:
        return None
    frac = abs(trial_amp - reference_amp) / reference_amp
    pct = (trial_amp / reference_amp - 1.0) * 100.0
    ok = frac >= MIN_TRIAL_EFFECT_FRACTION
    scale = min(FIRST_TRIAL_MAX_SCALE, FIRST_TRIAL_MARGIN * MIN_TRIAL_EFFECT_FRACTION / max(frac, FIRST_TRIAL_FLOOR))
    return FirstTrialLook(frac, pct, ok, scale)


def residual_upper_bound_gmm(amp: float, amp_sd: float | None, gain: float, gain_sd: float | None) -> float:
    """Upper 95 % bound of the residual unbalance ``amp / gain`` (g*mm) read from a check run
    without phase: ``(amp + Z95*amp_sd) / (gain - Z95*gain_sd)``.  Each factor is bounded at 97.5 %
    one-sided, so the pair holds with at least 95 % (Bonferroni).  ``math.inf`` when the gain is
    not known to be above zero, or when either uncertainty is unknown (``None``): then no pass
    can be claimed.  The amplitude also holds any 1x vibration that is not unbalance, so the
    estimate errs on the safe side."""
    if amp_sd is None or gain_sd is None or not (math.isfinite(amp_sd) and math.isfinite(gain_sd)):
        return math.inf
    low = float(gain) - Z95 * float(gain_sd)
    if not low > 0:
        return math.inf
    return (float(amp) + Z95 * float(amp_sd)) / low


@dataclass(frozen=True)
class ResidualCheck:
    """A check run judged without phase: ``residual_gmm`` = amplitude / gain (the estimate),
    ``upper_gmm`` its upper 95 % bound (:func:`residual_upper_bound_gmm`), ``uncertainty_gmm`` =
    upper - residual, and ``passed`` when the upper bound is within the permissible residual."""

    residual_gmm: float
    upper_gmm: float
    uncertainty_gmm: float
    passed: bool


def residual_check(
    amp: float, amp_sd: float | None, gain: float, gain_sd: float | None, permissible_gmm: float
) -> ResidualCheck:
    """Whether a check run's amplitude ``amp`` (standard deviation ``amp_sd``) shows the rotor
    within ``permissible_gmm``, given the fitted ``gain`` = ``|a|`` and its standard deviation:
    passed when the upper 95 % bound of ``amp / gain`` is at most the permissible residual (the
    ISO 21940-11 allowance of the plane)."""
    residual = amp / gain
    upper = residual_upper_bound_gmm(amp, amp_sd, gain, gain_sd)
    return ResidualCheck(residual, upper, upper - residual, upper <= permissible_gmm)


def expected_relative_error(
    trial_ratio: float,
    noise_fraction: float,
    trial_angles_deg: Sequence[float] = (0.0, 120.0, 240.0),
    relative_sd: float = 0.0,
) -> float:
    """Expected error of the amplitude-only correction, relative to the unbalance: the RMS of
    ``sqrt(trace cov(u)) / |u|`` from the fit's covariance (the inverse Fisher information of the
    model, the same ``(J^T J)^-1`` the fit reports), averaged over the unbalance's unknown angle
    relative to the trials (every 10 deg).  ``trial_ratio`` = |trial unbalance| / |u|;
    ``noise_fraction`` = the amplitude's standard deviation / the reference amplitude (an absolute
    floor); ``relative_sd`` adds a part proportional to each amplitude (repeatability)."""
    if noise_fraction <= 0 and relative_sd <= 0:
        return 0.0  # exact readings: no error
    rho = float(trial_ratio)
    t = np.array([0j] + [phasor(rho, a) for a in trial_angles_deg])
    total = 0.0
    angles = np.radians(np.arange(0.0, 360.0, 10.0))
    for phi in angles:
        u = complex(math.cos(phi), math.sin(phi))
        z = u + t
        d = np.abs(z)
        sig = np.maximum(np.hypot(noise_fraction, relative_sd * d), 1e-12)
        dd = np.where(d > 0, d, 1.0)
        j = np.column_stack([z.real / dd / sig, z.imag / dd / sig, d / sig])
        try:
            cov = np.linalg.inv(j.T @ j)
        except np.linalg.LinAlgError:
            return math.inf
        total += float(cov[0, 0] + cov[1, 1])
    return math.sqrt(total / len(angles))


@dataclass(frozen=True)
class AmplitudePlan:
    """A planned amplitude-only cycle: the trial unbalance (g*mm), its angles, the expected
    relative error of the correction (RMS, 1 sd) and a sentence saying why."""

    trial_gmm: float
    trial_angles_deg: tuple[float, ...]
    expected_relative_error: float
    rule: str


def plan_amplitude_only(
    reference_amp: float,
    amp_sd: float,
    gain: float,
    permissible_gmm: float,
    max_trial_gmm: float,
    relative_sd: float = 0.0,
    max_angles: int = 6,
) -> AmplitudePlan:
    """Trial size and number of trial positions for a cycle, from the expected error.

    Known before the cycle: its reference amplitude and scatter, and ``gain`` = |a| from an
    earlier fit (so the unbalance is about ``reference_amp / gain``).  The trial is chosen from
    0.5 times that unbalance up to ``max_trial_gmm`` (a safety limit; at least 3 times it, if the
    limit allows) to make the expected error smallest; then trial positions are added (3, 4, ... equally spaced, up to
    ``max_angles``) until the expected 95 % error of the correction, as unbalance, is within half
    the permissible residual (our choice), or the limit is reached (the rule sentence says so)."""
    if not (reference_amp > 0 and gain > 0 and max_trial_gmm > 0 and permissible_gmm > 0):
        raise BalancingError("planning needs a reference amplitude, a gain, a permissible residual and a trial limit above 0")
    u_est = reference_amp / gain
    noise = max(float(amp_sd), 0.0) / reference_amp
    best: tuple[float, float] | None = None
    for ratio in np.geomspace(0.5, max(3.0, max_trial_gmm / u_est), 15):
        ratio = float(min(ratio, max_trial_gmm / u_est))
        err = expected_relative_error(ratio, noise, relative_sd=relative_sd)
        if best is None or err <= best[1] * (1 + 1e-9):  # ties: the larger trial
            best = (ratio, err)
    assert best is not None
    ratio = best[0]
    target = 0.5 * permissible_gmm / u_est  # relative error allowed at 95 %
    n = 3
    err = best[1]
    while n < max_angles and Z95 * err > target:
        n += 1
        err = expected_relative_error(ratio, noise, tuple(360.0 * k / n for k in range(n)), relative_sd)
    angles = tuple(360.0 * k / n for k in range(n))
    rule = (
        f"Trial unbalance {ratio:.2g} times the estimated unbalance ({u_est:.3g} g*mm), at {n} positions "
        f"{360.0 / n:g} deg apart: expected error of the correction {err:.1%} (1 sd)"
    )
    if Z95 * err > target:
        rule += (
            f"; even so its 95 % error ({Z95 * err * u_est:.3g} g*mm) exceeds half the permissible "
            f"{permissible_gmm:.3g} g*mm: average more revolutions for steadier readings"
        )
    return AmplitudePlan(ratio * u_est, angles, err, rule + ".")
