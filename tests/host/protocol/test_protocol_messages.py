"""Message payloads of firmware/PROTOCOL.md parsed into dataclasses, and command frames."""

from __future__ import annotations

import json
import struct

import pytest

from runtrue.protocol.errors import MessageError
from runtrue.protocol.frames import Frame, FrameDecoder
from runtrue.protocol.messages import (
    CMD_SET_EDGE,
    CMD_SET_RATE,
    REV,
    Ack,
    CommandEncoder,
    DeviceInfo,
    Revolution,
    SelfTest,
    Status,
    Text,
    Unknown,
    parse_message,
    set_channels_payload,
)


def rev_payload(rev: int, period_us: float, flags: int, mask: int, chans: list[tuple[float, ...]]) -> bytes:
    head = struct.pack("<IfHHBB", rev, period_us, 1234, flags, len(chans), mask)
    return head + b"".join(struct.pack("<5f", *c) for c in chans)


def test_rev_gives_phasors_speed_and_usability() -> None:
    payload = rev_payload(41, 16_666.666, 0x20, 0b101, [(0.1, 0.2, 0.01, 0.0, 0.5), (-0.3, 0.0, 0.0, 0.02, 0.25)])
    assert len(payload) == 14 + 20 * 2
    rev = parse_message(Frame(1, REV, 5, payload))
    assert isinstance(rev, Revolution)
    assert rev.rev == 41 and rev.n_samples == 1234 and rev.channels == [0, 2]
    assert rev.h1[0] == pytest.approx(complex(0.1, 0.2), rel=1e-6)
    assert rev.h2[1] == pytest.approx(complex(0.0, 0.02), rel=1e-6)
    assert rev.rms_g == pytest.approx([0.5, 0.25])
    assert rev.speed_rpm == pytest.approx(3600.0, rel=1e-6)  # 60e6 us/min / 16,666.7 us
    assert rev.usable  # FIRST alone does not disqualify
    assert rev.flag_names == ["first"]


@pytest.mark.parametrize("flag", [0x01, 0x02, 0x04, 0x08, 0x10])
def test_flagged_revolutions_are_not_usable(flag: int) -> None:
    rev = parse_message(Frame(1, REV, 0, rev_payload(1, 10_000.0, flag, 1, [(0, 0, 0, 0, 0)])))
    assert isinstance(rev, Revolution) and not rev.usable


def test_rev_with_inconsistent_length_or_mask_is_a_message_error() -> None:
    good = rev_payload(1, 10_000.0, 0, 0b011, [(0, 0, 0, 0, 0), (0, 0, 0, 0, 0)])
    with pytest.raises(MessageError):
        parse_message(Frame(1, REV, 0, good[:-1]))
    bad_mask = rev_payload(1, 10_000.0, 0, 0b001, [(0, 0, 0, 0, 0), (0, 0, 0, 0, 0)])
    with pytest.raises(MessageError):
        parse_message(Frame(1, REV, 0, bad_mask))


def test_status_info_ack_selftest_text() -> None:
    status = parse_message(Frame(1, 0x03, 0, struct.pack("<IHIIIIB", 1000, 345, 2, 3, 99, 0, 1)))
    assert status == Status(1000, 345, 2, 3, 99, 0, True)
    info_obj = {"fw": "0.1.0", "board": "sim", "proto": 1, "channels_max": 3, "channel_mask": 3,
                "rate_hz": 4000.0, "adc_bits": 12, "counts_per_g": [400, 400, 400],
                "zero_code": [2048, 2048, 2048], "edge": "falling", "streaming": False, "serial": "E66"}
    info = parse_message(Frame(1, 0x01, 0, json.dumps(info_obj).encode()))
    assert isinstance(info, DeviceInfo)
    assert (info.board, info.rate_hz, info.edge, info.serial, info.counts_per_g) == ("sim", 4000.0, "falling", "E66", [400.0] * 3)
    ack = parse_message(Frame(1, 0x04, 0, struct.pack("<HBB", 7, 0x84, 1) + b"rate 20 Hz outside 500-10000"))
    assert ack == Ack(7, 0x84, 1, "rate 20 Hz outside 500-10000") and not ack.ok and ack.result_name == "bad argument"
    st = parse_message(Frame(1, 0x05, 0, b'{"pass": true, "checks": [{"name": "adc", "pass": true}]}'))
    assert isinstance(st, SelfTest) and st.passed and st.checks[0]["name"] == "adc"
    assert parse_message(Frame(1, 0x06, 0, b"hello")) == Text("hello")
    assert parse_message(Frame(1, 0x7E, 0, b"x")) == Unknown(0x7E, b"x")


def test_info_that_is_not_json_is_a_message_error() -> None:
    with pytest.raises(MessageError):
        parse_message(Frame(1, 0x01, 0, b"\xff{"))
    with pytest.raises(MessageError):
        parse_message(Frame(1, 0x01, 0, b'{"board": "sim"}'))


def test_commands_are_numbered_and_wrap() -> None:
    enc = CommandEncoder(first_seq=65535)
    seq_a, wire_a = enc.encode(CMD_SET_RATE, struct.pack("<I", 4000))
    seq_b, wire_b = enc.encode(CMD_SET_EDGE, b"\x01")
    assert (seq_a, seq_b) == (65535, 0)
    frames = FrameDecoder().feed(wire_a + wire_b)
    assert frames == [Frame(1, CMD_SET_RATE, 65535, struct.pack("<I", 4000)), Frame(1, CMD_SET_EDGE, 0, b"\x01")]


def test_channel_mask_outside_the_three_channels_is_refused() -> None:
    with pytest.raises(ValueError):
        set_channels_payload(0)
    with pytest.raises(ValueError):
        set_channels_payload(0b1000)
