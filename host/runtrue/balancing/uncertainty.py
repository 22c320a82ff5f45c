"""Uncertainty of a balance correction from the scatter of the readings it was computed from.

Source: first-order (linearised) propagation of uncertainty, JCGM 100:2008 *Evaluation of
measurement data - Guide to the expression of uncertainty in measurement* (GUM), clause 5.1
(law of propagation of uncertainty), applied to the real and imaginary parts of each reading
as independent inputs with equal standard deviations (spread / sqrt(2) each; a circular
scatter, as vector averaging of a steady 1x signal gives).  The output is split into the
component along the correction (its size: mass uncertainty) and across it (its direction: angle
uncertainty = across / |C| radians).

Sensitivities: :func:`propagate_jacobian` takes them in closed form from the solver (the
influence-coefficient solver differentiates its own least-squares solution, see
``influence._sensitivities``; cost linear in the number of readings); :func:`propagate` finds
them by central finite differences of any solver (one solve per reading part: quadratic cost
when each solve is linear in the readings; kept as the general tool and the tests' yardstick).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np


def propagate(
    func: Callable[[np.ndarray], np.ndarray], y: np.ndarray, sd: np.ndarray, c0: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """First-order propagation of independent reading errors to the correction.

    ``func(y) -> C``; ``sd`` has the spread of each entry of ``y`` (real and imaginary parts
    each with sd/sqrt(2)).  Returns (sd along C, sd across C) per plane, in g*mm.  Central
    differences on the real and imaginary part of every reading (the map is smooth but not
    complex-analytic, so both parts are needed).
    """
    n_planes = c0.shape[0]
    cov = np.zeros((n_planes, 2, 2))
    scale = max(float(np.max(np.abs(y))), 1e-300)
    h = 1e-6 * scale
    for idx in np.ndindex(y.shape):
        sigma = float(sd[idx]) / math.sqrt(2.0)
        if sigma == 0.0:
            continue
        for unit in (1.0, 1j):
            yp = y.copy()
            ym = y.copy()
            yp[idx] += unit * h
            ym[idx] -= unit * h
            d = (func(yp) - func(ym)) / (2.0 * h)  # dC / d(part), per plane
            v = np.stack([d.real, d.imag], axis=1)  # planes x 2
            cov += sigma * sigma * np.einsum("pi,pj->pij", v, v)
    return split_along_across(cov, c0)


def propagate_jacobian(d_re: np.ndarray, d_im: np.ndarray, sd: np.ndarray, c0: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First-order propagation from closed-form sensitivities.

    ``d_re[n, p]`` / ``d_im[n, p]``: the change of correction p (complex g*mm) per unit change of
    the real / imaginary part of reading n; ``sd[n]`` the reading's spread (each part has
    sd/sqrt(2)).  Returns (sd along C, sd across C) per plane, in g*mm, as :func:`propagate`.
    """
    var = (np.asarray(sd, dtype=float).ravel() ** 2) / 2.0
    cov = np.zeros((c0.shape[0], 2, 2))
    for d in (d_re, d_im):
        v = np.stack([d.real, d.imag], axis=2)  # readings x planes x 2
        cov += np.einsum("n,npi,npj->pij", var, v, v)
    return split_along_across(cov, c0)


def split_along_across(cov: np.ndarray, c0: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per plane, the standard deviation along the correction and across it from the 2x2
    covariance of its real and imaginary parts."""
    n_planes = c0.shape[0]
    along = np.zeros(n_planes)
    across = np.zeros(n_planes)
    for p in range(n_planes):
        c = c0[p]
        u = np.array([c.real, c.imag]) / abs(c) if abs(c) > 0 else np.array([1.0, 0.0])
        n = np.array([-u[1], u[0]])
        along[p] = math.sqrt(max(float(u @ cov[p] @ u), 0.0))
        across[p] = math.sqrt(max(float(n @ cov[p] @ n), 0.0))
    return along, across
