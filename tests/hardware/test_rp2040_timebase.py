"""The board's edge timebase on its own: a microsecond stamp becomes the frame position of the
closed form ``(t - EDGE_LATENCY_US - t_adc) * 48 / (P * n_ch) - 1/n_ch`` (in 1/256 frame, rounded
down), exactly, across the 2**30 us ticks wrap, for every channel count and conversion period,
and the numbers it keeps stay small ints (below 2**30)."""

from __future__ import annotations

import math
from fractions import Fraction

import pytest
from rp2040_fake import TICKS_PERIOD, Rig

from runtrue_fw.rp2040_adc import adc_div_for_rate
from runtrue_fw.rp2040_timebase import EDGE_LATENCY_US, START_READ_OFFSET_US, Timebase


def _period_q8(rate_hz: float, n_ch: int) -> int:
    div, _ = adc_div_for_rate(rate_hz, n_ch)
    return (((div >> 8) << 8) | (div & 0xFF)) + 256


@pytest.mark.parametrize("n_ch", [1, 2, 3])
@pytest.mark.parametrize("rate_hz", [500, 4000, 5000])
def test_edge_positions_follow_the_closed_form_across_the_ticks_wrap(rig: Rig, n_ch: int, rate_hz: int) -> None:
    period_q8 = _period_q8(rate_hz, n_ch)
    t0 = TICKS_PERIOD - 3_000_000       # the run starts 3 s before the microsecond ticks wrap
    tb = Timebase()
    tb.set(t0, period_q8, n_ch)
    t_adc = t0 + START_READ_OFFSET_US
    now = t0
    for step_us in (1_000, 6_997, 19_000_000, 2_500_001, 7):  # anchor moves, one over the wrap
        now += step_us
        tb.advance(now % TICKS_PERIOD)
        edge = now + 333                                          # stamped after this pass
        want = math.floor(Fraction((edge - EDGE_LATENCY_US - t_adc) * 48 * 65536, period_q8 * n_ch)
                           - Fraction(256, n_ch))
        assert not tb.wrapped                                     # 21.5 s: far from 2**22 frames
        assert tb.edge_position_q8(edge % TICKS_PERIOD) == want
        assert all(abs(v) < 1 << 30 for v in (tb._anc_q8, tb._anc_rem, tb._den))


def test_an_edge_before_the_first_sample_is_negative(rig: Rig) -> None:
    tb = Timebase()
    tb.set(1_000, _period_q8(4000, 3), 3)
    assert tb.edge_position_q8(1_000 + START_READ_OFFSET_US + EDGE_LATENCY_US) == -86  # floor(-256/3)
    assert not tb.wrapped
