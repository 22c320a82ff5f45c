"""Influence-coefficient balancing in its general form: any pickups, any planes, any runs.

Sources:
* T. P. Goodman, "A least-squares method for computing balance corrections", *Journal of
  Engineering for Industry* (Trans. ASME, series B) 86(3), 1964, pp. 273-279: every run is one
  linear equation ``reading = reference + A * (weights present)``; with more runs than unknowns
  the reference vector and the influence coefficients are fitted by least squares, and the
  correction minimises the sum of squared predicted readings.
* The exactly determined one- and two-plane forms are the classic influence-coefficient method
  (e.g. Wowk, *Machinery Vibration: Balancing*, McGraw-Hill 1995, ch. on single- and two-plane
  balancing; ISO 21940-13:2012, field balancing procedures) -- the same equations solved exactly.

Model, for run k and pickup i (conventions in ``runtrue.balancing.model``)::

    Y[k, i] = R[i] + sum_p A[i, p] * W[k, p]

with ``W[k, p]`` the complex unbalance (g*mm) present in plane p during run k, relative to the
reference state.  Unknowns ``R`` (the reference-state reading) and ``A`` (pickups x planes) are
fitted column by column (one pickup at a time) by (weighted) linear least squares over all runs;
the correction ``C`` then minimises ``|R + A C|^2`` over the pickups (exact when pickups = planes).

Several speeds: coefficients change with speed, so treat each (pickup, speed) pair as its own
"pickup" (one reading per pair in each run); the correction then minimises over all speeds.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from runtrue.balancing.forces import check_mass_g, check_radius_mm
from runtrue.balancing.model import BalancingError, Run, Solution, Weight
from runtrue.balancing.trial import TRIAL_MIN_CHANGE_FRACTION, check_trial_effect
from runtrue.balancing.uncertainty import propagate, propagate_jacobian

#: Warn when the column-normalised influence matrix has a condition number above this.  The
#: relative error of the correction can be up to cond times the relative error of the readings
#: (a standard bound, e.g. Golub & Van Loan, *Matrix Computations*, 4th ed., sec. 2.6); with the
#: few-percent scatter of a field reading, cond 10 already allows tens of percent in the
#: correction.  For two planes and two pickups, cond 10 means the two planes' effects, seen by
#: the pickups, point within about 11 deg of each other (|cos| = 0.98).  Threshold: our choice.
CONDITION_WARN = 10.0
#: Refuse above this: the planes cannot be told apart at all by these pickups.
CONDITION_REFUSE = 1e8
#: Warn when a correction's mass is this uncertain (1 sd relative) or its angle this many degrees.
MASS_SD_WARN = 0.2
ANGLE_SD_WARN_DEG = 10.0


def _check_reading(value: complex, what: str) -> complex:
    z = complex(value)
    if not (math.isfinite(z.real) and math.isfinite(z.imag)):
        raise BalancingError(f"{what} is not a finite number; re-take that reading")
    return z


def _check_runs(runs: Sequence[Run]) -> tuple[int, int]:
    """Validate the runs; return (number of pickups, number of planes)."""
    if len(runs) < 2:
        raise BalancingError(
            f"{len(runs)} run(s) given; need the reference run and at least one trial run per plane"
        )
    n_pickups = len(runs[0].readings)
    if n_pickups == 0:
        raise BalancingError("run 1 has no readings; give one reading per pickup")
    planes: set[int] = set()
    for k, run in enumerate(runs, start=1):
        if len(run.readings) != n_pickups:
            raise BalancingError(
                f"run {k} has {len(run.readings)} reading(s) but run 1 has {n_pickups}; "
                "give one reading per pickup in every run, in the same order"
            )
        for i, z in enumerate(run.readings, start=1):
            _check_reading(z, f"run {k}, pickup {i} reading")
        if run.spreads is not None:
            if len(run.spreads) != n_pickups:
                raise BalancingError(f"run {k} has {len(run.spreads)} spread(s) for {n_pickups} pickup(s)")
            for i, s in enumerate(run.spreads, start=1):
                if math.isnan(float(s)) or float(s) < 0.0:
                    raise BalancingError(f"run {k}, pickup {i}: spread must be a number >= 0, got {s!r}")
        for w in run.weights:
            if not isinstance(w.plane, int) or isinstance(w.plane, bool) or w.plane < 1:
                raise BalancingError(f"run {k}: plane must be a whole number from 1, got {w.plane!r}")
            check_mass_g(w.mass_g, f"run {k}, plane {w.plane} weight mass")
            check_radius_mm(w.radius_mm)
            if not math.isfinite(float(w.angle_deg)):
                raise BalancingError(f"run {k}, plane {w.plane}: weight angle must be a finite number of degrees")
            planes.add(w.plane)
    if not planes:
        raise BalancingError("no run has a weight; a trial run must list the trial weight it carries")
    n_planes = max(planes)
    missing = sorted(set(range(1, n_planes + 1)) - planes)
    if missing:
        raise BalancingError(
            f"plane(s) {', '.join(map(str, missing))} never carry a weight; number the planes 1..{n_planes} "
            "and run a trial weight in each"
        )
    if len(runs) < n_planes + 1:
        raise BalancingError(
            f"{len(runs)} runs for {n_planes} plane(s); need at least {n_planes + 1} "
            "(the reference run plus one trial run per plane)"
        )
    return n_pickups, n_planes


def _design(runs: Sequence[Run], n_planes: int) -> np.ndarray:
    """Rows [1, W[k,1], ..., W[k,P]]: the unbalance present in each plane during each run."""
    x = np.zeros((len(runs), n_planes + 1), dtype=complex)
    x[:, 0] = 1.0
    for k, run in enumerate(runs):
        for w in run.weights:
            x[k, w.plane] += w.unbalance_gmm
    return x


def _row_weights(runs: Sequence[Run]) -> np.ndarray | None:
    """1/spread per run and pickup when every run has spreads (zeros replaced by the smallest
    positive spread, so a perfect reading does not swamp the fit); else None."""
    if any(r.spreads is None for r in runs):
        return None
    s = np.array([[float(v) for v in r.spreads] for r in runs])  # type: ignore[union-attr]
    positive = s[s > 0]
    if positive.size == 0:
        return None
    s = np.where(s > 0, s, positive.min())
    return 1.0 / s


def _fit(x: np.ndarray, y: np.ndarray, wts: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares fit of y (runs x pickups) = x (runs x (1+P)) @ b; returns (R, A)."""
    n_pickups = y.shape[1]
    b = np.empty((x.shape[1], n_pickups), dtype=complex)
    if wts is None:
        b[:, :] = np.linalg.lstsq(x, y, rcond=None)[0]
    else:
        for i in range(n_pickups):
            b[:, i] = np.linalg.lstsq(x * wts[:, i : i + 1], y[:, i] * wts[:, i], rcond=None)[0]
    return b[0, :].copy(), b[1:, :].T.copy()


def _correct(a: np.ndarray, r: np.ndarray) -> np.ndarray:
    """The unbalance C (g*mm per plane) minimising |r + a C|^2 (minimum norm if not unique)."""
    c: np.ndarray = -np.linalg.lstsq(a, r, rcond=None)[0]
    return c


def normalised_condition(a: np.ndarray) -> float:
    """Condition number of ``a`` with each column scaled to unit length (inf if a column is 0)."""
    norms = np.linalg.norm(a, axis=0)
    if np.any(norms == 0.0):
        return math.inf
    s = np.linalg.svd(a / norms, compute_uv=False)
    if s[-1] == 0.0:
        return math.inf
    return float(s[0] / s[-1])


def _radii(
    n_planes: int, radius_mm: Mapping[int, float] | Sequence[float] | None, runs: Sequence[Run] | None
) -> list[float]:
    out: list[float] = []
    for p in range(1, n_planes + 1):
        r: float | None = None
        if radius_mm is not None:
            if isinstance(radius_mm, Mapping):
                r = radius_mm.get(p)
                if r is None:
                    r = radius_mm.get(str(p))  # type: ignore[call-overload]
            elif p - 1 < len(radius_mm):
                r = radius_mm[p - 1]
        if r is None and runs is not None:
            r = next((w.radius_mm for run in runs for w in run.weights if w.plane == p), None)
        if r is None:
            raise BalancingError(f"no radius for plane {p}; give the radius at which to fit its correction")
        out.append(check_radius_mm(r))
    return out


def _finish(
    a: np.ndarray,
    r: np.ndarray,
    radii: list[float],
    warnings: list[str],
    method: str,
    fit_rms: float,
    unc: tuple[np.ndarray, np.ndarray] | None,
) -> Solution:
    n_pickups, n_planes = a.shape
    for p in range(n_planes):
        if not np.any(np.abs(a[:, p]) > 0):
            raise BalancingError(
                f"plane {p + 1}'s trial weight changed no reading at all; check that it was fitted, "
                "that the pickups are connected, and use a larger trial weight"
            )
    cond = normalised_condition(a)
    if cond > CONDITION_REFUSE:
        raise BalancingError(
            "the pickups cannot tell the correction planes apart (the influence matrix is singular); "
            "move a pickup nearer one plane, or balance in fewer planes"
        )
    if n_pickups < n_planes:
        warnings.append(
            f"{n_planes} planes but only {n_pickups} pickup(s): the correction shown is the smallest "
            "set of weights that cancels the readings, one of many; add a pickup for a unique answer."
        )
    elif n_planes > 1 and cond > CONDITION_WARN:
        warnings.append(
            f"The planes act almost alike on the pickups (condition number {cond:.0f}, warning above "
            f"{CONDITION_WARN:g}): small reading errors can change the correction a lot. Move the "
            "pickups nearer their planes or increase the trial weights, and check with a trim run."
        )
    c = _correct(a, r)
    predicted = r + a @ c
    corrections = [Weight.from_unbalance(p + 1, complex(c[p]), radii[p]) for p in range(n_planes)]
    mass_sd = angle_sd = None
    if unc is not None:
        along, across = unc
        mass_sd = [float(along[p] / radii[p]) for p in range(n_planes)]
        angle_sd = [
            float(math.degrees(across[p] / abs(c[p]))) if abs(c[p]) > 0 else 180.0 for p in range(n_planes)
        ]
        for p in range(n_planes):
            m = corrections[p].mass_g
            if m > 0 and (mass_sd[p] > MASS_SD_WARN * m or angle_sd[p] > ANGLE_SD_WARN_DEG):
                warnings.append(
                    f"Plane {p + 1}: the correction is uncertain (mass {m:.3g} g +/- {mass_sd[p]:.2g} g, "
                    f"angle +/- {angle_sd[p]:.0f} deg, 1 standard deviation) because of the readings' "
                    "scatter; average more revolutions or use a larger trial weight."
                )
    return Solution(
        corrections=corrections,
        influence=a,
        reference=[complex(v) for v in r],
        predicted=[complex(v) for v in predicted],
        warnings=warnings,
        condition_number=cond,
        mass_sd_g=mass_sd,
        angle_sd_deg=angle_sd,
        fit_rms=fit_rms,
        method=method,
    )


def _trial_warnings(runs: Sequence[Run], y: np.ndarray) -> list[str]:
    """Did each run's weights change the readings enough to trust the coefficients?"""
    out: list[str] = []
    ref = y[0]
    ref_size = float(np.max(np.abs(ref)))
    for k in range(1, len(runs)):
        if not runs[k].weights:
            continue
        delta = y[k] - ref
        if runs[0].spreads is not None and runs[k].spreads is not None:
            best = None
            for i in range(y.shape[1]):
                v = check_trial_effect(
                    complex(ref[i]), complex(y[k, i]), float(runs[0].spreads[i]), float(runs[k].spreads[i])  # type: ignore[index]
                )
                if best is None or v.ratio > best.ratio:
                    best = v
            if best is not None and not best.ok:
                out.append(f"Run {k + 1}: {best.message}")
        elif ref_size > 0 and float(np.max(np.abs(delta))) < TRIAL_MIN_CHANGE_FRACTION * ref_size:
            out.append(
                f"Run {k + 1}: the weights changed the readings by less than "
                f"{TRIAL_MIN_CHANGE_FRACTION:.0%} of the reference (the common-practice minimum); the "
                "coefficients may be swamped by scatter. Repeat with a larger trial weight, or give "
                "the readings' spreads so the engine can judge."
            )
    return out


def solve(runs: Sequence[Run], radius_mm: Mapping[int, float] | None = None) -> Solution:
    """Influence coefficients and correction from a reference run and any further runs.

    ``runs[0]`` is the reference state (normally no weights).  Each later run lists the weights
    present relative to it and one reading per pickup.  With exactly planes + 1 independent runs
    this is the classic influence-coefficient solution; with more, Goodman's least squares over
    every run (trim runs and repeated trials all improve the coefficients).  When every run has
    ``spreads``, the fit is weighted by 1/spread and the correction's uncertainty is given.

    ``radius_mm``: per plane (1-based), the radius to express the correction at; default the
    radius of the first weight seen in that plane (the trial radius).
    """
    try:
        with np.errstate(all="ignore"):
            sol = _solve(runs, radius_mm)
    except np.linalg.LinAlgError:
        raise BalancingError("the runs could not be solved (numbers out of range); check the readings") from None
    _check_finite(sol)
    return sol


def _check_finite(sol: Solution) -> None:
    values = [*sol.correction_gmm, *sol.predicted, *np.ravel(sol.influence)]
    if not all(math.isfinite(abs(complex(v))) for v in values):
        raise BalancingError("the numbers are out of range (too large or too small); check units and readings")


def _known_spreads(runs: Sequence[Run]) -> tuple[list[Run], list[str]]:
    """Runs with an infinite spread (scatter unknown: fewer than two revolutions) lose their
    spreads, so the fit falls back to equal weights; a warning says so."""
    out: list[Run] = []
    unknown = []
    for k, run in enumerate(runs, start=1):
        if run.spreads is not None and not all(math.isfinite(float(v)) for v in run.spreads):
            out.append(Run(run.weights, run.readings, None))
            unknown.append(str(k))
        else:
            out.append(run)
    if not unknown:
        return out, []
    return out, [
        f"The scatter of run(s) {', '.join(unknown)} is unknown (too few revolutions): all runs were "
        "weighted equally and no uncertainty could be given. Measure more revolutions."
    ]


def _sensitivities(
    x: np.ndarray, wts: np.ndarray, a: np.ndarray, r: np.ndarray
) -> tuple[np.ndarray, np.ndarray] | None:
    """Closed-form derivative of the correction with respect to every reading.

    Per pickup i the weighted fit is linear: ``b_i = M_i y_i`` with ``M_i = pinv(W_i X) W_i``, so
    reading (k, i) moves ``R_i`` by ``M_i[0, k]`` and row i of ``A`` by ``M_i[1:, k]`` per unit.
    The correction solves the normal equations ``A^H (R + A C) = 0``; differentiating them
    (Golub & Van Loan, *Matrix Computations*, 4th ed., sec. 5.3, perturbation of least squares)::

        dC = -(A^H A)^-1 [A^H (dR + dA C) + dA^H e],   e = R + A C

    With a change ``delta`` of reading (k, i): ``dR + dA C = unit_i * g_k * delta`` where
    ``g_k = M_i[0, k] + M_i[1:, k] . C``, and ``dA^H e = conj(M_i[1:, k]) * conj(delta) * e_i``; the
    conjugate makes the map real-linear only, so the real and imaginary parts are returned apart.
    Returns (d_re, d_im), each (runs * pickups) x planes, readings ordered run by run; None when
    there are fewer pickups than planes or ``A^H A`` is singular (the caller falls back)."""
    n_runs = x.shape[0]
    n_pickups, n_planes = a.shape
    if n_pickups < n_planes:
        return None
    try:
        g_inv = np.linalg.inv(a.conj().T @ a)
    except np.linalg.LinAlgError:
        return None
    if not np.all(np.isfinite(g_inv)):
        return None
    c = -g_inv @ (a.conj().T @ r)
    e = r + a @ c
    d_re = np.zeros((n_runs, n_pickups, n_planes), dtype=complex)
    d_im = np.zeros((n_runs, n_pickups, n_planes), dtype=complex)
    for i in range(n_pickups):
        w = wts[:, i]
        m = np.linalg.pinv(x * w[:, None]) * w[None, :]  # (1+P) x runs
        g = m[0, :] + c @ m[1:, :]  # runs
        t1 = a[i, :].conj()[:, None] * g[None, :]  # planes x runs
        t2 = m[1:, :].conj() * e[i]
        d_re[:, i, :] = (-(g_inv @ (t1 + t2))).T
        d_im[:, i, :] = (-(g_inv @ (1j * t1 - 1j * t2))).T
    return d_re.reshape(n_runs * n_pickups, n_planes), d_im.reshape(n_runs * n_pickups, n_planes)


def _propagate_closed_form(
    x: np.ndarray, wts: np.ndarray, a: np.ndarray, r: np.ndarray, sd: np.ndarray
) -> tuple[np.ndarray, np.ndarray] | None:
    sens = _sensitivities(x, wts, a, r)
    if sens is None:
        return None
    return propagate_jacobian(sens[0], sens[1], sd.ravel(), _correct(a, r))


def _solve(runs: Sequence[Run], radius_mm: Mapping[int, float] | None) -> Solution:
    """The unguarded body of :func:`solve`."""
    n_pickups, n_planes = _check_runs(runs)
    runs, spread_warnings = _known_spreads(runs)
    radii = _radii(n_planes, radius_mm, runs)
    x = _design(runs, n_planes)
    norms = np.linalg.norm(x, axis=0)
    sv = np.linalg.svd(x / np.where(norms > 0, norms, 1.0), compute_uv=False)
    if np.any(norms == 0) or not np.all(np.isfinite(sv)) or sv[-1] < 1e-9 * sv[0]:
        raise BalancingError(
            "the runs do not separate the planes (the same weights, or weights in fixed proportion, "
            "in every run); give each plane a trial run of its own"
        )
    y = np.array([[complex(z) for z in run.readings] for run in runs])
    wts = _row_weights(runs)
    r, a = _fit(x, y, wts)
    resid = y - (r[None, :] + x[:, 1:] @ a.T)
    dof = len(runs) - (n_planes + 1)
    fit_rms = float(np.sqrt(np.mean(np.abs(resid) ** 2))) if dof > 0 else 0.0
    warnings = spread_warnings + _trial_warnings(runs, y)
    unc = None
    if wts is not None:
        sd = np.array([[float(v) for v in run.spreads] for run in runs])  # type: ignore[union-attr]

        unc = _propagate_closed_form(x, wts, a, r, sd)
        if unc is None:  # fewer pickups than planes (minimum-norm answer): differences of the solver

            def func(yy: np.ndarray) -> np.ndarray:
                rr, aa = _fit(x, yy, wts)
                return _correct(aa, rr)

            unc = propagate(func, y, sd, _correct(a, r))
    if dof > 0 and wts is not None:
        # Misfit far beyond the stated scatter means the machine is not behaving linearly.
        chi = float(np.sqrt(np.mean(np.abs(resid * wts) ** 2)))
        if chi > 3.0:
            warnings.append(
                f"The runs disagree with a linear model by {chi:.1f} times their own scatter: the speed, "
                "the mounting or the machine's response may have changed between runs, or a weight "
                "was logged wrongly. Check the run log before fitting the correction."
            )
    method = "influence" if dof == 0 else "least-squares"
    return _finish(a, r, radii, warnings, method, fit_rms, unc)


def correction_from_influence(
    influence: np.ndarray | Sequence[Sequence[complex]],
    reading: Sequence[complex],
    radius_mm: Mapping[int, float] | Sequence[float],
    spreads: Sequence[float] | None = None,
) -> Solution:
    """The correction from stored influence coefficients (pickups x planes) and one new reading.

    The rotor's current state is the reference: the correction is what to add to it.
    """
    a = np.array(influence, dtype=complex)
    if a.ndim != 2 or a.size == 0:
        raise BalancingError("influence coefficients must be a table: one row per pickup, one column per plane")
    if not np.all(np.isfinite(a)):
        raise BalancingError("the stored influence coefficients contain a value that is not a number")
    n_pickups, n_planes = a.shape
    if len(reading) != n_pickups:
        raise BalancingError(
            f"{len(reading)} reading(s) for {n_pickups} pickup(s) in the stored coefficients; "
            "use the same pickups, in the same order"
        )
    r = np.array([_check_reading(z, f"pickup {i + 1} reading") for i, z in enumerate(reading)])
    radii = _radii(n_planes, radius_mm, None)
    try:
        with np.errstate(all="ignore"):
            sol = _stored(a, r, radii, spreads)
    except np.linalg.LinAlgError:
        raise BalancingError("the stored coefficients could not be used (numbers out of range)") from None
    _check_finite(sol)
    return sol


def _stored(a: np.ndarray, r: np.ndarray, radii: list[float], spreads: Sequence[float] | None) -> Solution:
    n_pickups = a.shape[0]
    unc = None
    warnings: list[str] = []
    if spreads is not None:
        if len(spreads) != n_pickups:
            raise BalancingError(f"{len(spreads)} spread(s) for {n_pickups} pickup(s)")
        if any(math.isnan(float(v)) or float(v) < 0 for v in spreads):
            raise BalancingError("spreads must be numbers >= 0")
        if not all(math.isfinite(float(v)) for v in spreads):
            warnings.append("The reading's scatter is unknown (too few revolutions): no uncertainty could be given.")
            spreads = None
    if spreads is not None:
        sd = np.array([[float(s) for s in spreads]])
        # C = -pinv(A) r is complex-linear in r: reading i moves it by -pinv(A)[:, i] per unit.
        p_inv = np.linalg.pinv(a)
        d = -p_inv.T  # readings x planes
        unc = propagate_jacobian(d, 1j * d, sd.ravel(), _correct(a, r))
    return _finish(a, r, radii, warnings, "stored", 0.0, unc)


def net_correction(
    corrections: Sequence[Weight],
    fitted: Sequence[Weight],
    radius_mm: Mapping[int, float] | None = None,
) -> list[Weight]:
    """What to add when ``fitted`` weights (for example a trial weight left on) stay on the rotor.

    Per plane: correction unbalance minus the unbalance already fitted there.  Radius: from
    ``radius_mm`` or that of the correction.  A plane whose net is zero gets a 0 g weight.
    """
    out = []
    for c in corrections:
        u = c.unbalance_gmm - sum((w.unbalance_gmm for w in fitted if w.plane == c.plane), 0j)
        r = (radius_mm or {}).get(c.plane, c.radius_mm)
        out.append(Weight.from_unbalance(c.plane, u, r))
    return out
