"""CRC-32/ISO-HDLC, the frame check of protocol version 2.

Source: Greg Cook, *Catalogue of parametrised CRC algorithms* ("reveng" catalogue), entry
CRC-32/ISO-HDLC: width 32, poly 0x04C11DB7, init 0xFFFFFFFF, refin true, refout true,
xorout 0xFFFFFFFF, check 0xCBF43926 (the CRC of ASCII "123456789").  ``zlib.crc32`` computes
exactly this CRC (it is the ITU-T V.42 / IEEE 802.3 CRC-32); the firmware uses
``binascii.crc32``, the same function in MicroPython.

:func:`crc32_bitwise` is a plain bit-by-bit reading of the catalogue's parameters, kept so the
tests can check ``zlib`` against the definition rather than against itself.
"""

from __future__ import annotations

import zlib

CRC32_CHECK = 0xCBF43926  # catalogue check value for b"123456789"
_POLY_REFLECTED = 0xEDB88320  # 0x04C11DB7 bit-reversed (refin/refout true)


def crc32(data: bytes) -> int:
    """CRC-32/ISO-HDLC of ``data`` as an unsigned 32-bit integer."""
    return zlib.crc32(data) & 0xFFFFFFFF


def crc32_bitwise(data: bytes) -> int:
    """The same CRC computed bit by bit from the catalogue parameters (slow; for tests)."""
    crc = 0xFFFFFFFF
    for byte in data:
        crc ^= byte
        for _ in range(8):
            crc = (crc >> 1) ^ _POLY_REFLECTED if crc & 1 else crc >> 1
    return crc ^ 0xFFFFFFFF
