"""Frame encoder and command-frame reader, runtrue meter protocol version 1 (firmware side).

Implements firmware/PROTOCOL.md:
* COBS framing: S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing",
  IEEE/ACM Transactions on Networking 7(2), 1999.
* CRC-32/ISO-HDLC (poly 0x04C11DB7 reflected, init and xorout 0xFFFFFFFF, check 0xCBF43926;
  Greg Cook, "Catalogue of parametrised CRC algorithms"), computed by `binascii.crc32`, which
  is zlib-compatible under both CPython and MicroPython.

wire frame := COBS(header payload crc) 0x00; header := version:u8 type:u8 seq:u16le.
The encoder writes into buffers allocated once; a returned memoryview is valid until the
next `encode` call.
"""

import binascii
import struct

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

PROTO_VERSION = const(1)
HEADER_LEN = const(4)
CRC_LEN = const(4)
MAX_PAYLOAD = const(240)
MAX_BODY = const(248)      # header + payload + crc
MAX_WIRE = const(251)      # COBS(body) + delimiter: 248 + ceil(248/254) + 1

# Device -> host
T_INFO = const(0x01)
T_REV = const(0x02)
T_STATUS = const(0x03)
T_ACK = const(0x04)
T_SELFTEST = const(0x05)
T_TEXT = const(0x06)
# Host -> device
C_IDENTIFY = const(0x81)
C_START = const(0x82)
C_STOP = const(0x83)
C_SET_RATE = const(0x84)
C_SET_CHANNELS = const(0x85)
C_SET_EDGE = const(0x86)
C_SELFTEST = const(0x87)
C_STATUS = const(0x88)
C_REPL = const(0x89)

# ACK results
ACK_OK = const(0)
ACK_BAD_ARGUMENT = const(1)
ACK_UNKNOWN_COMMAND = const(2)
ACK_BUSY = const(3)
ACK_BAD_FRAME = const(4)

# REV flags
F_MISSING_PULSE = const(0x0001)
F_EXTRA_PULSE = const(0x0002)
F_SPEED_JUMP = const(0x0004)
F_CLIPPED = const(0x0008)
F_DROPPED_SAMPLES = const(0x0010)
F_FIRST = const(0x0020)
F_NO_FIT = const(0x0040)
F_CLIP_CH0 = const(0x0100)
F_NOT_USABLE = const(0x005F)  # bits 0-4 and 6: keep out of any average

REV_HEADER_FMT = "<IfHHBB"     # rev, period_us, n_samples, flags, n_ch, channel_mask (14 bytes)
REV_CHANNEL_FMT = "<fffff"     # h1_re, h1_im, h2_re, h2_im, rms (20 bytes)
STATUS_FMT = "<IHIIIIB"        # 23 bytes
ACK_FMT = "<HBB"


def crc32(data) -> int:
    """CRC-32/ISO-HDLC of `data` (zlib.crc32 / binascii.crc32)."""
    return binascii.crc32(data) & 0xFFFFFFFF


def cobs_encode_into(src, n: int, dst) -> int:
    """COBS-encode src[:n] into dst (no delimiter); returns the encoded length.

    dst must hold n + n // 254 + 1 bytes.
    """
    code_pos = 0
    out = 1
    code = 1
    i = 0
    while i < n:
        b = src[i]
        if b == 0:
            dst[code_pos] = code
            code_pos = out
            out += 1
            code = 1
        else:
            dst[out] = b
            out += 1
            code += 1
            if code == 0xFF:
                dst[code_pos] = code
                if i + 1 == n:      # a full block ends the data: no trailing 0x01 block
                    return out
                code_pos = out
                out += 1
                code = 1
        i += 1
    dst[code_pos] = code
    return out


def cobs_decode_into(src, n: int, dst) -> int:
    """Decode COBS src[:n] (no delimiter) into dst; returns the length, or -1 if malformed."""
    i = 0
    out = 0
    while i < n:
        code = src[i]
        if code == 0:
            return -1
        i += 1
        end = i + code - 1
        if end > n:
            return -1
        while i < end:
            b = src[i]
            if b == 0 or out >= len(dst):
                return -1
            dst[out] = b
            out += 1
            i += 1
        if code != 0xFF and i < n:
            if out >= len(dst):
                return -1
            dst[out] = 0
            out += 1
    return out


class FrameWriter:
    """Numbers and encodes outgoing frames into buffers allocated once."""

    def __init__(self) -> None:
        self.seq = 0
        self._body = bytearray(MAX_BODY)
        self._wire = bytearray(MAX_WIRE)
        self._wire_mv = memoryview(self._wire)
        self.payload = bytearray(MAX_PAYLOAD)   # scratch for payloads packed in place

    def encode(self, ftype: int, payload, n: int = -1) -> memoryview:
        """Frame payload[:n] (all of it if n < 0) as `ftype` with the next seq number."""
        if n < 0:
            n = len(payload)
        if n > MAX_PAYLOAD:
            raise ValueError("payload longer than 240 bytes")
        body = self._body
        body[0] = PROTO_VERSION
        body[1] = ftype
        body[2] = self.seq & 0xFF
        body[3] = self.seq >> 8
        body[HEADER_LEN:HEADER_LEN + n] = payload[:n] if n != len(payload) else payload
        end = HEADER_LEN + n
        struct.pack_into("<I", body, end, crc32(memoryview(body)[:end]))
        end += CRC_LEN
        m = cobs_encode_into(body, end, self._wire)
        self._wire[m] = 0
        self.seq = (self.seq + 1) & 0xFFFF
        return self._wire_mv[:m + 1]


class FrameReader:
    """Collects bytes up to each 0x00 and checks them as a frame.

    `feed(data, handler)` calls handler(kind, ftype, seq, payload) per delimited run:
    kind 0 = good frame; 1 = bad CRC, bad COBS, too short or too long (framing error);
    2 = another protocol version.  Empty runs (0x00 0x00) are ignored: a host may send a lone
    0x00 to flush a half-received frame.  Runs longer than MAX_WIRE - 1 bytes are dropped up to
    the next delimiter and reported once as kind 1.
    """

    GOOD = 0
    BAD = 1
    VERSION = 2

    def __init__(self) -> None:
        self._buf = bytearray(MAX_WIRE)
        self._n = 0
        self._overlong = False
        self._body = bytearray(MAX_BODY)
        self.framing_errors = 0

    def feed(self, data, handler) -> None:
        for b in data:
            if b != 0:
                if self._n < MAX_WIRE - 1:
                    self._buf[self._n] = b
                    self._n += 1
                else:
                    self._overlong = True
                continue
            if self._overlong:
                self._overlong = False
                self._n = 0
                self.framing_errors += 1
                handler(self.BAD, 0, 0, b"")
                continue
            n = self._n
            self._n = 0
            if n == 0:
                continue
            m = cobs_decode_into(self._buf, n, self._body)
            if m < HEADER_LEN + CRC_LEN:
                self.framing_errors += 1
                handler(self.BAD, 0, 0, b"")
                continue
            body = self._body
            crc = body[m - 4] | (body[m - 3] << 8) | (body[m - 2] << 16) | (body[m - 1] << 24)
            if crc32(memoryview(body)[:m - 4]) != crc:
                self.framing_errors += 1
                handler(self.BAD, 0, 0, b"")
                continue
            seq = body[2] | (body[3] << 8)
            if body[0] != PROTO_VERSION:
                handler(self.VERSION, body[1], seq, bytes([body[0]]))
                continue
            handler(self.GOOD, body[1], seq, bytes(body[HEADER_LEN:m - 4]))


def decode_frame(wire) -> tuple:
    """Decode one complete wire frame (with or without its 0x00): (version, type, seq, payload).

    Raises ValueError for a malformed frame or a CRC mismatch.  For tests and tools.
    """
    data = bytes(wire)
    if data and data[-1] == 0:
        data = data[:-1]
    if data.find(b"\x00") >= 0:
        raise ValueError("zero byte inside a COBS frame")
    body = bytearray(len(data))
    m = cobs_decode_into(data, len(data), body)
    if m < HEADER_LEN + CRC_LEN:
        raise ValueError("frame too short or malformed COBS")
    body = body[:m]
    crc = struct.unpack("<I", body[m - 4:])[0]
    if crc32(body[:m - 4]) != crc:
        raise ValueError("CRC mismatch")
    return (body[0], body[1], body[2] | (body[3] << 8), bytes(body[HEADER_LEN:m - 4]))
