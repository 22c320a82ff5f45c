"""Frame encoder and command reader (firmware/runtrue_fw/frames.py) against PROTOCOL.md."""

from __future__ import annotations

import struct
import zlib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from runtrue_fw import frames as fr


def _cobs(data: bytes) -> bytes:
    out = bytearray(len(data) + len(data) // 254 + 1)
    n = fr.cobs_encode_into(data, len(data), out)
    return bytes(out[:n])


def _enc(w: fr.FrameWriter, ftype: int, payload: bytes) -> bytes:
    n = w.encode(ftype, payload)
    return bytes(w.wire[:n])


def _uncobs(data: bytes) -> bytes | None:
    out = bytearray(len(data))
    n = fr.cobs_decode_into(data, len(data), out)
    return None if n < 0 else bytes(out[:n])


def test_crc_matches_catalogue_check_value() -> None:
    # Greg Cook, "Catalogue of parametrised CRC algorithms", CRC-32/ISO-HDLC: check = 0xCBF43926
    assert fr.crc32(b"123456789") == 0xCBF43926


@settings(deadline=None)
@given(st.binary(max_size=600))
def test_crc_matches_zlib_reference(data: bytes) -> None:
    assert fr.crc32(data) == zlib.crc32(data)


def test_cobs_matches_published_examples() -> None:
    # Examples from Cheshire and Baker 1999 as tabulated in the COBS Wikipedia article (from memory)
    assert _cobs(b"\x00") == bytes.fromhex("0101")
    assert _cobs(b"\x00\x00") == bytes.fromhex("010101")
    assert _cobs(b"\x11\x22\x00\x33") == bytes.fromhex("0311220233")
    assert _cobs(b"\x11\x00\x00\x00") == bytes.fromhex("0211010101")
    assert _cobs(bytes(range(1, 255))) == b"\xff" + bytes(range(1, 255))
    assert _cobs(bytes(range(0, 255))) == b"\x01\xff" + bytes(range(1, 255))


@pytest.mark.slow
@settings(max_examples=300, deadline=None)
@given(st.binary(max_size=700))
def test_cobs_round_trip_and_no_zero_bytes(data: bytes) -> None:
    enc = _cobs(data)
    assert 0 not in enc
    assert len(enc) <= len(data) + len(data) // 254 + 1
    assert _uncobs(enc) == data


@settings(deadline=None)
@given(st.binary(max_size=fr.MAX_PAYLOAD), st.integers(0, 255), st.integers(0, 0xFFFF))
def test_every_frame_decodes_to_what_was_sent(payload: bytes, ftype: int, seq: int) -> None:
    w = fr.FrameWriter()
    w.seq = seq
    wire = _enc(w, ftype, payload)
    assert wire[-1] == 0 and 0 not in wire[:-1]
    assert len(wire) <= fr.MAX_WIRE
    assert fr.decode_frame(wire) == (2, ftype, seq, payload)
    assert w.seq == (seq + 1) & 0xFFFF


def test_longest_payload_gives_the_documented_longest_frame() -> None:
    w = fr.FrameWriter()
    assert len(_enc(w, fr.T_TEXT, b"\x41" * 240)) <= 251
    assert len(_enc(w, fr.T_TEXT, bytes(240))) <= 251
    try:
        _enc(w, fr.T_TEXT, b"x" * 241)
    except ValueError as exc:
        assert "240" in str(exc)
    else:
        raise AssertionError("a 241-byte payload was accepted")


def test_seq_counts_up_and_wraps_at_65536() -> None:
    w = fr.FrameWriter()
    w.seq = 0xFFFE
    seqs = [fr.decode_frame(_enc(w, fr.T_TEXT, b"x"))[2] for _ in range(3)]
    assert seqs == [0xFFFE, 0xFFFF, 0]


def _collect(reader: fr.FrameReader, data: bytes) -> list:
    got: list = []
    reader.feed(data, lambda kind, t, s, p: got.append((kind, t, s, bytes(p))))
    return got


def test_reader_resynchronises_after_garbage_and_reports_bad_crc() -> None:
    w = fr.FrameWriter()
    good = _enc(w, fr.C_SET_RATE, struct.pack("<I", 4000))
    corrupt = bytearray(_enc(w, fr.C_START, b""))
    corrupt[2] ^= 0x10
    stream = b"\x13\x37garbage\x00" + bytes(corrupt) + b"\x00\x00" + good
    got = _collect(fr.FrameReader(), stream)
    assert got[-1] == (fr.FrameReader.GOOD, fr.C_SET_RATE, 0, struct.pack("<I", 4000))
    assert [g[0] for g in got[:-1]] == [fr.FrameReader.BAD, fr.FrameReader.BAD]


def test_reader_drops_an_overlong_run_and_recovers() -> None:
    w = fr.FrameWriter()
    reader = fr.FrameReader()
    got = _collect(reader, b"\x55" * 600 + b"\x00" + _enc(w, fr.C_STOP, b""))
    assert got == [(fr.FrameReader.BAD, 0, 0, b""), (fr.FrameReader.GOOD, fr.C_STOP, 0, b"")]
    assert reader.framing_errors == 1


def test_reader_accepts_frames_split_at_every_byte() -> None:
    w = fr.FrameWriter()
    wire = _enc(w, fr.C_SET_CHANNELS, b"\x05") + _enc(w, fr.C_IDENTIFY, b"")
    reader = fr.FrameReader()
    got: list = []
    for b in wire:
        reader.feed(bytes([b]), lambda kind, t, s, p: got.append((kind, t, s, bytes(p))))
    assert got == [(0, fr.C_SET_CHANNELS, 0, b"\x05"), (0, fr.C_IDENTIFY, 1, b"")]


def test_reader_reports_another_protocol_version() -> None:
    body = bytes([1, fr.C_START, 7, 0])
    body += struct.pack("<I", zlib.crc32(body))
    enc = _cobs(body) + b"\x00"
    assert _collect(fr.FrameReader(), enc) == [(fr.FrameReader.VERSION, fr.C_START, 7, b"\x01")]


def test_writer_frames_a_payload_packed_in_place_without_copying() -> None:
    w = fr.FrameWriter()
    w.body[fr.PAYLOAD_AT:fr.PAYLOAD_AT + 3] = b"abc"
    n = w.finish(fr.T_TEXT, 3)
    assert fr.decode_frame(bytes(w.wire[:n])) == (2, fr.T_TEXT, 0, b"abc")
