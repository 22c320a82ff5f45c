"""Vector averaging, spread and confidence on synthetic revolutions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from readings_revs import make_revs

from runtrue.readings import NoUsableRevolutions, phasor, vector_average
from runtrue.readings.confidence import (
    confidence_ellipse,
    f_quantile_2,
    hotelling_t2,
    hotelling_t2_critical,
)

# scipy is a test-only reference with no build for 32-bit ARM (tests/run installs it where it can).
SCIPY_MISSING = "scipy is not installed (no build of it for this machine): the reference check needs it"


def test_average_recovers_a_known_vector_per_channel() -> None:
    rng = np.random.default_rng(7)
    truth = [phasor(0.25, 30.0), phasor(0.08, 275.0)]
    reading = vector_average(make_revs(truth, 400, 0.01, rng))
    assert reading.n_revs == 400
    for ch, t in zip(reading.channels, truth):
        assert abs(ch.mean - t) < 4 * ch.spread_g
        assert ch.spread_g == pytest.approx(0.01 * math.sqrt(2) / math.sqrt(400), rel=0.15)
        # One revolution scatters by sqrt(2) * sigma (sigma per component, circular noise).
        assert ch.scatter_g == pytest.approx(0.01 * math.sqrt(2), rel=0.1)
    assert reading.channels[0].phase_deg == pytest.approx(30.0, abs=0.5)
    assert reading.channels[1].phase_deg == pytest.approx(275.0, abs=1.0)
    assert reading.channels[0].amp_g == pytest.approx(0.25, rel=0.01)
    assert reading.speed_rpm == pytest.approx(3000.0)


def test_flagged_revolutions_are_left_out() -> None:
    rng = np.random.default_rng(1)
    revs = make_revs([phasor(0.1, 90.0)], 10, 0.0, rng, flags=[0, 1, 0, 2, 0, 4, 0, 8, 0, 16])
    # Make the flagged ones wildly wrong: if they were averaged the mean would move.
    revs = [r if r.usable else type(r)(**{**r.__dict__, "h1": [10 + 0j]}) for r in revs]
    reading = vector_average(revs)
    assert reading.n_revs == 5 and reading.n_rejected == 5
    assert reading.channels[0].mean == pytest.approx(phasor(0.1, 90.0))
    with pytest.raises(NoUsableRevolutions):
        vector_average([r for r in revs if not r.usable])


def test_spread_falls_as_one_over_root_n() -> None:
    rng = np.random.default_rng(3)
    spreads = {}
    for n in (16, 64, 256):
        spreads[n] = np.mean(
            [vector_average(make_revs([0.2 + 0j], n, 0.02, rng)).channels[0].spread_g for _ in range(40)]
        )
    assert spreads[16] / spreads[64] == pytest.approx(2.0, rel=0.1)
    assert spreads[64] / spreads[256] == pytest.approx(2.0, rel=0.1)


def test_spread_is_the_rms_error_of_the_mean() -> None:
    # spread_g estimates sqrt(E|mean - truth|^2): check it against the observed error.
    rng = np.random.default_rng(11)
    truth = phasor(0.1, 200.0)
    errors2, spreads2 = [], []
    for _ in range(600):
        ch = vector_average(make_revs([truth], 12, 0.01, rng)).channels[0]
        errors2.append(abs(ch.mean - truth) ** 2)
        spreads2.append(ch.spread_g**2)
    assert np.mean(spreads2) == pytest.approx(np.mean(errors2), rel=0.1)


@pytest.mark.slow
def test_f_quantile_closed_form_matches_scipy() -> None:
    stats = pytest.importorskip("scipy.stats", reason=SCIPY_MISSING)
    for nu in (1, 2, 3, 8, 30, 200):
        for p in (0.5, 0.9, 0.95, 0.99):
            assert f_quantile_2(nu, p) == pytest.approx(stats.f.ppf(p, 2, nu), rel=1e-9)
    # Large N: Hotelling's critical value tends to the chi-square(2) quantile, -2 ln 0.05.
    assert hotelling_t2_critical(100_000) == pytest.approx(stats.chi2.ppf(0.95, 2), rel=1e-3)


@pytest.mark.slow
@pytest.mark.parametrize("n", [3, 6, 20])
def test_confidence_radius_covers_the_truth_95_percent_of_the_time(n: int) -> None:
    # Circular complex Gaussian scatter; the radius comes from Victor and Mast's circular T^2
    # (Electroencephalography and clinical Neurophysiology 78, 1991), exact in this case.
    # 2,000 trials: the binomial standard error at 95 % is 0.5 %, so allow 0.93-0.97.
    rng = np.random.default_rng(100 + n)
    truth = phasor(0.05, 123.0)
    hits = 0
    trials = 2000
    for _ in range(trials):
        ch = vector_average(make_revs([truth], n, 0.01, rng)).channels[0]
        hits += abs(ch.mean - truth) <= ch.confidence_g
    assert 0.93 <= hits / trials <= 0.97


@pytest.mark.slow
def test_hotelling_ellipse_covers_95_percent_even_for_elongated_scatter() -> None:
    # Hotelling's T^2 (R. A. Johnson and D. W. Wichern, Applied Multivariate Statistical
    # Analysis, 6th ed., section 5.4): exact for any covariance.  Scatter 4:1 elongated.
    rng = np.random.default_rng(5)
    n, trials, hits, circle_hits = 8, 2000, 0, 0
    truth = 0.1 + 0.1j
    for _ in range(trials):
        revs = make_revs([truth], n, 0.01, rng, elongation=4.0)
        z = np.array([r.h1[0] for r in revs])
        hits += hotelling_t2(z, truth) <= hotelling_t2_critical(n)
        ellipse = confidence_ellipse(z)
        circle_hits += abs(z.mean() - truth) <= ellipse.major_g
        assert 0 <= ellipse.angle_deg < 180
    assert 0.93 <= hits / trials <= 0.97
    assert circle_hits / trials >= 0.95  # the circle round the whole ellipse is conservative


def test_two_revolutions_give_a_finite_radius_and_one_does_not() -> None:
    rng = np.random.default_rng(2)
    two = vector_average(make_revs([0.1 + 0j], 2, 0.01, rng)).channels[0]
    assert math.isfinite(two.confidence_g) and two.confidence_g == pytest.approx(
        two.spread_g * math.sqrt(19.0)  # F(2, 2) at 95 % = 19.00 (any F table; closed form (1 - p)^(-1) - 1)
    )
    one = vector_average(make_revs([0.1 + 0j], 1, 0.01, rng)).channels[0]
    assert math.isinf(one.spread_g) and math.isinf(one.confidence_g)
