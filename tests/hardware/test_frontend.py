"""The analog front-end figures (hardware/frontend.py) against the textbook filter formulas, and
hardware/FRONTEND.md against the figures, so the document cannot drift from the design."""

from __future__ import annotations

import cmath
import importlib.util
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).parents[2]
_spec = importlib.util.spec_from_file_location("runtrue_hw_frontend", ROOT / "hardware" / "frontend.py")
assert _spec and _spec.loader
fe = importlib.util.module_from_spec(_spec)
import sys  # noqa: E402

sys.modules["runtrue_hw_frontend"] = fe
_spec.loader.exec_module(fe)


def nodal_ladder(f_hz: float, d) -> complex:
    """Independent reference: solve the two node voltages of the RC ladder by Kirchhoff's current
    law (nodal analysis; Horowitz & Hill, The Art of Electronics, 3rd ed., chapter 1), 1 V in."""
    s = 2j * math.pi * f_hz
    g1, g2 = 1 / d.r1_ohm, 1 / d.r2_ohm
    y = np.array([[g1 + g2 + s * d.c1_f, -g2], [-g2, g2 + s * d.c2_f]], dtype=complex)
    v = np.linalg.solve(y, np.array([g1 * 1.0, 0.0], dtype=complex))
    return complex(v[1])


@pytest.mark.parametrize("f_hz", [1.0, 25.0, 250.0, 872.0, 2500.0, 50_000.0])
def test_ladder_formula_matches_a_nodal_solution(f_hz: float) -> None:
    assert fe.rc_ladder(f_hz) == pytest.approx(nodal_ladder(f_hz, fe.DESIGN), rel=1e-12)


def test_first_order_section_is_the_textbook_rc_lowpass() -> None:
    # Horowitz & Hill, The Art of Electronics, 3rd ed., section 1.7 (from memory): H = 1/(1 + j w R C),
    # |H| = 1/sqrt(2) and 45 degrees of lag at f = 1/(2 pi R C).
    r, c = 10e3, 100e-9
    f3db = 1 / (2 * math.pi * r * c)
    h = fe.rc_lowpass(f3db, r, c)
    assert abs(h) == pytest.approx(1 / math.sqrt(2))
    assert fe.lag_deg(h) == pytest.approx(45.0)
    assert fe.lag_deg(fe.rc_lowpass(3 * f3db, r, c)) == pytest.approx(math.degrees(math.atan(3)))


def test_ladder_with_a_negligible_second_section_is_one_rc_section() -> None:
    d = replace(fe.DESIGN, r2_ohm=1e-3, c2_f=1e-15)
    for f in (10.0, 500.0, 5000.0):
        assert fe.rc_ladder(f, d) == pytest.approx(fe.rc_lowpass(f, d.r1_ohm, d.c1_f), rel=1e-6)


def test_cutoff_is_where_the_gain_is_3db_down() -> None:
    fc = fe.cutoff_hz()
    assert abs(fe.rc_ladder(fc)) == pytest.approx(1 / math.sqrt(2), rel=1e-9)
    # dominated by R1 (C1 + C2): within 10 % of that single-section estimate
    assert fc == pytest.approx(1 / (2 * math.pi * 32e3 * 5.7e-9), rel=0.10)


def test_noise_bandwidth_of_one_section_is_pi_over_two_times_cutoff() -> None:
    # equivalent noise bandwidth of a first-order low-pass: (pi/2) f_3dB (Horowitz & Hill 3rd ed., ch. 8, from memory)
    d = replace(fe.DESIGN, r2_ohm=1e-3, c2_f=1e-15)
    assert fe.noise_bandwidth_hz(d) == pytest.approx(math.pi / 2 / (2 * math.pi * d.r1_ohm * d.c1_f), rel=0.01)


def test_round_robin_skew_is_a_pure_time_delay() -> None:
    # 3 channels at 4 kHz: conversions 83.3 us apart; channel 2 lags by 166.7 us: 3.0 deg at 50 Hz
    assert fe.channel_skew_lag_deg(3000, 2) == pytest.approx(360 * 50 * 2 / 12000)


def test_adc_scale_is_ratiometric_and_velocity_follows_a_over_omega() -> None:
    assert fe.counts_per_g() == pytest.approx(409.6)
    assert fe.adc_range_g() == pytest.approx(5.0)
    # 1 g peak at 50 Hz: 9.80665 / (2 pi 50) m/s = 31.2 mm/s
    assert fe.g_to_mm_s(1.0, 50.0) == pytest.approx(31.2153, rel=1e-5)


def test_one_revolution_noise_falls_as_one_over_root_n() -> None:
    slow, fast = fe.rev_noise_g(600), fe.rev_noise_g(2400)  # 4x fewer samples per revolution
    assert fast / slow == pytest.approx(2.0)


def test_filter_lag_at_1x_grows_with_speed_so_it_cancels_only_at_a_fixed_speed() -> None:
    rows = fe.speed_rows()
    lags = [r.lag_deg for r in rows]
    assert lags == sorted(lags) and lags[-1] > 10 * lags[1]
    for r in rows:
        h = fe.rc_ladder(r.f_hz)
        assert r.lag_deg == pytest.approx(-math.degrees(cmath.phase(h)))
        assert r.lag_change_10pct_deg > 0


def test_frontend_document_carries_the_current_figures() -> None:
    text = (ROOT / "hardware" / "FRONTEND.md").read_text()
    block = fe.document_block(text)
    assert block is not None, "FRONTEND.md lost its generated-figures markers"
    assert block == fe.render(), "FRONTEND.md is stale: run `python hardware/frontend.py --write`"


def test_figures_quoted_at_the_top_of_the_envelope_match_the_filter() -> None:
    # FRONTEND.md quotes the front end at the envelope's top speed (10,000 rpm): amplitude within
    # 2 % and lag under 11°.  Second-order RC ladder, Horowitz & Hill, The Art of Electronics,
    # 3rd ed., section 1.7 (single section; the ladder is its two-stage form).
    from runtrue_fw import envelope

    assert fe.DESIGN.speed_max_rpm == envelope.MAX_RPM and fe.DESIGN.speed_min_rpm == envelope.MIN_RPM
    (row,) = fe.speed_rows(speeds_rpm=(envelope.MAX_RPM,))
    assert row.amp_ratio > 0.98 and row.lag_deg < 11
    text = (ROOT / "hardware" / "FRONTEND.md").read_text(encoding="utf-8")
    assert "10,000 rpm (167 Hz at 1x" in text and "within 2 %" in text and "under 11°" in text


def test_the_meter_reports_the_design_filter_in_info() -> None:
    import re

    src = (ROOT / "firmware" / "runtrue_fw" / "board_rp2040.py").read_text()
    got = {k: float(v) for k, v in re.findall(r"^(FE_A[12]_S2?) = ([0-9.e+-]+)", src, re.M)}
    a1, a2 = fe.denominator_coeffs()
    assert got["FE_A1_S"] == pytest.approx(a1, rel=1e-3) and got["FE_A2_S2"] == pytest.approx(a2, rel=1e-3)
