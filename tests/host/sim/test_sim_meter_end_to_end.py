"""The virtual machine measured by the REAL firmware Meter through SimBoard, over the host link.

These runs go machine -> SimBoard -> runtrue_fw.meter.Meter -> frames -> SimTransport ->
runtrue.device.MeterClient, exactly the path a technician's session takes on the simulator.
"""

from __future__ import annotations

import cmath
import dataclasses
import math

import numpy as np
import pytest
from sim_testkit import quiet

from runtrue.device.client import MeterClient
from runtrue.protocol.messages import (
    FLAG_CLIP_CH0,
    FLAG_CLIPPED,
    FLAG_DROPPED_SAMPLES,
    FLAG_EXTRA_PULSE,
    FLAG_MISSING_PULSE,
    FLAG_SPEED_JUMP,
)
from runtrue.sim.scenarios import SCENARIOS
from runtrue.sim.transport import SimTransport


def _client(scenario, seed: int = 1) -> MeterClient:
    transport = SimTransport(scenario, seed=seed)
    return MeterClient(transport, port=transport.name)


def _mean_1x(client: MeterClient, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Vector mean of n usable revolutions and the standard error of that mean, per channel."""
    revs = client.revolutions(n, usable_only=True)
    h1 = np.array([r.h1 for r in revs])
    return h1.mean(axis=0), h1.std(axis=0, ddof=1) / math.sqrt(n)


def _lag_deg(z: complex) -> float:
    return math.degrees(cmath.phase(z)) % 360.0


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(SCENARIOS))
def test_meter_reads_the_machines_true_1x_on_every_channel(name):
    # Noise, 2x line, harmonics and glitches as in the scenario; only the speed wander is off,
    # so that the truth (expected_1x at the running speed) holds for the whole run.
    sc = dataclasses.replace(SCENARIOS[name], speed_drift_frac=0.0)
    client = _client(sc)
    client.start()
    mean, sem = _mean_1x(client, 80)
    expected = np.array(client.transport.machine.expected_1x())
    assert len(mean) == len(sc.pickups)
    for m, e, s in zip(mean, expected, sem):
        assert abs(m - e) < 5 * s + 0.003 * abs(e), (m, e, s)


@pytest.mark.slow
def test_two_channels_sampled_in_turn_still_agree_in_phase():
    # The ADC converts channel 1 half a sample after channel 0; the meter corrects that known
    # delay (round robin), so two pickups on the same quiet machine read their true lags.
    sc = quiet("roller")
    client = _client(sc)
    client.set_rate(1000)  # slow sampling makes the skew large: 0.5 ms = 2.9 deg at 980 rpm
    client.start()
    mean, _ = _mean_1x(client, 20)
    expected = client.transport.machine.expected_1x()
    for m, e in zip(mean, expected):
        assert abs(m - e) < 2e-3 * abs(e)


@pytest.mark.slow
@pytest.mark.parametrize("rotation", ["cw", "ccw"])
def test_weight_at_90_deg_reads_90_deg_more_lag_through_the_meter(rotation):
    sc = dataclasses.replace(SCENARIOS["fan"], rotation=rotation)
    client = _client(sc, seed=2)
    machine = client.transport.machine
    client.start()
    ref, _ = _mean_1x(client, 40)
    w = machine.add_weight(0, 60.0, 0.0, 160.0)
    client.discard_revolutions()
    at_0, _ = _mean_1x(client, 40)
    machine.remove_weight(w)
    machine.add_weight(0, 60.0, 90.0, 160.0)
    client.discard_revolutions()
    at_90, _ = _mean_1x(client, 40)
    shift = (_lag_deg(at_90[0] - ref[0]) - _lag_deg(at_0[0] - ref[0])) % 360.0
    assert shift == pytest.approx(90.0, abs=3.0)


def test_single_plane_balancing_job_on_the_fan_brings_the_vibration_down():
    # Reference run, trial run, influence coefficient, correction (the single-plane influence-
    # coefficient method, e.g. ISO 21940-13 / common practice), all measured by the meter; the
    # correction weight is fitted by the physical geometry (angle from the mark, against rotation).
    sc = SCENARIOS["fan"]
    client = _client(sc, seed=3)
    machine = client.transport.machine
    radius = sc.planes[0].radius_mm
    client.start()
    before, _ = _mean_1x(client, 50)
    trial = machine.add_weight(0, 50.0, 0.0, radius)
    client.discard_revolutions()
    with_trial, _ = _mean_1x(client, 50)
    machine.remove_weight(trial)  # trial weight removed
    coeff = (with_trial[0] - before[0]) / (50.0 * radius)
    correction = -before[0] / coeff
    machine.add_weight(0, abs(correction) / radius, math.degrees(cmath.phase(correction)), radius)
    client.discard_revolutions()
    after, _ = _mean_1x(client, 50)
    assert abs(after[0]) < 0.1 * abs(before[0])
    assert machine.true_residual_unbalance_gmm()[0] < 0.1 * abs(sc.planes[0].initial_unbalance_gmm)


@pytest.mark.slow
def test_falling_edge_readings_refer_to_the_falling_edge():
    client = _client(quiet("fan"))
    client.set_edge("falling")
    client.start()
    mean, _ = _mean_1x(client, 20)
    expected = client.transport.machine.expected_1x()[0]
    assert abs(mean[0] - expected) < 2e-3 * abs(expected)
    rising = SimTransport(quiet("fan"), seed=1).machine.expected_1x()[0]
    assert (_lag_deg(rising) - _lag_deg(expected)) % 360.0 == pytest.approx(SCENARIOS["fan"].mark_width_deg)


def _flags(client: MeterClient, n: int) -> list[int]:
    return [r.flags for r in client.revolutions(n)]


@pytest.mark.slow
def test_reference_glitches_reach_the_host_as_extra_pulse_flags():
    client = _client(quiet("fan", glitch_per_rev=0.3, glitch_width_us=200.0), seed=4)
    client.start()
    flags = _flags(client, 120)
    glitched = sum(1 for f in flags if f & FLAG_EXTRA_PULSE)
    assert 10 < glitched < 80


@pytest.mark.slow
def test_missed_reference_pulses_reach_the_host_as_missing_pulse_flags():
    client = _client(quiet("fan", missed_per_rev=0.1), seed=5)
    client.start()
    flags = _flags(client, 150)
    assert 4 < sum(1 for f in flags if f & FLAG_MISSING_PULSE) < 40


@pytest.mark.slow
def test_clipping_at_the_adc_end_stops_is_flagged_per_channel():
    sc = quiet("fan")
    sc = dataclasses.replace(sc, planes=(dataclasses.replace(sc.planes[0], initial_unbalance_gmm=40000.0 + 0j),))
    client = _client(sc)
    client.start()
    revs = client.revolutions(10)
    assert all(r.flags & FLAG_CLIPPED and r.flags & FLAG_CLIP_CH0 for r in revs)
    assert not any(r.usable for r in revs)


@pytest.mark.slow
def test_a_sudden_speed_change_is_flagged_as_a_speed_jump():
    client = _client(quiet("fan"))
    client.start()
    client.revolutions(5)
    client.transport.machine.set_speed_rpm(1470.0 * 1.3)
    flags = _flags(client, 10)
    assert any(f & FLAG_SPEED_JUMP for f in flags)


@pytest.mark.slow
def test_lost_samples_on_the_board_are_flagged_as_dropped_samples():
    client = _client(quiet("fan"))
    client.start()
    client.revolutions(5)
    client.transport.board.inject_dropped_samples(3)
    flags = _flags(client, 10)
    assert any(f & FLAG_DROPPED_SAMPLES for f in flags)


@pytest.mark.slow
def test_coast_down_is_followed_by_the_meter():
    client = _client(quiet("fan"))
    machine = client.transport.machine
    client.start()
    client.revolutions(20)
    machine.coast_down(300.0)
    revs = client.revolutions(60)
    usable = [r for r in revs[1:] if r.usable]
    speeds = [r.speed_rpm for r in usable]
    assert len(speeds) > 50
    assert all(b < a for a, b in zip(speeds, speeds[1:]))
    elapsed_s = sum(r.period_us for r in usable[1:]) * 1e-6
    assert (speeds[0] - speeds[-1]) / elapsed_s == pytest.approx(300.0, rel=0.03)


@pytest.mark.slow
def test_one_channel_of_two_at_an_odd_rate_reads_that_pickup():
    # Only the far-end pickup (channel 1) enabled, at a rate the RP2040 divider cannot hit
    # exactly: the meter reports the actual rate and still reads channel 1's true 1x.
    client = _client(quiet("roller"))
    actual = client.set_rate(7001)
    assert actual != 7001 and actual == pytest.approx(7001, rel=1e-4)
    client.set_channels(0b10)
    client.start()
    revs = client.revolutions(15, usable_only=True)
    assert all(r.channels == [1] for r in revs)
    mean = np.mean([r.h1[0] for r in revs])
    expected = client.transport.machine.expected_1x()[1]
    assert abs(mean - expected) < 2e-3 * abs(expected)
