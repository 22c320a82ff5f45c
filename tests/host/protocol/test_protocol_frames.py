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

VECTORS = Path(__file__).resolve().parents[2] / "vectors" / "frames.json"


def hand_frame(version: int, frame_type: int, seq: int, payload: bytes) -> bytes:
    """A wire frame assembled step by step as PROTOCOL.md describes it."""
    body = bytes([version, frame_type, seq & 0xFF, seq >> 8]) + payload
    body += struct.pack("<I", zlib.crc32(body))
    return cobs_encode(body) + b"\x00"


def test_encoder_matches_a_frame_built_by_hand_from_the_spec() -> None:
    payload = b"\x00\x01hello\x00"
    assert encode_frame(0x06, 0x1234, payload) == hand_frame(1, 0x06, 0x1234, payload)


def test_empty_payload_frame_bytes_are_as_specified() -> None:
    # STOP command, seq 0: body 01 83 00 00 + CRC-32 of those four bytes, little-endian.
    crc = zlib.crc32(b"\x01\x83\x00\x00")
    body = b"\x01\x83\x00\x00" + crc.to_bytes(4, "little")
    wire = encode_frame(0x83, 0)
    assert wire[-1] == 0 and 0 not in wire[:-1]
    assert decode_frame(wire[:-1]) == Frame(1, 0x83, 0, b"")
    assert wire == cobs_encode(body) + b"\x00"


@pytest.mark.parametrize("payload", [bytes(range(1, 241)), bytes(240), b"\xff" * 240, bytes(range(240))])
def test_largest_frame_fits_in_251_bytes_and_a_bigger_payload_is_refused(payload: bytes) -> None:
    wire = encode_frame(0x02, 0xFFFF, payload)
    assert len(wire) <= MAX_WIRE_FRAME
    assert FrameDecoder().feed(wire) == [Frame(1, 0x02, 0xFFFF, payload)]
    with pytest.raises(FrameLengthError):
        encode_frame(0x02, 7, b"\x01" * (MAX_PAYLOAD + 1))


def test_corrupted_frame_raises_crc_error() -> None:
    wire = bytearray(hand_frame(1, 0x06, 3, b"abc"))
    wire[6] ^= 0x01
    with pytest.raises(CrcError):
        decode_frame(bytes(wire[:-1]))


def test_other_version_is_reported_not_decoded() -> None:
    with pytest.raises(VersionError) as info:
        decode_frame(hand_frame(2, 0x06, 3, b"abc")[:-1])
    assert info.value.version == 2
    decoder = FrameDecoder()
    assert decoder.feed(hand_frame(2, 0x06, 3, b"abc") + hand_frame(1, 0x06, 4, b"ok")) == [
        Frame(1, 0x06, 4, b"ok")
    ]
    assert decoder.version_errors == 1


def test_decoder_resynchronises_on_a_port_opened_mid_frame() -> None:
    a = hand_frame(1, 0x02, 10, b"\x05" * 30)
    b = hand_frame(1, 0x02, 11, b"\x06" * 30)
    decoder = FrameDecoder()
    frames = decoder.feed(a[12:] + b)
    assert [f.seq for f in frames] == [11]
    assert decoder.framing_errors + decoder.crc_errors == 1


def test_run_longer_than_the_maximum_is_dropped_as_one_framing_error() -> None:
    decoder = FrameDecoder()
    junk = b"\x07" * 1000
    good = hand_frame(1, 0x06, 0, b"after")
    frames = decoder.feed(junk[:300]) + decoder.feed(junk[300:] + b"\x00" + good)
    assert frames == [Frame(1, 0x06, 0, b"after")]
    assert decoder.framing_errors == 1


def test_lost_frames_counted_from_sequence_gaps_across_the_wrap() -> None:
    decoder = FrameDecoder()
    seqs = [65530, 65531, 65534, 65535, 0, 3, 4]  # lost: 65532, 65533, 1, 2
    for seq in seqs:
        decoder.feed(hand_frame(1, 0x06, seq, b""))
    assert decoder.lost_frames == 4
    assert decoder.frames_ok == len(seqs)


def test_device_restart_is_not_counted_as_lost_frames() -> None:
    decoder = FrameDecoder()
    for seq in [500, 501, 502, 0, 1]:
        decoder.feed(hand_frame(1, 0x06, seq, b""))
    assert decoder.lost_frames == 0
    assert decoder.seq_restarts == 1


def test_back_to_back_delimiters_are_idle_not_errors() -> None:
    decoder = FrameDecoder()
    assert decoder.feed(b"\x00\x00\x00") == []
    assert decoder.errors == 0


# ---- the shared vectors (generated from the firmware encoder) --------------------------------


def _load_vectors() -> list[dict]:
    data = json.loads(VECTORS.read_text())
    return data["vectors"] if isinstance(data, dict) else data


@pytest.mark.skipif(not VECTORS.exists(), reason="tests/vectors/frames.json not generated yet")
def test_decoder_reads_every_shared_vector() -> None:
    for vector in _load_vectors():
        wire = bytes.fromhex(vector["wire"])
        decoder = FrameDecoder()
        frames = decoder.feed(wire)
        assert frames == [Frame(1, vector["type"], vector["seq"], bytes.fromhex(vector["payload"]))], vector
