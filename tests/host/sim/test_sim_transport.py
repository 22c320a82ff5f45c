"""SimTransport keeps the byte-pipe contract and speaks protocol v1 (firmware/PROTOCOL.md)."""

from __future__ import annotations

import json
import struct
import time

import pytest
from sim_testkit import quiet

from runtrue.protocol.frames import FrameDecoder, encode_frame
from runtrue.sim.transport import SimTransport
from runtrue.transport.base import Transport, TransportLost

IDENTIFY, START, STOP, SET_RATE = 0x81, 0x82, 0x83, 0x84
T_INFO, T_REV, T_STATUS, T_ACK = 0x01, 0x02, 0x03, 0x04


def _frames(t: SimTransport, sim_s: float) -> list:
    """Every frame the meter sends in ``sim_s`` seconds of simulated time."""
    dec = FrameDecoder()
    out = []
    end = t.machine.t_s + sim_s
    while t.machine.t_s < end:
        out += dec.feed(t.read(4096, end - t.machine.t_s))
    assert dec.errors == 0 and dec.lost_frames == 0
    return out


@pytest.mark.slow
def test_is_a_transport_named_after_its_scenario():
    t = SimTransport("roller", seed=1)
    assert isinstance(t, Transport)
    assert t.name == "sim:roller"
    assert t.machine.scenario.name == "roller"


def test_unknown_scenario_is_refused_with_the_known_names():
    with pytest.raises(ValueError, match="unknown simulator scenario 'mixer'.*fan.*roller.*sander.*spindle"):
        SimTransport("mixer")


def test_identify_answers_info_then_ack_in_protocol_v2():
    t = SimTransport("roller", seed=1)
    t.write(encode_frame(IDENTIFY, 7))
    frames = _frames(t, 0.05)
    assert [f.type for f in frames] == [T_INFO, T_INFO, T_ACK]
    info = {**json.loads(frames[0].payload), **json.loads(frames[1].payload)}
    assert info["board"] == "sim" and info["proto"] == 2 and info["round_robin"] is True
    assert info["channels_max"] == 2 and info["adc_bits"] == 12
    assert info["counts_per_g"] == [pytest.approx(409.6)] * 2
    cmd_seq, cmd_type, result = struct.unpack_from("<HBB", frames[2].payload)
    assert (cmd_seq, cmd_type, result) == (7, IDENTIFY, 0)


@pytest.mark.slow
def test_streaming_sends_a_revolution_per_turn_and_status_about_once_a_second():
    t = SimTransport("fan", seed=1)
    t.write(encode_frame(START, 0))
    frames = _frames(t, 3.0)
    revs = [f for f in frames if f.type == T_REV]
    status = [f for f in frames if f.type == T_STATUS]
    turns = 3.0 * 1470.0 / 60.0
    assert len(revs) == pytest.approx(turns, abs=3)
    assert len(status) in (2, 3)
    rev, length_q8, n_samples, flags, n_ch, mask, first_off_q8, n_sums = struct.unpack_from("<IIHHBBBB", revs[5].payload)
    period_us = length_q8 / 256 / t.board.rate_hz * 1e6
    assert period_us == pytest.approx(60e6 / 1470.0, rel=0.02)
    assert (n_ch, mask, n_sums) == (1, 1, 14)


@pytest.mark.slow
def test_read_times_out_with_nothing_when_the_meter_is_quiet():
    t = SimTransport("fan", seed=1)
    assert t.read(100, 0.5) == b""
    assert t.machine.t_s == pytest.approx(0.5)


@pytest.mark.slow
def test_closed_transport_raises_transport_lost():
    t = SimTransport("fan", seed=1)
    t.close()
    with pytest.raises(TransportLost):
        t.read(10, 0.1)
    with pytest.raises(TransportLost):
        t.write(b"\x00")


@pytest.mark.slow
def test_same_seed_gives_the_same_bytes():
    def run(seed):
        t = SimTransport("sander", seed=seed)
        t.write(encode_frame(START, 0))
        data = b""
        while t.machine.t_s < 1.0:
            data += t.read(4096, 0.05)
        return data

    assert run(9) == run(9)
    assert run(9) != run(10)


@pytest.mark.slow
def test_realtime_mode_keeps_to_the_wall_clock():
    t = SimTransport("fan", seed=1, realtime=True)
    t.write(encode_frame(START, 0))
    wall0 = time.monotonic()
    sim0 = t.machine.t_s
    while time.monotonic() - wall0 < 0.3:
        t.read(4096, 0.05)
    sim_elapsed = t.machine.t_s - sim0
    assert sim_elapsed == pytest.approx(time.monotonic() - wall0, abs=0.08)


@pytest.mark.slow
def test_weights_change_while_it_streams():
    t = SimTransport(quiet("fan"), seed=1)  # steady speed: the 1x changes only with the weights
    t.write(encode_frame(START, 0))
    _frames(t, 0.2)
    before = t.machine.expected_1x()[0]
    wid = t.machine.add_weight(0, 30.0, 45.0, 160.0)
    _frames(t, 0.2)
    assert t.machine.expected_1x()[0] != before
    t.machine.remove_weight(wid)
    assert t.machine.expected_1x()[0] == before


@pytest.mark.slow
def test_unplugged_meter_is_lost_then_comes_back_restarted():
    t = SimTransport(quiet("fan"), seed=1)
    t.write(encode_frame(START, 0))
    assert any(f.type == T_REV for f in _frames(t, 0.5))
    t.unplug()
    with pytest.raises(TransportLost):
        t.read(100, 0.1)
    assert t.reopen(1.0)
    # a restarted meter: not streaming, numbering its frames from 0 again
    assert t.read(100, 0.5) == b""
    t.write(encode_frame(IDENTIFY, 1))
    frames = FrameDecoder().feed(t.read(4096, 0.1))
    assert frames[0].type == T_INFO and frames[0].seq == 0


@pytest.mark.slow
def test_host_client_rides_through_an_unplug_of_the_simulated_meter():
    from runtrue.device.client import MeterClient

    t = SimTransport(quiet("fan"), seed=1)
    client = MeterClient(t, port=t.name)
    client.start()
    client.revolutions(5)
    t.unplug()
    revs = client.revolutions(5, timeout_s=2.0)
    assert len(revs) == 5 and client.reconnects >= 1
