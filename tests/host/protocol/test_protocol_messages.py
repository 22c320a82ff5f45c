"""Message payloads of firmware/PROTOCOL.md parsed into dataclasses, and command frames."""

from __future__ import annotations

import json
import struct

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from runtrue.protocol.commands import CMD_SET_EDGE, CMD_SET_RATE, CommandEncoder, set_channels_payload, set_line_payload
from runtrue.protocol.errors import MessageError
from runtrue.protocol.frames import Frame, FrameDecoder, encode_frame
from runtrue.protocol.messages import (
    REV,
    Ack,
    DeviceInfo,
    InfoAssembler,
    InfoPart,
    RevStats,
    SelfTest,
    Status,
    Text,
    Unknown,
    encode_int40,
    parse_message,
    rev_payload,
)


def stats(rev: int, length_q8: int, flags: int, mask: int, sums: list[tuple[int, ...]], first: int = 0) -> RevStats:
    return RevStats(rev, length_q8, 1234, flags, mask, first, tuple(tuple(c) for c in sums))


def test_rev_gives_the_meters_exact_sums_and_header() -> None:
    big = (1 << 39) - 1
    s = stats(41, 16_667 * 256, 0x20, 0b101, [tuple(range(14)), (big, -big - 1) + (-5,) * 12], first=200)
    payload = rev_payload(s)
    assert len(payload) == 16 + 70 * 2
    rev = parse_message(Frame(2, REV, 5, payload))
    assert rev == s
    assert rev.channels == [0, 2] and rev.flag_names == ["first"]


def test_int40_is_lo_three_bytes_then_signed_hi_two_bytes() -> None:
    assert encode_int40(-1) == b"\xff" * 5
    assert encode_int40(1 << 24) == b"\x00\x00\x00\x01\x00"
    assert encode_int40(-(1 << 39)) == b"\x00\x00\x00\x00\x80"
    with pytest.raises(ValueError):
        encode_int40(1 << 39)


def test_rev_with_inconsistent_length_mask_or_sum_count_is_a_message_error() -> None:
    good = rev_payload(stats(1, 10_000, 0, 0b011, [(0,) * 14, (0,) * 14]))
    with pytest.raises(MessageError):
        parse_message(Frame(2, REV, 0, good[:-1]))
    bad_mask = bytearray(good)
    bad_mask[13] = 0b001
    with pytest.raises(MessageError):
        parse_message(Frame(2, REV, 0, bytes(bad_mask)))
    bad_count = bytearray(good)
    bad_count[15] = 13
    with pytest.raises(MessageError, match="14"):
        parse_message(Frame(2, REV, 0, bytes(bad_count)))


def test_status_info_ack_selftest_text() -> None:
    status = parse_message(Frame(2, 0x03, 0, struct.pack("<IHIIIIIB", 1000, 345, 2, 3, 4, 99, 0, 1)))
    assert status == Status(1000, 345, 2, 3, 99, 0, True, edges_lost=4)
    info_obj = {"fw": "0.2.0", "board": "sim", "proto": 2, "channels_max": 3, "channel_mask": 3,
                "rate_hz": 4000.0, "adc_bits": 12, "counts_per_g": [400, 400, 400],
                "zero_code": [2048, 2048, 2048], "edge": "falling", "streaming": False, "serial": "E66"}
    info = parse_message(Frame(2, 0x01, 0, json.dumps(info_obj).encode()))
    assert isinstance(info, DeviceInfo)
    assert (info.board, info.rate_hz, info.edge, info.serial, info.counts_per_g) == ("sim", 4000.0, "falling", "E66", [400.0] * 3)
    ack = parse_message(Frame(2, 0x04, 0, struct.pack("<HBB", 7, 0x84, 1) + b"rate 20 Hz outside 500-10000"))
    assert ack == Ack(7, 0x84, 1, "rate 20 Hz outside 500-10000") and not ack.ok and ack.result_name == "bad argument"
    st = parse_message(Frame(2, 0x05, 0, b'{"pass": true, "checks": [{"name": "adc", "pass": true}]}'))
    assert isinstance(st, SelfTest) and st.passed and st.checks[0]["name"] == "adc"
    assert parse_message(Frame(2, 0x06, 0, b"hello")) == Text("hello")
    assert parse_message(Frame(2, 0x7E, 0, b"x")) == Unknown(0x7E, b"x")


def test_info_that_is_not_json_is_a_message_error() -> None:
    with pytest.raises(MessageError):
        parse_message(Frame(2, 0x01, 0, b"\xff{"))
    with pytest.raises(MessageError):
        parse_message(Frame(2, 0x01, 0, b'{"board": "sim"}'))


def test_commands_are_numbered_and_wrap() -> None:
    enc = CommandEncoder(first_seq=65535)
    seq_a, wire_a = enc.encode(CMD_SET_RATE, struct.pack("<I", 4000))
    seq_b, wire_b = enc.encode(CMD_SET_EDGE, b"\x01")
    assert (seq_a, seq_b) == (65535, 0)
    frames = FrameDecoder().feed(wire_a + wire_b)
    assert frames == [Frame(2, CMD_SET_RATE, 65535, struct.pack("<I", 4000)), Frame(2, CMD_SET_EDGE, 0, b"\x01")]


def test_set_line_takes_50_60_or_off() -> None:
    assert set_line_payload(60) == b"\x3c" and set_line_payload(0) == b"\x00"
    with pytest.raises(ValueError):
        set_line_payload(55)


# ---- any payload: only MessageError ------------------------------------------------------------

_json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=True) | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=6), inner, max_size=4),
    max_leaves=12,
)
_info_keys = st.sampled_from(["fw", "board", "proto", "channels_max", "channel_mask", "rate_hz", "adc_bits",
                              "adc_offset", "counts_per_g", "zero_code", "edge", "streaming", "serial", "basis",
                              "line_hz", "line_inc", "round_robin", "fe", "max_rpm", "min_rpm", "part", "parts",
                              "pass", "checks"])
_json_payloads = st.dictionaries(_info_keys, _json_values, max_size=12).map(
    lambda d: json.dumps(d).encode()[:240])
_rev_like = st.builds(
    lambda head, body: head + body,
    st.binary(min_size=16, max_size=16).map(lambda h: h[:15] + bytes([14])),
    st.binary(max_size=224),
)
_payloads = st.one_of(st.binary(max_size=240), _json_payloads, _rev_like)


@pytest.mark.slow
@settings(max_examples=400, deadline=None)
@given(st.sampled_from([0x01, 0x02, 0x03, 0x04, 0x05, 0x06, 0x7E]), _payloads)
def test_any_payload_of_any_type_raises_only_message_error(ftype: int, payload: bytes) -> None:
    """Frames with a good CRC but any payload: the message layer answers a message or MessageError,
    and a decoded stream of them never lets another exception out."""
    wire = encode_frame(ftype, 0, payload)
    frames = FrameDecoder().feed(wire)
    assert len(frames) == 1
    try:
        msg = parse_message(frames[0])
    except MessageError:
        return
    if isinstance(msg, InfoPart):
        try:
            InfoAssembler().feed(InfoPart(0, 1, msg.fields))
        except MessageError:
            pass


def test_channel_mask_outside_the_three_channels_is_refused() -> None:
    with pytest.raises(ValueError):
        set_channels_payload(0)
    with pytest.raises(ValueError):
        set_channels_payload(0b1000)
