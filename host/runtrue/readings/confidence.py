"""How far to trust a vector average: the 95 % confidence region of a bivariate mean.

The revolutions' 1x vectors ``z_1..z_N`` are treated as independent draws of a bivariate
normal (real, imaginary) with unknown mean and unknown covariance.  The confidence region of
the mean is Hotelling's T^2 ellipse (H. Hotelling, "The generalization of Student's ratio",
Annals of Mathematical Statistics 2(3), 1931; as taught in R. A. Johnson and D. W. Wichern,
*Applied Multivariate Statistical Analysis*, 6th ed., section 5.4 (from memory)):

    N (zbar - mu)^T S^-1 (zbar - mu) <= T2_crit,   T2_crit = 2 (N-1)/(N-2) F(2, N-2; level)

with S the sample covariance (divisor N-1).  For 2 numerator degrees of freedom the F quantile
has a closed form, because the F(2, nu) distribution function is 1 - (1 + 2x/nu)^(-nu/2):

    F(2, nu; p) = (nu/2) ((1-p)^(-2/nu) - 1)

(so no statistics library is needed on a Raspberry Pi; the tests check it against SciPy).
As N grows T2_crit tends to the chi-square quantile with 2 degrees of freedom,
-2 ln(1 - p) (5.99 at 95 %).

The confidence **radius** reported with a reading (:func:`confidence_radius`) assumes circular
scatter - equal, uncorrelated variance in every direction, which is what white noise gives a
1x estimate.  Then J. D. Victor and J. Mast's circular T^2 statistic ("A new statistic for
steady-state evoked potentials", Electroencephalography and clinical Neurophysiology 78, 1991
(from memory)) gives an exact result with both components pooled (2N-2 degrees of freedom):

    |zbar - mu|^2 / spread^2  ~  F(2, 2N-2),   spread^2 = sum |z_i - zbar|^2 / (N (N-1))

so the radius is ``spread * sqrt(F(2, 2N-2; level))`` (about 1.73 x spread for large N, 4.36 x
at N = 2).  When the scatter is strongly elongated (phase jitter from an unsteady speed, say)
the circle under-covers along the long axis; the Hotelling ellipse above holds for any shape,
and a reading carries both.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


def f_quantile_2(nu: float, p: float) -> float:
    """Quantile ``p`` of the F distribution with (2, ``nu``) degrees of freedom (closed form)."""
    if nu <= 0 or not 0 < p < 1:
        raise ValueError("need nu > 0 and 0 < p < 1")
    return nu / 2.0 * (float((1.0 - p) ** (-2.0 / nu)) - 1.0)


def hotelling_t2_critical(n: int, level: float = 0.95) -> float:
    """Critical T^2 for the mean of ``n`` bivariate observations at confidence ``level``."""
    if n < 3:
        return math.inf
    return 2.0 * (n - 1) / (n - 2) * f_quantile_2(n - 2, level)


@dataclass(frozen=True)
class ConfidenceEllipse:
    """The confidence region of a mean vector, in g: semi-axes and the major axis' angle
    (degrees, same sense as the phase lag)."""

    major_g: float
    minor_g: float
    angle_deg: float
    level: float



def confidence_radius(spread_g: float, n: int, level: float = 0.95) -> float:
    """Radius about the mean holding the true vector with probability ``level``, for circular
    scatter (Victor and Mast's circular T^2, see the module doc); infinite below 2 samples."""
    if n < 2 or not math.isfinite(spread_g):
        return math.inf
    return spread_g * math.sqrt(f_quantile_2(2 * n - 2, level))


def sample_covariance(z: np.ndarray) -> np.ndarray:
    """2x2 sample covariance (divisor N-1) of complex observations as (re, im) pairs."""
    xy = np.column_stack([z.real, z.imag])
    return np.atleast_2d(np.cov(xy, rowvar=False, ddof=1))


def confidence_ellipse(z: np.ndarray, level: float = 0.95) -> ConfidenceEllipse:
    """Hotelling T^2 confidence ellipse of the mean of complex observations ``z``."""
    z = np.asarray(z, dtype=complex)
    n = len(z)
    if n < 3:
        return ConfidenceEllipse(math.inf, math.inf, 0.0, level)
    cov = sample_covariance(z)
    eigvals, eigvecs = np.linalg.eigh(cov)
    eigvals = np.clip(eigvals, 0.0, None)
    scale = hotelling_t2_critical(n, level) / n
    major_vec = eigvecs[:, 1]
    angle = math.degrees(math.atan2(major_vec[1], major_vec[0])) % 180.0
    return ConfidenceEllipse(
        major_g=math.sqrt(eigvals[1] * scale),
        minor_g=math.sqrt(eigvals[0] * scale),
        angle_deg=angle,
        level=level,
    )


def hotelling_t2(z: np.ndarray, mu: complex) -> float:
    """T^2 statistic of the observations' mean against a supposed true mean ``mu``."""
    z = np.asarray(z, dtype=complex)
    n = len(z)
    d = z.mean() - mu
    dv = np.array([d.real, d.imag])
    cov = sample_covariance(z)
    return float(n * dv @ np.linalg.pinv(cov) @ dv)
