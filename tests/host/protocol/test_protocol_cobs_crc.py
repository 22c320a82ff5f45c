"""COBS and CRC-32 against their published definitions."""

from __future__ import annotations

import zlib

import pytest
from hypothesis import given
from hypothesis import strategies as st

from runtrue.protocol.cobs import cobs_decode, cobs_encode
from runtrue.protocol.crc import CRC32_CHECK, crc32, crc32_bitwise
from runtrue.protocol.errors import CobsError

# Worked examples of the COBS encoding (S. Cheshire and M. Baker, "Consistent Overhead Byte
# Stuffing", IEEE/ACM Trans. Networking 7(2), 1999, section III; the same examples are listed
# on the encyclopaedia page about COBS - from memory).
COBS_EXAMPLES = [
    (b"\x00", b"\x01\x01"),
    (b"\x00\x00", b"\x01\x01\x01"),
    (b"\x00\x11\x00", b"\x01\x02\x11\x01"),
    (b"\x11\x22\x00\x33", b"\x03\x11\x22\x02\x33"),
    (b"\x11\x22\x33\x44", b"\x05\x11\x22\x33\x44"),
    (b"\x11\x00\x00\x00", b"\x02\x11\x01\x01\x01"),
    (bytes(range(1, 255)), b"\xff" + bytes(range(1, 255))),
    (bytes(range(0, 255)), b"\x01\xff" + bytes(range(1, 255))),
    (bytes(range(1, 256)), b"\xff" + bytes(range(1, 255)) + b"\x02\xff"),
    (bytes(range(2, 256)) + b"\x00", b"\xff" + bytes(range(2, 256)) + b"\x01\x01"),
]


@pytest.mark.parametrize(("raw", "encoded"), COBS_EXAMPLES)
def test_cobs_matches_the_published_examples(raw: bytes, encoded: bytes) -> None:
    assert cobs_encode(raw) == encoded
    assert cobs_decode(encoded) == raw


@given(st.binary(max_size=700))
def test_cobs_round_trips_and_never_emits_a_zero(data: bytes) -> None:
    encoded = cobs_encode(data)
    assert 0 not in encoded
    assert len(encoded) <= len(data) + len(data) // 254 + 1  # the paper's worst-case overhead
    assert cobs_decode(encoded) == data


@pytest.mark.parametrize("bad", [b"\x05\x11\x22", b"\x03\x11\x00", b"\x00", b"\x03\x01"])
def test_cobs_rejects_truncated_or_zero_bearing_blocks(bad: bytes) -> None:
    with pytest.raises(CobsError):
        cobs_decode(bad)


def test_crc32_gives_the_catalogue_check_value() -> None:
    # Greg Cook, "Catalogue of parametrised CRC algorithms", CRC-32/ISO-HDLC: check=0xcbf43926.
    assert CRC32_CHECK == 0xCBF43926
    assert crc32(b"123456789") == CRC32_CHECK
    assert crc32_bitwise(b"123456789") == CRC32_CHECK


@given(st.binary(max_size=300))
def test_crc32_agrees_with_zlib_and_the_bitwise_definition(data: bytes) -> None:
    # zlib.crc32 is the reference implementation named in firmware/PROTOCOL.md.
    assert crc32(data) == zlib.crc32(data) == crc32_bitwise(data)
