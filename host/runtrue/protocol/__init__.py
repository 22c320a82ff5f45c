"""The wire protocol, version 2 (firmware/PROTOCOL.md): frames and messages.

Frames are COBS-encoded (S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing",
IEEE/ACM Transactions on Networking 7(2), 1999) and checked with CRC-32/ISO-HDLC (Greg Cook,
*Catalogue of parametrised CRC algorithms*).  Everything here is pure: bytes in, dataclasses out.
"""

from __future__ import annotations

from runtrue.protocol.cobs import cobs_decode, cobs_encode
from runtrue.protocol.commands import CommandEncoder
from runtrue.protocol.crc import CRC32_CHECK, crc32
from runtrue.protocol.errors import (
    CobsError,
    CrcError,
    FrameLengthError,
    FramingError,
    MessageError,
    ProtocolError,
    VersionError,
)
from runtrue.protocol.frames import (
    MAX_PAYLOAD,
    MAX_WIRE_FRAME,
    PROTOCOL_VERSION,
    Frame,
    FrameDecoder,
    decode_frame,
    encode_frame,
)
from runtrue.protocol.messages import (
    Ack,
    DeviceInfo,
    InfoAssembler,
    InfoPart,
    Message,
    Revolution,
    RevStats,
    SelfTest,
    Status,
    Text,
    Unknown,
    parse_message,
)

__all__ = [
    "CRC32_CHECK", "MAX_PAYLOAD", "MAX_WIRE_FRAME", "PROTOCOL_VERSION",
    "Ack", "CobsError", "CommandEncoder", "CrcError", "DeviceInfo", "Frame", "InfoAssembler", "InfoPart", "FrameDecoder",
    "FrameLengthError", "FramingError", "Message", "MessageError", "ProtocolError", "RevStats", "Revolution",
    "SelfTest", "Status", "Text", "Unknown", "VersionError", "cobs_decode", "cobs_encode", "crc32",
    "decode_frame", "encode_frame", "parse_message",
]
