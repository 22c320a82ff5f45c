"""Typed errors of the frame decoder and message parser (firmware/PROTOCOL.md)."""

from __future__ import annotations


class ProtocolError(Exception):
    """A frame or message that does not follow protocol version 2."""


class FramingError(ProtocolError):
    """The bytes between two delimiters are not a frame (bad COBS, too short, too long)."""


class CobsError(FramingError):
    """The COBS encoding is malformed (truncated block, zero byte inside)."""


class FrameLengthError(FramingError):
    """The frame is shorter than a header plus CRC, or longer than the protocol's maximum."""


class CrcError(ProtocolError):
    """The frame's CRC-32 does not match its header and payload: the frame was corrupted."""


class VersionError(ProtocolError):
    """A well-formed frame of another protocol version: reported, never decoded."""

    def __init__(self, version: int) -> None:
        if version < 2:
            advice = "update the firmware: runtrue device install"
        else:
            advice = "this meter's firmware is newer than this runtrue: update runtrue"
        super().__init__(f"frame of protocol version {version}; this runtrue speaks version 2 ({advice})")
        self.version = version


class MessageError(ProtocolError):
    """A frame with a good CRC whose payload does not fit its message type."""
