"""Per-revolution least-squares phasors (firmware/runtrue_fw/phasor.py + kernels.fit_sums).

Reference: D. C. Rife and R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
observations", IEEE Trans. Inf. Theory 20(5), 1974 -- for a tone of known frequency in white
Gaussian noise the least-squares fit is the ML estimate.  Convention (PROTOCOL.md): the order-k
component amp*cos(k*phi - lag) is the phasor amp*e^{+j*lag}, phi measured from the reference edge.
"""

from __future__ import annotations

import cmath
import math
from array import array

import numpy as np
import pytest

from runtrue_fw import kernels, phasor


def _revolution(n_per_rev: float, first_off: float, h1: complex, h2: complex, dc: float,
                noise: np.ndarray | None = None):
    """Samples of one revolution: sample i is at angle a0 + i*d (a0 from the fractional edge)."""
    d = 2 * math.pi / n_per_rev
    a0 = first_off * d
    n = int(math.floor(n_per_rev - first_off - 1e-12)) + 1
    phi = a0 + d * np.arange(n)
    y = (dc + abs(h1) * np.cos(phi - cmath.phase(h1)) + abs(h2) * np.cos(2 * phi - cmath.phase(h2)))
    if noise is not None:
        y = y + noise[:n]
    return array("d", y), n, a0, d, phi


def _fit(ring, n, a0, d):
    p = array("i", [0, 0, n, (1 << 20) - 1])
    sums = kernels.fit_sums(ring, p, 0, a0, d)
    return phasor.fit(sums, n, a0, d), sums


@pytest.mark.parametrize("n_per_rev,first_off", [(97.3125, 0.625), (8.5, 0.25), (4095.7, 0.999),
                                                 (13.0, 0.0), (250.001, 0.5)])
def test_known_tone_is_recovered_exactly_with_fractional_edges(n_per_rev: float, first_off: float) -> None:
    h1 = cmath.rect(0.731, math.radians(247.5))
    h2 = cmath.rect(0.112, math.radians(33.0))
    ring, n, a0, d, _ = _revolution(n_per_rev, first_off, h1, h2, dc=1.7)
    x, _ = _fit(ring, n, a0, d)
    assert complex(x[1], x[2]) == pytest.approx(h1, abs=1e-9)
    assert complex(x[3], x[4]) == pytest.approx(h2, abs=1e-9)
    assert x[0] == pytest.approx(1.7, abs=1e-9)


def test_phase_is_a_lag_after_the_reference_edge() -> None:
    # peak arrives a quarter revolution after the edge: lag 90 degrees, phasor +j*amp
    ring, n, a0, d, _ = _revolution(200.0, 0.0, cmath.rect(1.0, math.pi / 2), 0j, 0.0)
    x, _ = _fit(ring, n, a0, d)
    assert (x[1], x[2]) == pytest.approx((0.0, 1.0), abs=1e-12)
    assert math.degrees(math.atan2(x[2], x[1])) % 360 == pytest.approx(90.0)


def test_fit_equals_numpy_least_squares_on_noisy_data() -> None:
    rng = np.random.default_rng(7)
    ring, n, a0, d, phi = _revolution(61.37, 0.41, 0.3 + 0.2j, 0.05j, 0.0, rng.normal(0, 0.5, 100))
    x, _ = _fit(ring, n, a0, d)
    basis = np.column_stack([np.ones(n), np.cos(phi), np.sin(phi), np.cos(2 * phi), np.sin(2 * phi)])
    ref = np.linalg.lstsq(basis, np.asarray(ring), rcond=None)[0]
    assert np.asarray(x) == pytest.approx(ref, abs=1e-10)


def test_gram_closed_form_matches_the_explicit_sum() -> None:
    n, a0, d = 57, 0.3, 2 * math.pi / 56.2
    phi = a0 + d * np.arange(n)
    basis = np.column_stack([np.ones(n), np.cos(phi), np.sin(phi), np.cos(2 * phi), np.sin(2 * phi)])
    assert np.asarray(phasor.gram(n, a0, d)) == pytest.approx(basis.T @ basis, abs=1e-9)


def test_plain_dft_over_a_fractional_revolution_leaks_but_the_fit_does_not() -> None:
    h1 = cmath.rect(1.0, 1.0)
    ring, n, a0, d, phi = _revolution(20.4, 0.7, h1, 0.4j, 5.0)
    dft = 2.0 / n * complex(np.sum(np.asarray(ring) * np.cos(phi)), np.sum(np.asarray(ring) * np.sin(phi)))
    x, _ = _fit(ring, n, a0, d)
    assert abs(dft - h1) > 0.05
    assert abs(complex(x[1], x[2]) - h1) < 1e-9


def test_rms_is_about_the_mean() -> None:
    ring, n, a0, d, _ = _revolution(400.0, 0.0, 1.0 + 0j, 0.5 + 0j, 3.0)
    _, sums = _fit(ring, n, a0, d)
    assert phasor.rms(sums, n) == pytest.approx(math.sqrt(0.5 + 0.125), rel=1e-9)


def test_rotate_turns_a_phasor_by_the_angle() -> None:
    assert phasor.rotate(1.0, 0.0, math.pi / 2) == pytest.approx((0.0, 1.0), abs=1e-15)


def test_fit_scatter_meets_the_cramer_rao_bound_in_white_noise() -> None:
    """Monte Carlo: the 1x estimate's variance equals the Cramer-Rao bound.

    For a sinusoid of known frequency in white Gaussian noise the model is linear in
    [dc, a1, b1, a2, b2], and the bound is sigma^2 (H^T H)^-1 (S. M. Kay, *Fundamentals of
    Statistical Signal Processing: Estimation Theory*, 1993, Theorem 3.5 (from memory));
    with whole cycles it reduces to Rife and Boorstyn's 2 sigma^2 / N per component.
    """
    rng = np.random.default_rng(2024)
    trials, sigma = 3000, 0.8
    n_per_rev, first_off = 61.37, 0.41
    est = []
    for _ in range(trials):
        ring, n, a0, d, phi = _revolution(n_per_rev, first_off, 0.3 + 0.2j, 0.05j, 1.0,
                                          rng.normal(0, sigma, 80))
        x, _ = _fit(ring, n, a0, d)
        est.append(x)
    bound = sigma ** 2 * np.linalg.inv(np.asarray(phasor.gram(n, a0, d)))
    var = np.var(np.asarray(est), axis=0, ddof=1)
    ratio = var[1:3] / np.diag(bound)[1:3]
    assert ratio == pytest.approx([1.0, 1.0], abs=0.1)           # 3000 trials: +-2.6 % (1 sd)
    assert np.mean(np.asarray(est)[:, 1:3], axis=0) == pytest.approx([0.3, 0.2], abs=0.01)
    assert np.diag(bound)[1] == pytest.approx(2 * sigma ** 2 / n, rel=0.1)
