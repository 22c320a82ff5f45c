"""The maximum-likelihood fit of amplitudes without phase, behind the four-run method.

Model: with one correction plane, pickup ``i`` reads the amplitude ``V[k, i] = g_i * |u + T_k|``
in run ``k``: ``u`` the rotor's unbalance (g*mm, weight convention), ``T_k`` the trial unbalance
present in that run, ``g_i = |a_i|`` the size of the pickup's influence coefficient (its phase
cannot be found without a phase reference, and is not needed).  The linear least-squares
solution on the squared amplitudes (``runtrue.balancing.four_run``, module docstring) is only the
starting point: squaring makes the noise depend on the amplitude, and with four runs its four
unknowns fit the four equations exactly, so inconsistent data go unseen.

The estimate is the maximum-likelihood fit of the amplitudes themselves (Gaussian errors,
standard deviation ``sigma[k, i]`` per run and pickup), which keeps ``g^2 |u|^2`` tied to ``u`` and
uses every pickup at once, each weighted by its noise.  It is a nonlinear least-squares problem
in ``2 + pickups`` real unknowns, solved by Levenberg-Marquardt (K. Levenberg, *Q. Appl. Math.*
2, 1944; D. W. Marquardt, *J. SIAM* 11(2), 1963; as in Nocedal & Wright, *Numerical
Optimization*, 2nd ed., Springer 2006, sec. 10.3), started from the linear solution and from a
coarse grid of ``u`` on which each gain has its closed-form least-squares value (variable
projection: Golub & Pereyra, *SIAM J. Numer. Anal.* 10(2), 1973), so a poor linear start cannot
trap it.  The uncertainty is the usual asymptotic covariance of a maximum-likelihood estimate,
the inverse of the observed information (the Hessian of half the sum of squared normalised
residuals at the optimum: ``J^T J`` plus the residuals times their second derivatives;
``(J^T J)^-1`` alone when that is not positive definite; Nocedal & Wright sec. 10.3; GUM, JCGM
100:2008, 5.1), when the readings' scatter is known; it is checked by simulation in the tests
(95 % intervals).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from runtrue.balancing.model import BalancingError

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


def linear_solution(v: np.ndarray, t: np.ndarray) -> tuple[complex, float] | None:
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
        r: np.ndarray = ((p[2:][None, :] * d[:, None] - v) / sig).ravel()
        return r

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
    amplitudes: npt.ArrayLike,
    trial_gmm: Sequence[complex] | np.ndarray,
    amp_sd: npt.ArrayLike | None = None,
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
        ls = linear_solution(v[:, i], t)
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
