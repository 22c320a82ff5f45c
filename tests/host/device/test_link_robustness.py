"""What a faulty meter or link can send: the client survives every message, drops repeats and
stray old frames, tells a restarted meter from a stale frame, and names the real cause of a
silence.  Built on recorded simulator traffic (tests/fixtures) re-framed as a faulty link would."""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from runtrue.device.client import MeterClient
from runtrue.device.sequence import CONFIRM_FRAMES, DUPLICATE, NEXT, RESTART, STALE, SequenceTracker
from runtrue.protocol.frames import Frame, FrameDecoder, encode_frame
from runtrue.protocol.messages import ACK, INFO, REV, SELFTEST, STATUS, TEXT, Revolution
from runtrue.transport.base import Transport

FIXTURE = Path(__file__).resolve().parents[2] / "fixtures" / "sim_fan_rx.bin"


def recorded_frames() -> list[Frame]:
    return FrameDecoder().feed(FIXTURE.read_bytes())


FRAMES = recorded_frames()
REVS = [f for f in FRAMES if f.type == REV]
INFOS = [f for f in FRAMES if f.type == INFO]  # the meter's description, needed to fit its sums
VERSION = FRAMES[0].version


class Silent(Transport):
    name = "test0"

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        return b""

    def write(self, data: bytes) -> None:
        pass

    def close(self) -> None:
        pass


def wire(frames: list[Frame], renumber_from: int | None = None) -> bytes:
    out = b""
    for k, f in enumerate(frames):
        seq = f.seq if renumber_from is None else renumber_from + k
        out += encode_frame(f.type, seq, f.payload)
    return out


def revolutions(client: MeterClient) -> list[Revolution]:
    out = []
    while client.pending:
        out.append(client.read_revolution(0))
    return out


def test_the_recorded_stream_gives_every_revolution_once() -> None:
    client = MeterClient(Silent())
    client.feed(wire(FRAMES))
    assert len(revolutions(client)) == len(REVS) >= 60
    assert client.lost_frames == 0 and client.duplicate_frames == 0 and client.meter_restarts == 0


def test_a_frame_delivered_twice_is_one_revolution_not_two() -> None:
    client = MeterClient(Silent())
    doubled = [f for f in FRAMES for _ in range(2)]
    client.feed(wire(doubled))
    revs = revolutions(client)
    assert [r.rev for r in revs] == sorted({r.rev for r in revs}) and len(revs) == len(REVS)
    assert client.duplicate_frames == len(FRAMES) and client.meter_restarts == 0 and client.lost_frames == 0


def test_a_stray_old_frame_is_dropped_not_taken_for_a_restart() -> None:
    client = MeterClient(Silent())
    head, tail = FRAMES[:40], FRAMES[40:]
    client.feed(wire(head) + wire([FRAMES[30]]) + wire(tail))
    assert len(revolutions(client)) == len(REVS)
    assert client.meter_restarts == 0 and client.lost_frames == 0 and client.sequence.stale == 1


def test_a_meter_that_starts_again_from_zero_is_followed_as_a_restart() -> None:
    client = MeterClient(Silent())
    client.feed(wire(FRAMES[:50]))
    client.feed(wire(REVS[-10:], renumber_from=0))  # powered up again: numbering from 0
    assert client.meter_restarts == 1 and client.lost_frames == 0
    assert sum(1 for f in FRAMES[:50] if f.type == REV) + 10 == len(revolutions(client))
    assert any("restarted" in line for line in client.log)


def test_a_meter_numbering_from_elsewhere_is_followed_after_a_few_frames() -> None:
    client = MeterClient(Silent())
    client.feed(wire(FRAMES[:60]))  # numbers 0..59
    client.feed(wire(REVS[:10], renumber_from=30))  # backward, not near 0, not an answer
    assert client.meter_restarts == 1
    assert client.sequence.stale == CONFIRM_FRAMES - 1  # the first ones wait for confirmation


def test_an_answer_after_silence_with_a_lower_number_is_a_restart() -> None:
    t = SequenceTracker()
    for s in range(100, 110):
        assert t.verdict(s, answer=False, now_s=0.0) == NEXT
    assert t.verdict(50, answer=True, now_s=0.1) == STALE  # no silence: a stray old ACK
    assert t.verdict(51, answer=True, now_s=5.0) == RESTART  # after silence: the meter answers anew
    assert t.verdict(52, answer=False, now_s=5.1) == NEXT


@pytest.mark.slow
@settings(max_examples=60, deadline=None, derandomize=True)
@given(st.lists(st.tuples(st.integers(1, 3), st.booleans()), min_size=1, max_size=80))
def test_repeats_are_dropped_and_gaps_counted_whatever_the_pattern(steps: list[tuple[int, bool]]) -> None:
    """An in-order stream with gaps of 1-3 and frames repeated at random: every original frame is
    kept once, every repeat dropped, and the gaps are the lost frames."""
    t = SequenceTracker()
    seq, kept, repeats, lost = 65_500, 0, 0, 0  # crosses the wrap at 65536
    for gap, repeat in steps:
        seq = (seq + gap) % 65_536
        if kept:
            lost += gap - 1
        assert t.verdict(seq, answer=False, now_s=0.0) in (NEXT,)
        kept += 1
        if repeat:
            assert t.verdict(seq, answer=False, now_s=0.0) == DUPLICATE
            repeats += 1
    assert t.duplicates == repeats and t.lost_frames == lost and t.restarts == 0


@pytest.mark.slow
@settings(max_examples=80, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from([INFO, REV, STATUS, ACK, SELFTEST, TEXT, 0x42]),
                          st.binary(max_size=240)), max_size=20))
def test_any_payload_with_a_good_checksum_is_survived_and_counted(bad: list[tuple[int, bytes]]) -> None:
    client = MeterClient(Silent())
    frames = [Frame(VERSION, kind, 0, payload) for kind, payload in bad] + INFOS + REVS[:5]
    client.feed(wire(frames, renumber_from=1))  # never raises
    after = revolutions(client)
    assert len(after) >= 5  # the good revolutions after the bad ones still arrive
    assert client.message_errors <= len(bad)


def test_a_selftest_or_info_frame_with_odd_json_is_counted_not_fatal() -> None:
    client = MeterClient(Silent())
    odd = [Frame(VERSION, SELFTEST, 0, b'{"part": "x", "checks": 5}'),
           Frame(VERSION, INFO, 0, b'{"fw": [1], "rate_hz": "fast"}'),
           Frame(VERSION, SELFTEST, 0, b"[1, 2, 3]"), Frame(VERSION, INFO, 0, b"\xff\xfe")]
    client.feed(wire(odd + INFOS + REVS[:3], renumber_from=1))
    assert client.message_errors >= 1 and len(revolutions(client)) == 3


# ---- diagnoses ------------------------------------------------------------------------------------
class Scripted(Silent):
    def __init__(self, data: bytes) -> None:
        self.data = data

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        out, self.data = self.data[:max_bytes], self.data[max_bytes:]
        return out


@pytest.mark.slow
def test_a_port_sending_bytes_that_are_not_frames_is_called_wrong_device_or_noise() -> None:
    garbage = bytes(range(1, 200)) * 3 + b"\x00" + b"hello world\r\n\x00" * 5
    client = MeterClient(Scripted(garbage), "usb0", command_timeout_s=0.3)
    try:
        client.identify()
    except Exception as exc:  # noqa: BLE001
        text = str(exc)
    assert "another device" in text and "noise" in text and "firmware is not running" not in text


def test_a_silent_port_is_called_not_a_runtrue_meter() -> None:
    client = MeterClient(Silent(), "usb0", command_timeout_s=0.2)
    try:
        client.identify()
    except Exception as exc:  # noqa: BLE001
        text = str(exc)
    assert "not a runtrue meter" in text and "noise" not in text


def test_damaged_frames_among_good_ones_are_called_noise() -> None:
    good = wire(FRAMES[:10])
    damaged = bytearray(wire(FRAMES[10:40]))
    for i in range(3, len(damaged), 7):
        if damaged[i] not in (0,):
            damaged[i] ^= 0x10
    client = MeterClient(Scripted(good + bytes(damaged)), "usb0")
    before = {k: 0 for k in client.counts()}
    client.feed(client.transport.read(1 << 20, 0))
    assert "noise" in client.diagnose(before)


def test_a_restart_explains_the_silence_after_it() -> None:
    client = MeterClient(Silent(), "usb0")
    client.feed(wire(FRAMES[:50]))
    before = client.counts()
    client.feed(wire([f for f in FRAMES if f.type == ACK][:1], renumber_from=0))
    assert "restarted" in client.diagnose(before, waited_s=5)


def test_losing_the_meter_promises_nothing_the_caller_may_not_do() -> None:
    from runtrue.transport.base import TransportLost

    class Gone(Silent):
        def read(self, max_bytes: int, timeout_s: float) -> bytes:
            raise TransportLost("gone")

        def reopen(self, timeout_s: float) -> bool:
            return False

    client = MeterClient(Gone(), "usb0")
    try:
        client.read_revolution(0.1)
    except TransportLost as exc:
        text = str(exc)
    assert "carries on" not in text and "nothing recorded is lost" not in text
