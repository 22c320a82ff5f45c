"""Host -> device commands of protocol version 2: the command types, their payloads and the
numbering of command frames.  Implements the table "Host -> device commands" of
firmware/PROTOCOL.md; all numbers little-endian.
"""

from __future__ import annotations

import struct

from runtrue.protocol.frames import SEQ_MODULO, encode_frame

# Host -> device commands.
CMD_IDENTIFY = 0x81
CMD_START = 0x82
CMD_STOP = 0x83
CMD_SET_RATE = 0x84
CMD_SET_CHANNELS = 0x85
CMD_SET_EDGE = 0x86
CMD_SELFTEST = 0x87
CMD_STATUS = 0x88
CMD_REPL = 0x89
CMD_SET_LINE = 0x8A
CMD_RAW = 0x8B

COMMAND_NAMES = {
    CMD_IDENTIFY: "IDENTIFY",
    CMD_START: "START",
    CMD_STOP: "STOP",
    CMD_SET_RATE: "SET_RATE",
    CMD_SET_CHANNELS: "SET_CHANNELS",
    CMD_SET_EDGE: "SET_EDGE",
    CMD_SELFTEST: "SELFTEST",
    CMD_STATUS: "STATUS",
    CMD_REPL: "REPL",
    CMD_SET_LINE: "SET_LINE",
    CMD_RAW: "RAW",
}

LINE_HZ_CHOICES = (0, 50, 60)


def raw_payload(n_frames: int) -> bytes:
    """The RAW command's payload: the number of sample frames to capture (16-4096)."""
    if not 16 <= int(n_frames) <= 4096:
        raise ValueError(f"capture of {n_frames!r} frames: use 16 to 4096")
    return struct.pack("<H", int(n_frames))


def set_rate_payload(rate_hz: int) -> bytes:
    return struct.pack("<I", int(rate_hz))


def set_channels_payload(mask: int) -> bytes:
    if not 1 <= mask <= 0b111:
        raise ValueError(f"channel mask {mask:#x}: use bits 0-2, at least one channel")
    return struct.pack("<B", mask)


def set_line_payload(line_hz: int) -> bytes:
    if line_hz not in LINE_HZ_CHOICES:
        raise ValueError(f"line frequency {line_hz!r} Hz: use 50, 60 or 0 (off)")
    return struct.pack("<B", line_hz)


def set_edge_payload(edge: str) -> bytes:
    if edge not in ("rising", "falling"):
        raise ValueError(f"edge {edge!r}: use 'rising' or 'falling'")
    return struct.pack("<B", 1 if edge == "falling" else 0)


class CommandEncoder:
    """Numbers the host's command frames (from 0, wrapping at 65536) and encodes them."""

    def __init__(self, first_seq: int = 0) -> None:
        self.next_seq = first_seq % SEQ_MODULO

    def encode(self, cmd_type: int, payload: bytes = b"") -> tuple[int, bytes]:
        """Return ``(seq, wire bytes)`` of the next command frame."""
        seq = self.next_seq
        self.next_seq = (seq + 1) % SEQ_MODULO
        return seq, encode_frame(cmd_type, seq, payload)
