"""Frames and the stream decoder, checked against frames built by hand from
firmware/PROTOCOL.md and against the shared vectors the firmware encoder is tested with."""

from __future__ import annotations

import json
import struct
import zlib
from pathlib import Path

import pytest

from runtrue.protocol.cobs import cobs_encode
from runtrue.protocol.errors import CrcError, FrameLengthError, VersionError
from runtrue.protocol.frames import MAX_PAYLOAD, MAX_WIRE_FRAME, Frame, FrameDecoder, decode_frame, encode_frame
from runtrue.protocol.messages import (
    Ack,
    DeviceInfo,
    InfoAssembler,
    InfoPart,
    RevStats,
    SelfTest,
    Status,
    Text,
    parse_message,
)
from runtrue.protocol.raw import RawPart

VECTORS = Path(__file__).resolve().parents[2] / "vectors" / "frames.json"


def hand_frame(version: int, frame_type: int, seq: int, payload: bytes) -> bytes:
    """A wire frame assembled step by step as PROTOCOL.md describes it."""
    body = bytes([version, frame_type, seq & 0xFF, seq >> 8]) + payload
    body += struct.pack("<I", zlib.crc32(body))
    return cobs_encode(body) + b"\x00"


def test_encoder_matches_a_frame_built_by_hand_from_the_spec() -> None:
    payload = b"\x00\x01hello\x00"
    assert encode_frame(0x06, 0x1234, payload) == hand_frame(2, 0x06, 0x1234, payload)


def test_empty_payload_frame_bytes_are_as_specified() -> None:
    # STOP command, seq 0: body 02 83 00 00 + CRC-32 of those four bytes, little-endian.
    crc = zlib.crc32(b"\x02\x83\x00\x00")
    body = b"\x02\x83\x00\x00" + crc.to_bytes(4, "little")
    wire = encode_frame(0x83, 0)
    assert wire[-1] == 0 and 0 not in wire[:-1]
    assert decode_frame(wire[:-1]) == Frame(2, 0x83, 0, b"")
    assert wire == cobs_encode(body) + b"\x00"


@pytest.mark.parametrize("payload", [bytes(range(1, 241)), bytes(240), b"\xff" * 240, bytes(range(240))])
def test_largest_frame_fits_in_251_bytes_and_a_bigger_payload_is_refused(payload: bytes) -> None:
    wire = encode_frame(0x02, 0xFFFF, payload)
    assert len(wire) <= MAX_WIRE_FRAME
    assert FrameDecoder().feed(wire) == [Frame(2, 0x02, 0xFFFF, payload)]
    with pytest.raises(FrameLengthError):
        encode_frame(0x02, 7, b"\x01" * (MAX_PAYLOAD + 1))


def test_corrupted_frame_raises_crc_error() -> None:
    wire = bytearray(hand_frame(2, 0x06, 3, b"abc"))
    wire[6] ^= 0x01
    with pytest.raises(CrcError):
        decode_frame(bytes(wire[:-1]))


def test_other_version_is_reported_not_decoded() -> None:
    with pytest.raises(VersionError) as info:
        decode_frame(hand_frame(1, 0x06, 3, b"abc")[:-1])
    assert info.value.version == 1
    decoder = FrameDecoder()
    assert decoder.feed(hand_frame(1, 0x06, 3, b"abc") + hand_frame(2, 0x06, 4, b"ok")) == [
        Frame(2, 0x06, 4, b"ok")
    ]
    assert decoder.version_errors == 1


def test_decoder_resynchronises_on_a_port_opened_mid_frame() -> None:
    a = hand_frame(2, 0x02, 10, b"\x05" * 30)
    b = hand_frame(2, 0x02, 11, b"\x06" * 30)
    decoder = FrameDecoder()
    frames = decoder.feed(a[12:] + b)
    assert [f.seq for f in frames] == [11]
    assert decoder.framing_errors + decoder.crc_errors == 1


def test_run_longer_than_the_maximum_is_dropped_as_one_framing_error() -> None:
    decoder = FrameDecoder()
    junk = b"\x07" * 1000
    good = hand_frame(2, 0x06, 0, b"after")
    frames = decoder.feed(junk[:300]) + decoder.feed(junk[300:] + b"\x00" + good)
    assert frames == [Frame(2, 0x06, 0, b"after")]
    assert decoder.framing_errors == 1


def test_lost_frames_counted_from_sequence_gaps_across_the_wrap() -> None:
    decoder = FrameDecoder()
    seqs = [65530, 65531, 65534, 65535, 0, 3, 4]  # lost: 65532, 65533, 1, 2
    for seq in seqs:
        decoder.feed(hand_frame(2, 0x06, seq, b""))
    assert decoder.lost_frames == 4
    assert decoder.frames_ok == len(seqs)


def test_device_restart_is_not_counted_as_lost_frames() -> None:
    decoder = FrameDecoder()
    for seq in [500, 501, 502, 0, 1]:
        decoder.feed(hand_frame(2, 0x06, seq, b""))
    assert decoder.lost_frames == 0
    assert decoder.seq_restarts == 1


def test_back_to_back_delimiters_are_idle_not_errors() -> None:
    decoder = FrameDecoder()
    assert decoder.feed(b"\x00\x00\x00") == []
    assert decoder.errors == 0


# ---- the shared vectors (generated from the firmware encoder) --------------------------------
# tests/vectors/frames.json is written by tests/firmware/make_frame_vectors.py from the firmware's
# own encoder: the host must read every device frame in it and write every host frame the same.


def _vectors() -> list[dict]:
    return json.loads(VECTORS.read_text())["vectors"]


def _ids(vectors: list[dict]) -> list[str]:
    return [v["name"] for v in vectors]


SHARED = _vectors()


def test_shared_vectors_cover_both_directions_and_every_message() -> None:
    device_types = {v["type"] for v in SHARED if v["direction"] == "device"}
    host_types = {v["type"] for v in SHARED if v["direction"] == "host"}
    assert device_types == {0x01, 0x02, 0x03, 0x04, 0x05, 0x06, 0x07}
    assert host_types == set(range(0x81, 0x8C))


@pytest.mark.parametrize("vector", SHARED, ids=_ids(SHARED))
def test_host_encoder_writes_each_shared_vector_byte_for_byte(vector: dict) -> None:
    wire = encode_frame(vector["type"], vector["seq"], bytes.fromhex(vector["payload"]))
    assert wire.hex() == vector["wire"]


@pytest.mark.parametrize("vector", SHARED, ids=_ids(SHARED))
def test_decoder_reads_each_shared_vector(vector: dict) -> None:
    decoder = FrameDecoder()
    frames = decoder.feed(bytes.fromhex(vector["wire"]))
    assert frames == [Frame(2, vector["type"], vector["seq"], bytes.fromhex(vector["payload"]))]
    assert decoder.errors == 0


@pytest.mark.parametrize("vector", [v for v in SHARED if v["direction"] == "device"],
                         ids=_ids([v for v in SHARED if v["direction"] == "device"]))
def test_device_messages_parse_to_the_shared_fields(vector: dict) -> None:
    fields = vector["fields"]
    message = parse_message(FrameDecoder().feed(bytes.fromhex(vector["wire"]))[0])
    if isinstance(message, DeviceInfo):
        assert message.raw == fields
        assert (message.fw, message.board, message.proto, message.channel_mask, message.rate_hz, message.edge,
                message.serial) == (fields["fw"], fields["board"], fields["proto"], fields["channel_mask"],
                                    fields["rate_hz"], fields["edge"], fields["serial"])
    elif isinstance(message, InfoPart):
        assert {**message.fields, "part": message.part, "parts": message.parts} == fields
    elif isinstance(message, RevStats):
        assert (message.rev, message.length_q8, message.n_samples, message.flags, message.channel_mask,
                message.first_off_q8) == (fields["rev"], fields["length_q8"], fields["n_samples"], fields["flags"],
                                          fields["channel_mask"], fields["first_off_q8"])
        assert [list(c) for c in message.sums] == fields["sums"]
    elif isinstance(message, Status):
        assert message == Status(**{**fields, "streaming": bool(fields["streaming"])})
    elif isinstance(message, Ack):
        assert message == Ack(**fields)
    elif isinstance(message, SelfTest):
        assert message.passed == fields["pass"] and message.checks == fields["checks"]
    elif isinstance(message, Text):
        assert message.text == fields["text"]
    elif isinstance(message, RawPart):
        assert (message.cap_id, message.kind) == (fields["cap_id"], fields["kind"])
        if message.kind == 0:
            assert (message.start_frame, message.n_frames, message.n_ch, message.channel_mask, message.n_edges) == (
                fields["start_frame"], fields["n_frames"], fields["n_ch"], fields["channel_mask"], fields["n_edges"])
        elif message.kind == 1:
            assert (message.index, message.count, list(message.codes)) == (fields["index"], fields["count"], fields["codes"])
        elif message.kind == 2:
            assert (message.index, list(message.edges_q8)) == (fields["index"], fields["edges_q8"])
        else:
            assert message.status == fields["status"]
    else:
        pytest.fail(f"unexpected message {message!r}")


def test_shared_device_stream_decodes_in_one_go_with_the_wrap_not_counted_as_loss() -> None:
    decoder = FrameDecoder()
    stream = bytes.fromhex("".join(v["wire"] for v in SHARED if v["name"] in ("seq_before_wrap", "seq_after_wrap")))
    assert [f.seq for f in decoder.feed(stream)] == [65535, 0]
    assert decoder.lost_frames == 0


def test_info_parts_join_into_one_device_info() -> None:
    parts = [parse_message(FrameDecoder().feed(bytes.fromhex(v["wire"]))[0]) for v in SHARED
             if v["name"] in ("info", "info_part_2")]
    joiner = InfoAssembler()
    assert joiner.feed(parts[0]) is None
    info = joiner.feed(parts[1])
    assert info is not None and info.proto == 2 and info.basis == "q14c1024h4l2" and info.line_inc == 13421773
    assert info.round_robin and info.adc_offset == 2048 and info.fe == [0.0001834, 1.504e-10] and info.max_rpm == 10000
