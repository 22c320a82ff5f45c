"""Steadiness: speed and vector both settled (rule in runtrue.readings.steadiness)."""

from __future__ import annotations

import numpy as np
from readings_revs import make_revs

from runtrue.protocol.messages import Revolution
from runtrue.readings import SteadinessDetector, phasor, steadiness


def test_steady_machine_is_steady() -> None:
    rng = np.random.default_rng(4)
    result = steadiness(make_revs([phasor(0.2, 40.0)], 8, 0.005, rng, speed_sd_rpm=2.0))
    assert result.steady and result.speed_steady and result.vector_steady == [True]


def test_too_few_revolutions_is_not_yet_steady() -> None:
    rng = np.random.default_rng(4)
    result = steadiness(make_revs([phasor(0.2, 40.0)], 5, 0.0, rng))
    assert not result.steady and "3 more" in result.reason


def test_coasting_down_is_not_steady() -> None:
    rng = np.random.default_rng(4)
    revs = make_revs([phasor(0.2, 40.0)], 8, 0.001, rng)
    slowing = [
        Revolution(r.rev, 60e6 / (3000 - 15 * i), r.n_samples, 0, r.channel_mask, r.h1, r.h2, r.rms_g)
        for i, r in enumerate(revs)
    ]
    result = steadiness(slowing)
    assert not result.speed_steady and not result.steady and "speed" in result.reason


def test_drifting_vector_is_not_steady_but_noise_alone_is() -> None:
    rng = np.random.default_rng(9)
    revs = make_revs([phasor(0.2, 40.0)], 8, 0.002, rng)
    drifting = [
        Revolution(r.rev, r.period_us, r.n_samples, 0, r.channel_mask, [r.h1[0] * np.exp(1j * np.radians(3 * i))], r.h2, r.rms_g)
        for i, r in enumerate(revs)
    ]  # phase creeping 3 degrees a revolution: a warm-up
    result = steadiness(drifting)
    assert result.speed_steady and result.vector_steady == [False] and not result.steady
    # Large noise, no drift: the halves differ only as the scatter explains.
    noisy_ok = sum(steadiness(make_revs([phasor(0.2, 40.0)], 8, 0.05, rng)).steady for _ in range(200))
    assert noisy_ok >= 180


def test_detector_uses_the_latest_window() -> None:
    rng = np.random.default_rng(2)
    detector = SteadinessDetector(window=8)
    for rev in make_revs([phasor(0.2, 40.0)], 20, 0.002, rng):
        state = detector.add(rev)
    assert state.steady and state.n_revs == 8
