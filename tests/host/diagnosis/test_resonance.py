"""Resonances from a coast-down: a single-degree-of-freedom support driven by a rotating unbalance
(S. S. Rao, *Mechanical Vibrations*, 5th ed., section 3.7 (from memory)) gives a known answer."""

import math

import numpy as np
import pytest

from runtrue.diagnosis.resonance import find_resonances, near_resonance, speed_curve, warning_text


def _coast_down(fn_rpm, zeta, top_rpm, bottom_rpm, n=600, noise=0.0, seed=0):
    rng = np.random.default_rng(seed)
    s = np.linspace(top_rpm, bottom_rpm, n)
    r = s / fn_rpm
    x = r ** 2 / np.sqrt((1 - r ** 2) ** 2 + (2 * zeta * r) ** 2)        # displacement per m e / M
    lag = np.arctan2(2 * zeta * r, 1 - r ** 2)
    w = 2 * np.pi * s / 60.0
    a = 1e-4 * w ** 2 * x * np.exp(1j * lag)                              # acceleration, phase lag
    a = a + noise * np.abs(a).max() * (rng.normal(size=n) + 1j * rng.normal(size=n))
    return s, a


def test_resonance_found_at_the_natural_frequency_with_its_damping():
    s, a = _coast_down(fn_rpm=1650.0, zeta=0.05, top_rpm=2400.0, bottom_rpm=300.0)
    res = find_resonances(speed_curve(s, a))
    assert len(res) == 1
    # the compliance peak of a damped system sits at wn sqrt(1 - 2 z^2): 0.25 % below wn here
    assert res[0].speed_rpm == pytest.approx(1650.0, rel=0.02)
    assert res[0].phase_swing_deg > 60.0
    assert res[0].damping_ratio == pytest.approx(0.05, rel=0.25)


def test_balancing_ten_percent_below_a_resonance_is_warned():
    s, a = _coast_down(fn_rpm=1650.0, zeta=0.05, top_rpm=2400.0, bottom_rpm=300.0, noise=0.01)
    res = find_resonances(speed_curve(s, a))
    r = near_resonance(res, balancing_rpm=1500.0)     # resonance 10 % above running speed
    assert r is not None
    assert "10 % above" in warning_text(r, 1500.0)
    assert near_resonance(res, balancing_rpm=900.0) is None


def test_a_machine_far_from_resonance_gets_no_warning():
    s, a = _coast_down(fn_rpm=6000.0, zeta=0.05, top_rpm=1600.0, bottom_rpm=300.0, noise=0.01)
    assert find_resonances(speed_curve(s, a)) == []


def test_speed_curve_refuses_a_capture_without_speeds():
    with pytest.raises(ValueError, match="reference mark"):
        speed_curve([math.nan, 0.0], [1 + 0j, 1 + 0j])
