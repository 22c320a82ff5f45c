"""Frames of protocol version 2: COBS(header + payload + CRC-32) followed by 0x00.

Implements firmware/PROTOCOL.md ("Framing").  Sources: COBS after S. Cheshire and M. Baker,
"Consistent Overhead Byte Stuffing", IEEE/ACM Transactions on Networking 7(2), 1999; the check
is CRC-32/ISO-HDLC from Greg Cook's *Catalogue of parametrised CRC algorithms*
(see :mod:`runtrue.protocol.crc`).

:class:`FrameDecoder` is pure: it takes bytes as they arrive (in any split) and returns whole,
checked frames.  It never raises on bad input; it counts what it dropped:

* ``framing_errors``: runs between delimiters that are not a frame (bad COBS, shorter than a
  header and CRC, or longer than the 251-byte maximum without a delimiter);
* ``crc_errors``: frames whose CRC does not match (corruption);
* ``version_errors``: good frames of another protocol version;
* ``lost_frames``: device frames that never arrived, from the gaps in the sequence numbers
  (modulo 65536, so the wrap from 65535 to 0 is no gap).

It resynchronises at the next 0x00 after garbage, a dropped byte or a port opened mid-frame.
"""

from __future__ import annotations

import struct
from dataclasses import dataclass

from runtrue.protocol.cobs import cobs_decode, cobs_encode
from runtrue.protocol.crc import crc32
from runtrue.protocol.errors import (
    CrcError,
    FrameLengthError,
    FramingError,
    ProtocolError,
    VersionError,
)

PROTOCOL_VERSION = 2
HEADER_LEN = 4
CRC_LEN = 4
MAX_PAYLOAD = 240
MAX_BODY = HEADER_LEN + MAX_PAYLOAD + CRC_LEN  # 248
MAX_WIRE_FRAME = 251  # COBS(body) plus the 0x00 delimiter
MAX_ENCODED = MAX_WIRE_FRAME - 1  # longest run of non-zero bytes that can be a frame
MIN_BODY = HEADER_LEN + CRC_LEN
SEQ_MODULO = 1 << 16

_HEADER = struct.Struct("<BBH")
_CRC = struct.Struct("<I")


@dataclass(frozen=True)
class Frame:
    """One checked frame: its type, sequence number and raw payload."""

    version: int
    type: int
    seq: int
    payload: bytes


def encode_body(frame_type: int, seq: int, payload: bytes = b"", version: int = PROTOCOL_VERSION) -> bytes:
    """Header + payload + CRC-32 (little-endian), before COBS."""
    if len(payload) > MAX_PAYLOAD:
        raise FrameLengthError(f"payload of {len(payload)} bytes; the maximum is {MAX_PAYLOAD}")
    if not 0 <= frame_type <= 0xFF or not 0 <= version <= 0xFF:
        raise ValueError("frame type and version are one byte each")
    head = _HEADER.pack(version, frame_type, seq % SEQ_MODULO) + payload
    return head + _CRC.pack(crc32(head))


def encode_frame(frame_type: int, seq: int, payload: bytes = b"", version: int = PROTOCOL_VERSION) -> bytes:
    """The wire bytes of one frame: COBS(body) then the 0x00 delimiter."""
    return cobs_encode(encode_body(frame_type, seq, payload, version)) + b"\x00"


def decode_frame(encoded: bytes) -> Frame:
    """Decode the bytes between two delimiters (no 0x00 inside) into a checked :class:`Frame`.

    Raises :class:`FramingError` (and subclasses), :class:`CrcError` or :class:`VersionError`.
    """
    if len(encoded) > MAX_ENCODED:
        raise FrameLengthError(f"{len(encoded)} bytes without a delimiter; a frame is at most {MAX_ENCODED}")
    body = cobs_decode(encoded)
    if len(body) < MIN_BODY:
        raise FrameLengthError(f"frame body of {len(body)} bytes; a header and CRC alone are {MIN_BODY}")
    if len(body) > MAX_BODY:
        raise FrameLengthError(f"frame body of {len(body)} bytes; the maximum is {MAX_BODY}")
    (crc_sent,) = _CRC.unpack_from(body, len(body) - CRC_LEN)
    checked = body[:-CRC_LEN]
    if crc32(checked) != crc_sent:
        raise CrcError(f"CRC mismatch: frame says {crc_sent:08x}, contents give {crc32(checked):08x}")
    version, frame_type, seq = _HEADER.unpack_from(checked)
    if version != PROTOCOL_VERSION:
        raise VersionError(version)
    return Frame(version, frame_type, seq, bytes(checked[HEADER_LEN:]))


class FrameDecoder:
    """Stream of bytes in, checked frames out, with error and lost-frame counts."""

    def __init__(self) -> None:
        self._buf = bytearray()
        self._overlong = False
        self._last_seq: int | None = None
        self.frames_ok = 0
        self.framing_errors = 0
        self.crc_errors = 0
        self.version_errors = 0
        self.lost_frames = 0
        self.seq_restarts = 0
        self.last_error: ProtocolError | None = None

    @property
    def errors(self) -> int:
        """Every dropped run: framing, CRC and version errors together."""
        return self.framing_errors + self.crc_errors + self.version_errors

    def reset_sequence(self) -> None:
        """Forget the last sequence number (after a reconnect: the device may have restarted)."""
        self._last_seq = None

    def discard_partial(self) -> None:
        """Drop any partial frame (after a reconnect the bytes that follow belong to a new stream)."""
        self._buf.clear()
        self._overlong = False

    def feed(self, data: bytes) -> list[Frame]:
        """Take the next bytes from the wire; return the frames they complete, in order."""
        frames: list[Frame] = []
        start = 0
        view = bytes(data)
        while True:
            end = view.find(0, start)
            if end < 0:
                self._append(view[start:])
                return frames
            self._append(view[start:end])
            frame = self._end_of_run()
            if frame is not None:
                frames.append(frame)
            start = end + 1

    def _append(self, part: bytes) -> None:
        if not part or self._overlong:
            return
        self._buf += part
        if len(self._buf) > MAX_ENCODED:
            # No delimiter within a frame's maximum length: drop the run up to the next 0x00.
            self._buf.clear()
            self._overlong = True
            self.framing_errors += 1
            self.last_error = FrameLengthError(f"more than {MAX_ENCODED} bytes without a delimiter")

    def _end_of_run(self) -> Frame | None:
        if self._overlong:
            self._overlong = False
            return None
        if not self._buf:
            return None  # back-to-back delimiters: an idle line or a resynchronising 0x00
        encoded = bytes(self._buf)
        self._buf.clear()
        try:
            frame = decode_frame(encoded)
        except FramingError as exc:
            self.framing_errors += 1
            self.last_error = exc
            return None
        except CrcError as exc:
            self.crc_errors += 1
            self.last_error = exc
            return None
        except VersionError as exc:
            self.version_errors += 1
            self.last_error = exc
            return None
        self.frames_ok += 1
        self._count_gap(frame.seq)
        return frame

    def _count_gap(self, seq: int) -> None:
        last = self._last_seq
        self._last_seq = seq
        if last is None:
            return
        gap = (seq - last - 1) % SEQ_MODULO
        if seq == 0 and last < SEQ_MODULO - 256:
            # Numbering started again from 0 well before the wrap: the device restarted.
            self.seq_restarts += 1
        elif gap < SEQ_MODULO // 2:
            self.lost_frames += gap
        else:
            # A step backwards (repeat or restart at another number): follow the new numbering.
            self.seq_restarts += 1
