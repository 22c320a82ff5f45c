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
    very end.
    """
    out = bytearray(b"\x00")
    code_index = 0
    code = 1
    for byte in data:
        if byte == 0:
            out[code_index] = code
            code_index = len(out)
            out.append(0)
            code = 1
            continue
        out.append(byte)
        code += 1
        if code == 0xFF:
            out[code_index] = code
            code_index = len(out)
            out.append(0)
            code = 1
    out[code_index] = code
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
