"""Is it unbalance? Each signature moves the verdict the way the trade expects."""

import cmath
import math

import numpy as np

from runtrue.diagnosis.verdict import circular_sd_deg, judge


def _revs(z, sd_deg, n=40, seed=1):
    rng = np.random.default_rng(seed)
    return [z * cmath.exp(1j * math.radians(rng.normal(0, sd_deg))) for _ in range(n)]


def test_an_unbalanced_fan_is_called_unbalance():
    one = 0.4 * cmath.exp(1j * 1.0)
    v = judge(one_x_g=one, orders_g=[0.04, 0.01, 0.005], overall_rms_g=0.4 / math.sqrt(2) * 1.03,
              per_rev_one_x_g=_revs(one, 3.0))
    assert v.unbalance, v.checks
    assert "unbalance" in v.headline.lower()


def test_a_misaligned_machine_is_not_called_unbalance():
    one = 0.2
    two = 0.25                                   # 2x above 1x
    overall = math.sqrt((one ** 2 + two ** 2) / 2)
    v = judge(one_x_g=one, orders_g=[two, 0.02], overall_rms_g=overall, per_rev_one_x_g=_revs(one, 3.0))
    assert not v.unbalance
    assert any("alignment" in c for c in v.checks)


def test_looseness_harmonics_and_bearing_noise_are_named():
    one = 0.2
    orders = [0.05, 0.12, 0.1]
    overall = math.sqrt((one ** 2 + sum(o ** 2 for o in orders)) / 2 + 0.2 ** 2)
    v = judge(one_x_g=one, orders_g=orders, overall_rms_g=overall)
    assert not v.unbalance
    text = " ".join(v.checks)
    assert "looseness" in text and "bearings" in text


def test_a_wandering_phase_is_not_unbalance():
    one = 0.3
    v = judge(one_x_g=one, per_rev_one_x_g=_revs(one, 40.0))
    assert not v.unbalance
    assert any("phase" in c for c in v.checks)


def test_circular_sd_matches_the_wrapped_normal_for_small_spread():
    # for a wrapped normal with small sigma the circular s.d. equals sigma (Mardia and Jupp 2000)
    sd = circular_sd_deg(_revs(1.0, 5.0, n=4000, seed=3))
    assert abs(sd - 5.0) < 0.3


def test_non_linear_response_after_a_trial_is_flagged():
    ref = 0.3 + 0j
    expected = ref + 0.2j
    ok = judge(one_x_g=ref, linearity=(ref, expected, expected + 0.02))
    bad = judge(one_x_g=ref, linearity=(ref, expected, ref + 0.02j))
    assert ok.unbalance
    assert not bad.unbalance and any("linear" in c for c in bad.checks)
