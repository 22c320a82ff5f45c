"""Unit conversions at 1x against the hand formulas of harmonic motion
(a = (2 pi f)^2 x, v = 2 pi f x; RMS = peak / sqrt 2 for a sinusoid)."""

from __future__ import annotations

import math

import pytest

from runtrue.readings.units import (
    STANDARD_GRAVITY_MS2,
    accel_g_to_displacement_um,
    accel_g_to_velocity_mm_s,
    amp_phase,
    convert_1x,
    displacement_um_to_accel_g,
    lag_deg,
    phasor,
    velocity_mm_s_to_accel_g,
)


def test_phasor_follows_the_lag_convention() -> None:
    z = phasor(2.0, 90.0)
    assert z == pytest.approx(2j)
    assert amp_phase(phasor(0.3, 350.0)) == pytest.approx((0.3, 350.0))
    assert lag_deg(complex(-1, -1e-12)) == pytest.approx(180.0)
    assert 0 <= lag_deg(complex(1, -1e-18)) < 360


def test_one_g_at_3000_rpm_by_hand() -> None:
    f = 3000 / 60  # 50 Hz
    a = 1.0 * 9.80665  # m/s^2 (standard gravity, ISO 80000-3)
    assert STANDARD_GRAVITY_MS2 == 9.80665
    assert accel_g_to_velocity_mm_s(1.0, 3000) == pytest.approx(a / (2 * math.pi * f) * 1000)  # 31.2 mm/s
    assert accel_g_to_velocity_mm_s(1.0, 3000) == pytest.approx(31.215, rel=1e-4)
    assert accel_g_to_displacement_um(1.0, 3000) == pytest.approx(a / (2 * math.pi * f) ** 2 * 1e6)  # 99.4 um
    assert accel_g_to_displacement_um(1.0, 3000) == pytest.approx(99.36, rel=1e-3)


def test_conversions_invert() -> None:
    for rpm in (600.0, 1480.0, 24_000.0):
        v = accel_g_to_velocity_mm_s(0.37, rpm)
        assert velocity_mm_s_to_accel_g(v, rpm) == pytest.approx(0.37)
        x = accel_g_to_displacement_um(0.37, rpm)
        assert displacement_um_to_accel_g(x, rpm) == pytest.approx(0.37)


def test_detectors() -> None:
    peak_mm_s = accel_g_to_velocity_mm_s(0.5, 1800)
    assert convert_1x(0.5, 1800, "mm/s", "rms") == pytest.approx(peak_mm_s / math.sqrt(2))
    assert convert_1x(0.5, 1800, "um", "pk-pk") == pytest.approx(2 * accel_g_to_displacement_um(0.5, 1800))
    assert convert_1x(0.5, 1800, "m/s2") == pytest.approx(0.5 * 9.80665)
    with pytest.raises(ValueError):
        convert_1x(0.5, 1800, "inch/s")
    with pytest.raises(ValueError):
        accel_g_to_velocity_mm_s(0.5, 0.0)
