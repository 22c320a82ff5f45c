"""Consistent Overhead Byte Stuffing (COBS).

Source: S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Transactions on
Networking 7(2), pp. 159-172, April 1999 (section III, the basic encoding).  The encoded data
holds no zero byte, so a single 0x00 can delimit frames on the wire (firmware/PROTOCOL.md).
"""

from __future__ import annotations

from runtrue.protocol.errors import CobsError


def cobs_encode(data: bytes) -> bytes:
    """Encode ``data`` (any bytes) into COBS blocks; the result contains no 0x00.

    The delimiter is not included.  Each block is a code byte ``n`` (1..255) followed by
    ``n - 1`` non-zero bytes; a code below 255 stands for a zero after its bytes, except at the
    very end.  A final run of exactly 254 non-zero bytes ends with its 0xFF block (no empty
    block after it), as in the paper.
    """
    out = bytearray()
    chunks = bytes(data).split(b"\x00")
    last_index = len(chunks) - 1
    for index, chunk in enumerate(chunks):
        pos = 0
        while len(chunk) - pos >= 254:
            out.append(0xFF)
            out += chunk[pos : pos + 254]
            pos += 254
        rest = chunk[pos:]
        if index == last_index and chunk and not rest:
            break
        out.append(len(rest) + 1)
        out += rest
    return bytes(out)


def cobs_decode(encoded: bytes) -> bytes:
    """Decode COBS blocks (without the delimiter); raise :class:`CobsError` if malformed."""
    out = bytearray()
    i = 0
    n = len(encoded)
    while i < n:
        code = encoded[i]
        if code == 0:
            raise CobsError(f"zero byte inside a COBS frame at offset {i}")
        i += 1
        end = i + code - 1
        if end > n:
            raise CobsError(f"COBS block at offset {i - 1} runs {end - n} byte(s) past the frame end")
        block = encoded[i:end]
        if 0 in block:
            raise CobsError("zero byte inside a COBS block")
        out += block
        i = end
        if code != 0xFF and i < n:
            out.append(0)
    return bytes(out)
