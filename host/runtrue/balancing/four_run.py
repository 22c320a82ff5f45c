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

That linear solution has one flaw: squaring makes the noise depend on the amplitude, and with
four runs the four unknowns fit the four equations exactly, so inconsistent data go into the
free term ``c0`` unseen.  It is therefore only the STARTING POINT.  The estimate used is the
maximum-likelihood fit of the amplitudes themselves (Gaussian errors, standard deviation
``sigma[k, i]`` per run and pickup)::

    V[k, i] = g_i * |u + T_k| + e[k, i],     g_i = |a_i|  (one gain per pickup, one common u)

which keeps ``c0 = g^2 |u|^2`` tied to ``u`` and uses every pickup at once, each weighted by its
noise.  It is a nonlinear least-squares problem in ``2 + pickups`` real unknowns, solved by
Levenberg-Marquardt (K. Levenberg, *Q. Appl. Math.* 2, 1944; D. W. Marquardt, *J. SIAM* 11(2),
1963; as in Nocedal & Wright, *Numerical Optimization*, 2nd ed., Springer 2006, sec. 10.3),
started from the linear solution and from a coarse grid of ``u`` on which each gain has its
closed-form least-squares value (variable projection: Golub & Pereyra, *SIAM J. Numer. Anal.*
10(2), 1973), so a poor linear start cannot trap it.  The uncertainty is the usual asymptotic
covariance of a maximum-likelihood estimate, the inverse of the observed information (the
Hessian of half the sum of squared normalised residuals at the optimum: ``J^T J`` plus the
residuals times their second derivatives; ``(J^T J)^-1`` alone when that is not positive
definite; Nocedal & Wright sec. 10.3; GUM, JCGM 100:2008, 5.1), when the readings' scatter is
known; it is checked by simulation in the tests (95 % intervals).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from runtrue.balancing.forces import check_mass_g, check_radius_mm
from runtrue.balancing.model import BalancingError, Solution, Weight
from runtrue.readings.units import phasor

#: Warn when the correction is this uncertain (1 sd): relative mass, or degrees (as the phase method).
MASS_SD_WARN = 0.2
ANGLE_SD_WARN_DEG = 10.0

#: Warn when the trial weight's effect is smaller than this fraction of the reference amplitude.
#: The circles of the graphical method then nearly coincide and the intersection is poorly
#: defined (common practice: the trial should change the amplitude by 20-30 % or more).
MIN_TRIAL_EFFECT_FRACTION = 0.25
#: Warn when the fitted model leaves more than this fraction of the reference amplitude after
#: correction: with consistent data it leaves nothing (our choice).
INCONSISTENT_FRACTION = 0.3


#: The stated intervals are +/- this many standard deviations (two-sided 95 %, normal).
Z95 = 1.959963984540054
#: One-sided 95 % (the upper bound of a residual).
Z95_ONE_SIDED = 1.6448536269514722
#: Levenberg-Marquardt: iteration cap and relative step size at which it stops.
LM_MAX_ITER = 200
LM_TOL = 1e-12
#: Levenberg-Marquardt is run from this many distinct starting points (the best by profiled cost).
MAX_STARTS = 3


@dataclass
class AmplitudeFit:
    """The maximum-likelihood amplitude-only fit.

    ``unbalance_gmm``: the rotor's unbalance ``u`` (the correction is ``-u``); ``gains``: ``|a_i|``
    per pickup (reading unit per g*mm); ``cov``: covariance of ``(Re u, Im u, g_1, ..., g_P)``
    (``None`` when the readings' scatter is unknown); ``chi2`` the weighted sum of squared
    residuals at the optimum (in units of each reading's sd when it is known); ``dof`` runs x
    pickups minus unknowns; ``converged``; ``linear_unbalance_gmm`` the linear starting point
    (``None`` when the linear solution failed)."""

    unbalance_gmm: complex
    gains: np.ndarray
    cov: np.ndarray | None
    chi2: float
    dof: int
    converged: bool
    linear_unbalance_gmm: complex | None

    @property
    def unbalance_cov(self) -> np.ndarray | None:
        """2x2 covariance of (Re u, Im u), g*mm^2."""
        return None if self.cov is None else self.cov[:2, :2]

    def gain_sd(self, pickup: int) -> float | None:
        """One standard deviation of ``gains[pickup]`` (None when the scatter is unknown)."""
        if self.cov is None:
            return None
        return math.sqrt(max(float(self.cov[2 + pickup, 2 + pickup]), 0.0))


def _linear_start(v: np.ndarray, t: np.ndarray) -> tuple[complex, float] | None:
    """The linear least-squares solution on V^2 for one pickup: (u, |a|), or None if it fails."""
    x = np.column_stack([np.ones(len(v)), np.abs(t) ** 2, 2.0 * t.real, 2.0 * t.imag])
    try:
        c0, s, qr, qi = np.linalg.lstsq(x, v**2, rcond=None)[0]
    except np.linalg.LinAlgError:
        return None
    if not (s > 0 and math.isfinite(s)) or not (math.isfinite(qr) and math.isfinite(qi)):
        return None
    return complex(qr, qi) / s, math.sqrt(s)


def _profile_gains(d: np.ndarray, v: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """For distances ``d`` (candidates x runs) the best gains per pickup (closed form, >= 0) and
    the cost.  ``v``, ``w``: runs x pickups (amplitudes, 1/sigma^2)."""
    num = np.einsum("ck,ki->ci", d, v * w)
    den = np.einsum("ck,ki->ci", d * d, w)
    g = np.where(den > 0, np.maximum(num, 0.0) / np.where(den > 0, den, 1.0), 0.0)
    res = g[:, None, :] * d[:, :, None] - v[None, :, :]
    cost = np.einsum("cki,ki->c", res * res, w)
    return g, cost


def _lm(p0: np.ndarray, t: np.ndarray, v: np.ndarray, sig: np.ndarray) -> tuple[np.ndarray, float, bool]:
    """Levenberg-Marquardt (Marquardt's diagonal scaling) on the normalised residuals
    ``(g_i |u + T_k| - V_ki) / sigma_ki``; returns (parameters, cost, converged)."""
    n_runs, n_pick = v.shape

    def resid(p: np.ndarray) -> np.ndarray:
        d = np.abs(complex(p[0], p[1]) + t)
        return ((p[2:][None, :] * d[:, None] - v) / sig).ravel()

    def jac(p: np.ndarray) -> np.ndarray:
        z = complex(p[0], p[1]) + t
        d = np.abs(z)
        dd = np.where(d > 0, d, 1.0)
        j = np.zeros((n_runs, n_pick, 2 + n_pick))
        j[:, :, 0] = (p[2:][None, :] * (z.real / dd)[:, None]) / sig
        j[:, :, 1] = (p[2:][None, :] * (z.imag / dd)[:, None]) / sig
        for i in range(n_pick):
            j[:, i, 2 + i] = d / sig[:, i]
        return j.reshape(n_runs * n_pick, 2 + n_pick)

    p = p0.astype(float).copy()
    r = resid(p)
    cost = float(r @ r)
    lam = 1e-3
    converged = False
    for _ in range(LM_MAX_ITER):
        j = jac(p)
        jtj = j.T @ j
        grad = j.T @ r
        diag = np.maximum(np.diag(jtj), 1e-300)
        improved = False
        for _ in range(30):
            try:
                step = np.linalg.solve(jtj + lam * np.diag(diag), -grad)
            except np.linalg.LinAlgError:
                lam *= 10.0
                continue
            pn = p + step
            pn[2:] = np.maximum(pn[2:], 0.0)
            rn = resid(pn)
            cn = float(rn @ rn)
            if math.isfinite(cn) and cn <= cost:
                small = np.all(np.abs(step) <= LM_TOL * (np.abs(p) + LM_TOL)) or cost - cn <= LM_TOL * cost
                p, r, cost = pn, rn, cn
                lam = max(lam / 10.0, 1e-12)
                improved = True
                if small:
                    converged = True
                break
            lam *= 10.0
        if not improved or converged:
            converged = converged or not improved
            break
    return p, cost, converged


def fit_amplitudes(
    amplitudes: np.ndarray | Sequence[float] | Sequence[Sequence[float]],
    trial_gmm: Sequence[complex],
    amp_sd: np.ndarray | Sequence | None = None,
) -> AmplitudeFit:
    """Maximum-likelihood fit of ``V[k, i] = g_i |u + T_k|`` (see the module docstring).

    ``amplitudes``: runs x pickups (or one value per run for one pickup); ``trial_gmm[k]`` the
    trial unbalance present in run k (0 for the reference run); ``amp_sd``: the standard
    deviation of each amplitude (same shape).  Without ``amp_sd`` every reading gets a relative
    weight (sd proportional to the amplitude, floored at 2 % of the pickup's largest reading) and
    no covariance is given."""
    v = np.array(amplitudes, dtype=float)
    if v.ndim == 1:
        v = v[:, None]
    t = np.array([complex(z) for z in trial_gmm])
    if v.ndim != 2 or v.shape[0] != t.shape[0]:
        raise BalancingError("one amplitude per run (and pickup), and one trial position per run")
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise BalancingError("amplitudes must be finite numbers >= 0; re-take the bad reading")
    known = amp_sd is not None
    if known:
        sig = np.array(amp_sd, dtype=float).reshape(v.shape)
        if np.any(np.isnan(sig)) or np.any(sig < 0):
            raise BalancingError("spreads must be numbers >= 0")
        if not np.all(np.isfinite(sig)):
            known = False
    exact = False  # every spread exactly 0: exact readings, a zero covariance
    if known:
        pos = sig[sig > 0]
        if pos.size == 0:
            known, exact = False, True
        else:
            sig = np.where(sig > 0, sig, pos.min())
    if not known:
        peak = np.maximum(v.max(axis=0), 1e-300)
        sig = np.maximum(v, 0.02 * peak[None, :])
    w = 1.0 / sig**2
    n_runs, n_pick = v.shape
    # Starting points: the linear solution of each pickup, and a grid of u (gains profiled out).
    starts: list[complex] = []
    lin: complex | None = None
    loud = int(np.argmax(v[0]))
    for i in [loud] + [i for i in range(n_pick) if i != loud]:
        ls = _linear_start(v[:, i], t)
        if ls is not None:
            starts.append(ls[0])
            if lin is None:
                lin = ls[0]
    t_scale = float(np.max(np.abs(t)))
    mags = t_scale * np.logspace(-2.0, 2.0, 33)
    angs = np.exp(1j * np.radians(np.arange(0.0, 360.0, 7.5)))
    grid = (mags[:, None] * angs[None, :]).ravel()
    cands = np.concatenate([np.array(starts, dtype=complex), grid])
    d = np.abs(cands[:, None] + t[None, :])
    g, cost = _profile_gains(d, v, w)
    # Refine the MAX_STARTS best distinct candidates (linear starts and grid points ranked alike
    # by their profiled cost).
    order = np.argsort(cost)
    picked: list[int] = []
    for c in order:
        if len(picked) >= MAX_STARTS:
            break
        if all(abs(cands[c] - cands[q]) > 0.05 * t_scale for q in picked):
            picked.append(int(c))
    best: tuple[float, np.ndarray, bool] | None = None
    for c in picked:
        p0 = np.concatenate([[cands[c].real, cands[c].imag], g[c]])
        p, cst, conv = _lm(p0, t, v, sig)
        if np.all(np.isfinite(p)) and (best is None or cst < best[0]):
            best = (cst, p, conv)
    if best is None:
        raise BalancingError("the amplitudes could not be solved (numbers out of range)")
    cst, p, conv = best
    cov = None
    if known:
        z = complex(p[0], p[1]) + t
        dist = np.abs(z)
        dd = np.where(dist > 0, dist, 1.0)
        j = np.zeros((n_runs, n_pick, 2 + n_pick))
        j[:, :, 0] = (p[2:][None, :] * (z.real / dd)[:, None]) / sig
        j[:, :, 1] = (p[2:][None, :] * (z.imag / dd)[:, None]) / sig
        for i in range(n_pick):
            j[:, i, 2 + i] = dist / sig[:, i]
        jm = j.reshape(n_runs * n_pick, 2 + n_pick)
        # Observed information: J^T J plus the residuals times their second derivatives
        # (d^2|z|/du^2 = (I - n n^T)/|z|, n = z/|z|; d^2/du dg_i = n), which the curvature of
        # |u + T| near a small amplitude makes count; Gauss-Newton's J^T J alone when that is
        # not positive definite.
        res = (p[2:][None, :] * dist[:, None] - v) / sig  # runs x pickups
        nz = np.stack([z.real / dd, z.imag / dd], axis=1)  # runs x 2
        proj = np.eye(2)[None, :, :] - nz[:, :, None] * nz[:, None, :]
        info_gn = jm.T @ jm
        info = info_gn.copy()
        info[:2, :2] += np.einsum("k,kab->ab", np.sum(res * p[2:][None, :] / sig, axis=1) / dd, proj)
        for i in range(n_pick):
            cross = np.sum((res[:, i] / sig[:, i])[:, None] * nz, axis=0)
            info[:2, 2 + i] += cross
            info[2 + i, :2] += cross
        # Columns scaled to unit length first: u (g*mm) and the gains (reading per g*mm) differ
        # by many orders of magnitude, which would otherwise swamp the small singular values.
        scale = np.sqrt(np.abs(np.diag(info_gn)))
        scale = np.where(scale > 0, scale, 1.0)
        for m in (info, info_gn):
            ms = m / np.outer(scale, scale)
            try:
                if np.min(np.linalg.eigvalsh(ms)) <= 1e-12 * np.max(np.abs(ms)):
                    continue
                cov = np.linalg.inv(ms) / np.outer(scale, scale)
                break
            except np.linalg.LinAlgError:
                continue
        if cov is None:
            try:
                cov = np.linalg.pinv(info_gn / np.outer(scale, scale)) / np.outer(scale, scale)
            except np.linalg.LinAlgError:
                cov = None
    if exact:
        cov = np.zeros((2 + n_pick, 2 + n_pick))
    return AmplitudeFit(
        unbalance_gmm=complex(p[0], p[1]),
        gains=np.array(p[2:], dtype=float),
        cov=cov,
        chi2=float(cst),
        dof=n_runs * n_pick - (2 + n_pick),
        converged=bool(conv),
        linear_unbalance_gmm=lin,
    )


def along_across_sd(correction_gmm: complex, cov2: np.ndarray) -> tuple[float, float]:
    """One standard deviation of a correction along itself (its size) and across it (its angle,
    as g*mm), from the 2x2 covariance of its real and imaginary parts."""
    c = complex(correction_gmm)
    u = np.array([c.real, c.imag]) / abs(c) if abs(c) > 0 else np.array([1.0, 0.0])
    n = np.array([-u[1], u[0]])
    return math.sqrt(max(float(u @ cov2 @ u), 0.0)), math.sqrt(max(float(n @ cov2 @ n), 0.0))


def amplitude_only(
    amplitudes: Sequence[float] | Sequence[Sequence[float]],
    trial_gmm: Sequence[complex],
    radius_mm: float,
    plane: int = 1,
    amp_sd: Sequence | None = None,
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
    amplitudes: Sequence,
    trial_gmm: Sequence[complex],
    radius_mm: float,
    plane: int,
    amp_sd: Sequence | None,
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
    loud = int(np.argmax(v[0]))
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
    t = np.array([0j] + [rho * np.exp(1j * math.radians(a)) for a in trial_angles_deg])
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
    if all(run.spreads is not None for run in runs):
        if any(len(run.spreads) != n_pickups for run in runs):
            raise BalancingError("give one spread per reading in every run")
        sd = [[float(s) / math.sqrt(2.0) for s in run.spreads] for run in runs]
    return amplitude_only(amps, t, r, plane, amp_sd=sd)
