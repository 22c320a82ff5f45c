"""Where the vibration is: orders, below 1x, between the orders (velocity over the severity band)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from runtrue.diagnosis.severity import broadband_velocity_rms_mm_s
from runtrue.diagnosis.spectral import order_content
from runtrue.diagnosis.verdict import judge

RATE = 4000.0
N = 4096
T = np.arange(N) / RATE


def _tone(f_hz: float, v_rms_mm_s: float) -> np.ndarray:
    """Acceleration (g) of a sinusoid with velocity v_rms (mm/s r.m.s.) at f_hz."""
    a_pk_ms2 = v_rms_mm_s * 1e-3 * math.sqrt(2) * 2 * math.pi * f_hz
    return a_pk_ms2 / 9.80665 * np.cos(2 * math.pi * f_hz * T + 0.3)


def test_a_pure_1x_is_all_synchronous_and_its_rms_is_the_severity_value() -> None:
    c = order_content(_tone(24.6, 4.0), RATE, 24.6 * 60)
    assert c.one_x_share == pytest.approx(1.0, abs=0.005)
    assert c.total_mm_s_rms == pytest.approx(4.0, rel=0.01)
    assert c.total_mm_s_rms == pytest.approx(broadband_velocity_rms_mm_s(_tone(24.6, 4.0), RATE), rel=1e-6)


def test_shares_of_1x_2x_a_sub_synchronous_and_a_bearing_tone_add_up() -> None:
    f1 = 24.6
    x = _tone(f1, 3.0) + _tone(2 * f1, 2.0) + _tone(0.43 * f1, 2.0) + _tone(7.3 * f1, 1.5)
    c = order_content(x, RATE, f1 * 60, band=(2.0, 1000.0))
    total = 9 + 4 + 4 + 2.25
    assert c.one_x_share == pytest.approx(9 / total, abs=0.01)
    assert dict(c.orders_mm_s_rms)[2] == pytest.approx(2.0, rel=0.02)
    assert c.sub_sync_share == pytest.approx(4 / total, abs=0.01)
    assert c.non_sync_share == pytest.approx(2.25 / total, abs=0.01) and c.electrical_share == 0.0
    v = judge(one_x_g=1.0, orders_g=[0.1], shares=c.shares())
    assert not v.unbalance
    names = {f.name for f in v.findings if not f.ok}
    assert names == {"1x share", "sub-synchronous"}


def test_a_capture_too_short_to_separate_the_orders_says_how_long_it_must_be() -> None:
    with pytest.raises(ValueError, match="capture at least"):
        order_content(np.zeros(256), RATE, 600.0)


def test_hum_at_twice_the_line_frequency_is_counted_as_electrical_not_as_a_bearing() -> None:
    f1 = 23.0                                   # 4x at 92 Hz, 5x at 115 Hz: 100 Hz clear of both
    x = _tone(f1, 2.0) + _tone(100.0, 1.5)
    plain = order_content(x, RATE, f1 * 60)
    split = order_content(x, RATE, f1 * 60, line_hz=50.0)
    assert plain.non_sync_share == pytest.approx(2.25 / 6.25, abs=0.01) and plain.electrical_share == 0.0
    assert split.non_sync_share < 0.01 and split.electrical_share == pytest.approx(2.25 / 6.25, abs=0.01)
    v = judge(one_x_g=1.0, shares=split.shares())
    bad = {f.name for f in v.findings if not f.ok}
    assert bad == {"1x share", "electrical"}
    assert any("motor" in t for t in v.checks)
