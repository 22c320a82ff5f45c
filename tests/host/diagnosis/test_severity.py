"""Severity: velocity from acceleration, broadband RMS by Parseval, and the zone tables."""

import math

import numpy as np
import pytest

from runtrue.diagnosis import severity as sv

G = 9.80665


def test_one_x_velocity_matches_harmonic_motion():
    # 0.1 g peak at 1,500 rpm (25 Hz): v_pk = a / (2 pi f) = 0.980665 / 157.08 m/s = 6.243 mm/s pk
    v = sv.order_velocity_rms_mm_s([0.1], 1500.0)
    assert v == pytest.approx(0.1 * G / (2 * math.pi * 25.0) * 1000.0 / math.sqrt(2.0), rel=1e-12)
    assert v == pytest.approx(4.4146, abs=1e-3)


def test_orders_add_as_mean_squares():
    one = sv.order_velocity_rms_mm_s([0.1], 1500.0)
    two_only = sv.order_velocity_rms_mm_s([0.0, 0.1], 1500.0)
    both = sv.order_velocity_rms_mm_s([0.1, 0.1], 1500.0)
    assert two_only == pytest.approx(one / 2.0)       # same acceleration at twice the frequency
    assert both == pytest.approx(math.hypot(one, two_only))


def test_broadband_rms_of_a_tone_matches_the_time_domain_value():
    rate = 4000.0
    t = np.arange(8192) / rate
    for f in (25.0, 31.3, 120.0):                  # on and between bins
        a_g = 0.2 * np.cos(2 * np.pi * f * t + 0.3)
        v_rms = 0.2 * G / (2 * np.pi * f) * 1000.0 / math.sqrt(2.0)
        assert sv.broadband_velocity_rms_mm_s(a_g, rate) == pytest.approx(v_rms, rel=0.02)


def test_broadband_rms_ignores_content_outside_the_band():
    rate = 4000.0
    t = np.arange(8192) / rate
    inside = 0.2 * np.cos(2 * np.pi * 50.0 * t)
    outside = 0.5 * np.cos(2 * np.pi * 1500.0 * t) + 0.05 * np.cos(2 * np.pi * 3.0 * t)
    a = sv.broadband_velocity_rms_mm_s(inside, rate)
    b = sv.broadband_velocity_rms_mm_s(inside + outside, rate)
    assert b == pytest.approx(a, rel=0.02)


def test_white_noise_rms_agrees_with_a_time_domain_integration():
    # Reference: integrate acceleration to velocity with numpy's FFT without a window on a long
    # record (no leakage for noise), band-limit with a brick wall, RMS in the time domain.
    rng = np.random.default_rng(4)
    rate = 4000.0
    a_g = rng.normal(0.0, 0.05, 1 << 15)
    xf = np.fft.rfft(a_g)
    f = np.fft.rfftfreq(len(a_g), 1 / rate)
    band = (f >= 10) & (f <= 1000)
    vf = np.zeros_like(xf)
    vf[band] = xf[band] * G / (2j * np.pi * f[band])
    v_ref = np.sqrt(np.mean(np.fft.irfft(vf, len(a_g)) ** 2)) * 1000.0
    assert sv.broadband_velocity_rms_mm_s(a_g, rate) == pytest.approx(v_ref, rel=0.05)


@pytest.mark.parametrize(
    "key, ab, bc, cd",
    [
        # ISO 10816-1:1995, Annex B, Table B.1 (values from memory)
        ("class-I", 0.71, 1.8, 4.5),
        ("class-II", 1.12, 2.8, 7.1),
        ("class-III", 1.8, 4.5, 11.2),
        ("class-IV", 2.8, 7.1, 18.0),
        # ISO 20816-3:2022, Annex A, Tables A.1 and A.2 (values from memory)
        ("group2-rigid", 1.4, 2.8, 4.5),
        ("group2-flexible", 2.3, 4.5, 7.1),
        ("group1-rigid", 2.3, 4.5, 7.1),
        ("group1-flexible", 3.5, 7.1, 11.0),
    ],
)
def test_zone_boundaries_match_the_standards_tables(key, ab, bc, cd):
    t = sv.zone_table(key)
    assert (t.ab_mm_s, t.bc_mm_s, t.cd_mm_s) == (ab, bc, cd)
    assert t.zone(ab * 0.999) == "A" and t.zone(ab) == "B"
    assert t.zone(bc * 0.999) == "B" and t.zone(bc) == "C"
    assert t.zone(cd * 0.999) == "C" and t.zone(cd) == "D"


def test_class_suggested_from_power_and_support():
    assert sv.suggest_class(5.5) == "class-I"
    assert sv.suggest_class(45.0) == "group2-rigid"
    assert sv.suggest_class(45.0, flexible_support=True) == "group2-flexible"
    assert sv.suggest_class(1200.0) == "group1-rigid"
    with pytest.raises(ValueError, match="positive"):
        sv.suggest_class(-1.0)


def test_bad_values_are_refused_with_a_message():
    with pytest.raises(ValueError, match="unknown machine class"):
        sv.zone_table("class-V")
    with pytest.raises(ValueError, match="non-negative"):
        sv.zone_table("class-I").zone(float("nan"))
    with pytest.raises(ValueError, match="positive rpm"):
        sv.order_velocity_rms_mm_s([0.1], 0.0)


def test_band_is_wider_for_slow_machines():
    assert sv.band_hz(300.0) == (2.0, 1000.0)
    assert sv.band_hz(1500.0) == (10.0, 1000.0)


def test_spectrum_marks_a_tone_at_its_frequency_and_amplitude():
    rate = 4000.0
    t = np.arange(4096) / rate
    f0 = rate * 100 / 4096                          # on a bin: no scalloping
    s = sv.spectrum(0.3 * np.sin(2 * np.pi * f0 * t), rate)
    k = int(np.argmax(s.accel_g_pk))
    assert s.freq_hz[k] == pytest.approx(f0)
    assert s.accel_g_pk[k] == pytest.approx(0.3, rel=1e-6)
    assert s.window == "Hann"
