"""The revolution model: the meter's basis rebuilt bit for bit, the IV fit under a changing speed,
line hum against running-speed orders, and the front-end correction."""

from __future__ import annotations

import cmath
import importlib.util
import math
import sys
from array import array
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from runtrue.device import revmodel as rm
from runtrue.readings import joint as jf
from runtrue.sim.frontend import METER_A1_S, METER_A2_S2, lowpass_response
from runtrue_fw import basis as fwb

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
import disturbances  # noqa: E402

RATE_HZ = 4000.0


def synth_revs(speed_hz: float, change_per_rev: float, *, lag_deg: float = 30.0, amp_codes: float = 400.0,
               sigma_codes: float = 0.0, rng: np.random.Generator | None = None, n_revs: int = 3,
               line: tuple[float, float] | None = None, extra_orders: dict[int, complex] | None = None,
               line_hz: float = 50.0, start: float = 50.3):
    """Revolutions of a rotor accelerating at a constant rate (relative speed change
    ``change_per_rev`` per revolution), 1x of ``amp_codes`` scaling with speed squared, sampled
    at RATE_HZ into integer codes; edges at 1/256 sample, the first at sample ``start``; a line
    tone ``line`` = (codes, Hz).  Returns [(geometry, sums, truth 1x)]."""
    m = disturbances.Machine(rate_hz=RATE_HZ, speed_hz=speed_hz, change_per_rev=change_per_rev,
                             amp_codes=amp_codes, lag_deg=lag_deg,
                             orders=tuple((extra_orders or {}).items()),
                             line_codes=line[0] if line else 0.0, line_tone_hz=line[1] if line else 100.0,
                             line_hz=line_hz, sigma_codes=sigma_codes)
    revs = disturbances.synth(m, n_revs, rng or np.random.default_rng(0), start=start, line_phase_rad=0.3)
    return [(r.geom, r.sums, r.truth) for r in revs]


# ---- the meter's basis ---------------------------------------------------------------------------

@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(8, 90),
    length_q8=st.integers(8 * 256, 200 * 256),
    first_off=st.integers(0, 255),
    line_hz=st.sampled_from([0.0, 50.0, 60.0]),
    seed=st.integers(0, 2**32 - 1),
)
def test_rebuilt_sums_equal_the_meters_reference_sums_bit_for_bit(n, length_q8, first_off, line_hz, seed) -> None:
    rng = np.random.default_rng(seed)
    codes = rng.integers(0, 4096, n)
    li = fwb.line_increment(line_hz, RATE_HZ)
    geom = rm.RevGeometry(n, length_q8, first_off, li)
    ref = fwb.reference_sums(fwb.make_cos_table(), array("H", codes.tolist()), 2048, first_off, length_q8, li)
    assert list(rm.meter_sums(geom, codes - 2048)) == ref


def test_steady_speed_fit_is_plain_least_squares_and_recovers_the_1x() -> None:
    (_, _, _), (geom, sums, truth), _ = synth_revs(18.0, 0.0, amp_codes=500.0)
    fit = rm.fit_revolution(geom, sums, line_hz=50.0, speed_hz=18.0)
    assert not fit.collisions and len(fit.columns) == rm.N_FIT
    assert abs(fit.orders[1] - truth) < 0.3  # codes of 500: the samples' rounding to whole codes only
    # with no acceleration the estimate is least squares on the meter's basis: cov == CRLB
    np.testing.assert_allclose(np.diag(fit.cov_unit), np.diag(fit.crlb_unit), rtol=1e-9)


# ---- speed changing within a revolution -----------------------------------------------------------

@pytest.mark.parametrize("change", [0.1, -0.1, 0.05])
def test_speed_change_within_a_revolution_leaves_no_phase_bias(change: float) -> None:
    """-5 % -> +5 % within one revolution bends the uniform angle scale by degrees; the model of
    a quadratic angle through the edges takes it out."""
    revs = synth_revs(24.5, change, amp_codes=600.0)
    lengths = [g.length_samples for g, _, _ in revs]
    geom, sums, truth = revs[1]
    plain = rm.fit_revolution(geom, sums).orders[1]
    accel = rm.accel_from_periods(lengths[1], lengths[0], lengths[2])
    modelled = rm.fit_revolution(geom, sums, accel=accel, line_hz=50.0, speed_hz=24.5).orders[1]
    assert abs(math.degrees(cmath.phase(plain / truth))) > 0.3  # the problem is real
    assert abs(math.degrees(cmath.phase(modelled / truth))) < 0.05
    assert abs(modelled) / abs(truth) == pytest.approx(1.0, abs=5e-4)


def test_acceleration_from_the_previous_revolutions_only_is_still_close() -> None:
    revs = synth_revs(24.5, 0.1, amp_codes=600.0)
    lengths = [g.length_samples for g, _, _ in revs]
    geom, sums, truth = revs[2]
    accel = rm.accel_from_periods(lengths[2], lengths[1], None)
    z = rm.fit_revolution(geom, sums, accel=accel, line_hz=50.0, speed_hz=24.5).orders[1]
    assert abs(math.degrees(cmath.phase(z / truth))) < 0.1


@settings(max_examples=50, deadline=None)
@given(w0=st.floats(0.002, 0.05), rel_change=st.floats(-0.15, 0.15))
def test_acceleration_from_neighbouring_periods_is_exact_for_a_constant_rate(w0: float, rel_change: float) -> None:
    alpha = rel_change * w0 * w0
    times = [2 * n / (w0 + math.sqrt(w0 * w0 + 2 * alpha * n)) for n in range(4)]
    lengths = np.diff(times)
    tol = 1e-6 * w0 * w0  # of a 1 ppm speed change per revolution
    assert rm.accel_from_periods(lengths[1], lengths[0], lengths[2]) == pytest.approx(alpha, abs=tol)
    assert rm.accel_from_periods(lengths[1], lengths[0], None) == pytest.approx(alpha, abs=tol)
    assert rm.accel_from_periods(lengths[1], None, lengths[2]) == pytest.approx(alpha, abs=tol)
    assert rm.accel_from_periods(lengths[1]) == 0.0


def test_modelling_the_speed_change_costs_almost_no_precision() -> None:
    """IV with the meter's basis as instruments: the 1x variance stays within 1 % of the bound
    of the model being fitted at a 10 % speed change per revolution."""
    for speed_hz in (18.0, 24.0, 24.5):
        for change, limit in ((0.02, 0.005), (0.1, 0.01)):
            revs = synth_revs(speed_hz, change)
            lengths = [g.length_samples for g, _, _ in revs]
            geom, sums, _ = revs[1]
            accel = rm.accel_from_periods(lengths[1], lengths[0], lengths[2])
            fit = rm.fit_revolution(geom, sums, accel=accel, line_hz=50.0, speed_hz=speed_hz)
            for c in rm.harmonic_columns(1):
                i = fit.columns.index(c)
                assert 0.0 <= fit.cov_unit[i, i] / fit.crlb_unit[i, i] - 1.0 < limit


@pytest.mark.slow
def test_monte_carlo_1x_scatter_meets_the_bound_under_a_speed_change() -> None:
    rng = np.random.default_rng(5)
    errs = []
    crlb = None
    for _ in range(300):
        revs = synth_revs(24.5, -0.1, amp_codes=200.0, sigma_codes=20.0, rng=rng)
        lengths = [g.length_samples for g, _, _ in revs]
        geom, sums, truth = revs[1]
        fit = rm.fit_revolution(geom, sums, accel=rm.accel_from_periods(lengths[1], lengths[0], lengths[2]))
        errs.append(fit.orders[1] - truth)
        c1 = fit.columns.index(rm.harmonic_columns(1)[0])
        crlb = fit.crlb_unit[c1, c1] * 20.0**2
    e = np.array(errs)
    ratio = math.sqrt(np.var(e.real, ddof=1) / crlb)
    assert 0.85 < ratio < 1.15  # 300 trials: about +-4 % on the ratio
    assert abs(e.mean()) < 4 * math.sqrt(crlb / 300) * math.sqrt(2)


def test_2x_and_3x_from_the_rotor_are_fitted_and_do_not_leak_into_the_1x() -> None:
    revs = synth_revs(24.5, 0.0, amp_codes=300.0, extra_orders={2: cmath.rect(150, 1.0), 3: cmath.rect(150, 2.0)})
    geom, sums, truth = revs[1]
    fit = rm.fit_revolution(geom, sums)
    assert abs(fit.orders[1] - truth) < 0.3  # codes: the samples' rounding only
    assert abs(fit.orders[3] - cmath.rect(150, 2.0)) < 0.3


# ---- line hum -------------------------------------------------------------------------------------

def test_line_hum_near_a_running_speed_order_is_flagged_and_not_fitted() -> None:
    found = rm.line_collisions(1470 / 60, 50.0)
    assert [(c.line_hz, c.order) for c in found] == [(50.0, 2), (100.0, 4)]
    assert found[1].message == "line hum at 100 Hz is within 2.0 % of 4x: average longer or change speed"
    assert rm.line_collisions(1100 / 60, 50.0) == []
    assert [(c.line_hz, c.order) for c in rm.line_collisions(3000 / 60, 50.0)] == [(50.0, 1), (100.0, 2)]
    assert rm.line_collisions(1470 / 60, 0.0) == []  # line terms off


def test_a_line_tone_20_db_above_the_1x_does_not_disturb_it_when_apart() -> None:
    speed_hz = 1100 / 60
    revs = synth_revs(speed_hz, 0.0, amp_codes=100.0, line=(1000.0, 100.0))
    geom, sums, truth = revs[1]
    fit = rm.fit_revolution(geom, sums, line_hz=50.0, speed_hz=speed_hz)
    assert not fit.collisions
    assert abs(fit.orders[1] - truth) < 0.5  # 0.5 % of the 1x with a tone ten times larger
    assert abs(fit.lines[2]) == pytest.approx(1000.0, rel=0.01)


def test_a_colliding_line_term_is_dropped_and_averaging_longer_takes_the_hum_out() -> None:
    """100 Hz hum three times the 1x, 2 % from 4x at 1470 rpm: one revolution cannot separate
    it from the 4x (it leaks a few percent into the 1x); its phase walks 0.08 turn a revolution
    against the rotor's, so an average over whole turns of that walk removes it."""
    speed_hz = 1470 / 60
    revs = synth_revs(speed_hz, 0.0, amp_codes=100.0, line=(300.0, 100.0), n_revs=37)
    errors = []
    for geom, sums, truth in revs:
        fit = rm.fit_revolution(geom, sums, line_hz=50.0, speed_hz=speed_hz)
        assert {c.line_term for c in fit.collisions} == {1, 2}
        assert fit.lines == {}
        assert all(c not in fit.columns for m in (1, 2) for c in rm.line_columns(m))
        errors.append(fit.orders[1] - truth)
    worst = max(abs(e) for e in errors)
    assert 1.0 < worst < 20.0  # percent of the 1x (100 codes): the leak is real and bounded
    assert abs(np.mean(errors)) < worst / 4


# ---- front end -----------------------------------------------------------------------------------

def _hardware_frontend():
    path = Path(__file__).parents[3] / "hardware" / "frontend.py"
    spec = importlib.util.spec_from_file_location("runtrue_hw_frontend_rm", path)
    assert spec and spec.loader
    mod = importlib.util.module_from_spec(spec)
    sys.modules["runtrue_hw_frontend_rm"] = mod
    spec.loader.exec_module(mod)
    return mod


def test_front_end_parts_and_tolerances_are_the_hardware_design() -> None:
    hw = _hardware_frontend().DESIGN
    assert rm.FRONTEND_PARTS == {"r1_ohm": hw.r1_ohm, "c1_f": hw.c1_f, "r2_ohm": hw.r2_ohm, "c2_f": hw.c2_f}
    assert rm.FRONTEND_TOLERANCES == {"r1_ohm": hw.r1_tol, "c1_f": hw.c1_tol, "r2_ohm": hw.r2_tol, "c2_f": hw.c2_tol}


@pytest.mark.parametrize("speed_rpm, lag_deg, gain", [(900, 0.99, 1.0), (3600, 3.96, 0.998), (24000, 24.77, 0.909)])
def test_front_end_lag_and_gain_at_speed(speed_rpm: float, lag_deg: float, gain: float) -> None:
    corr = rm.frontend_correction(speed_rpm / 60, METER_A1_S, METER_A2_S2)
    assert corr.lag_deg == pytest.approx(lag_deg, abs=0.01)
    assert corr.gain == pytest.approx(gain, abs=0.002)
    hw = _hardware_frontend()
    assert corr.lag_tol_deg == pytest.approx(hw.tolerance_lag_spread_deg(speed_rpm / 60), rel=1e-6)


def test_front_end_correction_gives_back_the_vibration_before_the_filter() -> None:
    vib = cmath.rect(0.4, math.radians(120.0))  # reading convention amp e^{+j lag}
    f = 400.0
    # the simulator's pickup phasor P (signal Re(P e^{jwt})) is conj(reading); the filter multiplies P
    measured = np.conj(np.conj(vib) * lowpass_response(f, METER_A1_S, METER_A2_S2))
    corr = rm.frontend_correction(f, METER_A1_S, METER_A2_S2)
    assert corr.apply(measured) == pytest.approx(vib, abs=1e-12)
    assert "lag" in corr.text and "+-" in corr.text


# ---- several revolutions fitted together ------------------------------------------------------

def test_joint_fit_separates_100_hz_hum_from_the_4x_that_one_revolution_cannot() -> None:
    """1470 rpm: 100 Hz is 2 % from 4x.  A tone ten times the 1x (20 dB) wrecks a single
    revolution's 1x (the line term must be dropped); ten revolutions fitted together with the
    tone common to all give the 1x to within the noise, with no warning left."""
    rng = np.random.default_rng(8)
    m = disturbances.Machine(speed_hz=1470 / 60, amp_codes=100.0, line_codes=1000.0, sigma_codes=1.0)
    revs = disturbances.synth(m, 10, rng)
    single = rm.fit_revolution(revs[4].geom, revs[4].sums, line_hz=50.0, speed_hz=m.speed_hz)
    assert single.collisions and abs(single.orders[1] - revs[4].truth) > 5.0
    joint = jf.fit_joint([jf.RevInput(r.geom, r.sums, 0.0, r.first_sample) for r in revs],
                         line_hz=50.0, speed_hz=m.speed_hz)
    truth = np.mean([r.truth for r in revs])
    i = joint.index["cos1x"]
    sd = math.sqrt(joint.crlb_unit[i, i]) * 1.0
    assert not joint.collisions
    assert abs(joint.orders[1] - truth) < 5 * sd
    assert abs(joint.lines[2]) == pytest.approx(1000.0, rel=0.01)


def test_joint_fit_of_a_steady_reading_is_the_mean_of_the_revolutions() -> None:
    rng = np.random.default_rng(9)
    m = disturbances.Machine(speed_hz=1100 / 60, amp_codes=300.0, line_hz=0.0, sigma_codes=3.0)
    revs = disturbances.synth(m, 8, rng)
    joint = jf.fit_joint([jf.RevInput(r.geom, r.sums, 0.0, r.first_sample) for r in revs])
    singles = [rm.fit_revolution(r.geom, r.sums).orders[1] for r in revs]
    assert joint.orders[1] == pytest.approx(np.mean(singles), abs=0.05)


def test_joint_fit_under_a_speed_ramp_gives_the_1x_at_the_reference_speed() -> None:
    rng = np.random.default_rng(10)
    m = disturbances.Machine(speed_hz=24.5, amp_codes=400.0, change_per_rev=0.1, line_hz=50.0)
    revs = disturbances.synth(m, 12, rng)
    acc = disturbances.accels(revs)
    inner = revs[1:-1]
    joint = jf.fit_joint([jf.RevInput(r.geom, r.sums, a, r.first_sample) for r, a in zip(inner, acc[1:-1])],
                         line_hz=50.0, speed_hz=24.5)
    truth = np.mean([r.truth for r in inner])  # the 1x scales with speed squared: mean = at the RMS speed
    assert abs(math.degrees(cmath.phase(joint.orders[1] / truth))) < 0.02
    assert abs(joint.orders[1]) / abs(truth) == pytest.approx(1.0, abs=2e-4)
