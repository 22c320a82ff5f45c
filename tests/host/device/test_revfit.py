"""The host's revolution fit (runtrue.device.revfit) from the meter's integer sums.

The basis the host rebuilds must equal the meter's bit for bit (basis.reference_sums is the
specification), and sums + fit must match a float64 least-squares fit on ideal cosines
(numpy.linalg.lstsq) within 1e-4 relative amplitude and 0.01 degree, at full-scale codes, on the
longest and the shortest revolutions the meter fits (1x: amplitude and phase; the smaller orders:
vector error within 1e-4 of the 1x amplitude, as the Q14 basis errors are relative to the signal).
"""

from __future__ import annotations

import cmath
import math
import random

import numpy as np
import pytest

from runtrue.device import revfit
from runtrue.protocol.messages import FLAG_NO_FIT, DeviceInfo, RevStats
from runtrue_fw import basis

TABLE = basis.make_cos_table()
OFFSET = 2048


def _stats(samples_per_ch: list[list[int]], first_off_q8: int, length_q8: int, line_inc: int, mask: int = 0) -> RevStats:
    sums = tuple(tuple(basis.reference_sums(TABLE, s, OFFSET, first_off_q8, length_q8, line_inc))
                 for s in samples_per_ch)
    mask = mask or (1 << len(samples_per_ch)) - 1
    return RevStats(7, length_q8, len(samples_per_ch[0]), 0, mask, first_off_q8, sums)


def _n_samples(first_off_q8: int, length_q8: int) -> int:
    return (length_q8 - first_off_q8 - 1) // 256 + 1


@pytest.mark.parametrize("seed", range(6))
def test_host_basis_is_bit_exact_with_the_meter_specification(seed: int) -> None:
    rng = random.Random(seed)
    length_q8 = rng.randrange(15 * 256, 4096 * 256)
    f = rng.randrange(256)
    line_inc = rng.choice([0, basis.line_increment(50.0, 4000.0), rng.randrange(1 << 30)])
    n = _n_samples(f, length_q8)
    samples = [rng.randrange(4096) for _ in range(n)]
    assert revfit.sums_from_samples(np.array(samples), OFFSET, f, length_q8, line_inc) == \
        basis.reference_sums(TABLE, samples, OFFSET, f, length_q8, line_inc)


def _ideal_fit(samples: list[int], f: int, length_q8: int, orders: int, line_step_turn: float) -> np.ndarray:
    """Float64 least squares on ideal cosines: coefficients [dc, c1, s1, ..., (line)]."""
    i = np.arange(len(samples))
    phi = 2 * np.pi * (f + 256.0 * i) / length_q8
    cols = [np.ones_like(phi)]
    for k in range(1, orders + 1):
        cols += [np.cos(k * phi), np.sin(k * phi)]
    if line_step_turn:
        for m in (1, 2):
            psi = 2 * np.pi * m * line_step_turn * i
            cols += [np.cos(psi), np.sin(psi)]
    a = np.stack(cols, axis=1)
    x, *_ = np.linalg.lstsq(a, np.asarray(samples, float) - OFFSET, rcond=None)
    return x


def _signal(n: int, f: int, length_q8: int, amps: list[float], lags_deg: list[float], noise: float, rng: random.Random) -> list[int]:
    out = []
    for i in range(n):
        phi = 2 * math.pi * (f + 256.0 * i) / length_q8
        v = OFFSET + sum(a * math.cos((k + 1) * phi - math.radians(g)) for k, (a, g) in enumerate(zip(amps, lags_deg)))
        v += rng.gauss(0.0, noise)
        out.append(min(4095, max(0, round(v))))
    return out


@pytest.mark.parametrize(
    "length_q8, line",
    [
        (4096 * 256 - 37, True),  # the longest revolution the meter fits, line tones on
        (4096 * 256 - 37, False),
        (15 * 256 + 100, False),  # the shortest: 1x and 2x only
        (40 * 256 + 3, True),  # 4x, no line (too few samples per term)
        (163 * 256 + 77, True),
    ],
)
def test_sums_and_host_fit_match_ideal_float64_least_squares_at_full_scale(length_q8: int, line: bool) -> None:
    rng = random.Random(length_q8)
    f = 171
    n = _n_samples(f, length_q8)
    line_inc = basis.line_increment(50.0, 4000.0) if line else 0
    amps = [2300.0, 250.0, 100.0, 50.0]  # the codes reach (and clip at) the ADC's end stops
    samples = _signal(n, f, length_q8, amps, [33.0, 250.0, 10.0, 300.0], 30.0, rng)
    assert min(samples) == 0 or max(samples) == 4095
    stats = _stats([samples], f, length_q8, line_inc)
    settings = revfit.FitSettings(4000.0, (1.0,), OFFSET, line_inc, False)
    fit = revfit.fit_sums(stats, settings)
    assert fit is not None
    terms = fit.terms
    line_turn = line_inc / 2**30 if terms.line else 0.0
    ref = _ideal_fit(samples, f, length_q8, terms.orders, line_turn)
    h1_ref = complex(ref[1], ref[2])
    got1 = fit.channels[0].phasor(1)
    assert abs(abs(got1) / abs(h1_ref) - 1) <= 1e-4
    assert abs(math.degrees(cmath.phase(got1 / h1_ref))) <= 0.01
    for k in range(2, terms.orders + 1):  # smaller orders: vector error within 1e-4 of the 1x amplitude
        got = fit.channels[0].phasor(k)
        want = complex(ref[2 * k - 1], ref[2 * k])
        assert abs(got - want) <= 1e-4 * abs(h1_ref), (k, got, want)


def test_terms_follow_the_samples_per_revolution() -> None:
    line = basis.line_increment(50.0, 4000.0)
    assert revfit.choose_terms(4000, line) == revfit.Terms(4, True)
    assert revfit.choose_terms(38, line) == revfit.Terms(3, True)   # 13 terms need 39
    assert revfit.choose_terms(33, line) == revfit.Terms(3, True)
    assert revfit.choose_terms(32, line) == revfit.Terms(2, True)
    assert revfit.choose_terms(26, line) == revfit.Terms(2, False)
    assert revfit.choose_terms(39, 0) == revfit.Terms(4, False)
    assert revfit.choose_terms(15, 0) == revfit.Terms(2, False)
    assert revfit.choose_terms(14, 0) is None


def test_a_too_short_revolution_is_flagged_not_fitted() -> None:
    length_q8 = 12 * 256
    samples = [[2048 + (i % 3) for i in range(_n_samples(0, length_q8))]]
    rev = revfit.revolution(_stats(samples, 0, length_q8, 0), revfit.FitSettings(4000.0, (100.0,)))
    assert rev.flags & FLAG_NO_FIT and not rev.usable and rev.h1 == [0j]


def test_phasor_in_g_with_the_phase_lag_convention_and_speed() -> None:
    length_q8 = 200 * 256  # 200 samples at 4 kS/s: 1,200 rpm
    n = 200
    samples = [round(2048 + 500 * math.cos(2 * math.pi * i / 200 - math.radians(60))) for i in range(n)]
    info = DeviceInfo(fw="x", board="sim", proto=2, rate_hz=4000.0, counts_per_g=[250.0], adc_offset=2048)
    rev = revfit.revolution_from_info(_stats([samples], 0, length_q8, 0), info)
    assert rev.speed_rpm == pytest.approx(1200.0)
    assert abs(rev.h1[0]) == pytest.approx(2.0, rel=1e-3)  # codes rounded to whole counts
    assert math.degrees(cmath.phase(rev.h1[0])) == pytest.approx(60.0, abs=0.05)
    assert rev.rms_g[0] == pytest.approx(2.0 / math.sqrt(2), rel=1e-3)
    assert rev.usable


def test_round_robin_delay_of_later_channels_is_undone() -> None:
    """Channel of rank r is converted r/n_ch of a sample late: it sees the rotor that much further
    on; after the correction all three channels give the same phase for the same vibration."""
    length_q8 = 100 * 256 + 50
    n = _n_samples(0, length_q8)
    per_ch = []
    for r in range(3):
        per_ch.append([round(2048 + 800 * math.cos(2 * math.pi * (256.0 * (i + r / 3)) / length_q8 - math.radians(45)))
                       for i in range(n)])
    stats = _stats(per_ch, 0, length_q8, 0, mask=0b111)
    rev = revfit.revolution(stats, revfit.FitSettings(4000.0, (1.0, 1.0, 1.0), OFFSET, 0, True))
    for h in rev.h1:
        assert math.degrees(cmath.phase(h)) == pytest.approx(45.0, abs=0.05)
    plain = revfit.revolution(stats, revfit.FitSettings(4000.0, (1.0, 1.0, 1.0), OFFSET, 0, False))
    assert abs(math.degrees(cmath.phase(plain.h1[2])) - 45.0) > 1.0
