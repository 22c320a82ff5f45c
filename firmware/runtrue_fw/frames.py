"""Frame encoder and command-frame reader, runtrue meter protocol version 2 (firmware side).

Implements firmware/PROTOCOL.md:
* COBS framing: S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing",
  IEEE/ACM Transactions on Networking 7(2), 1999.
* CRC-32/ISO-HDLC (poly 0x04C11DB7 reflected, init and xorout 0xFFFFFFFF, check 0xCBF43926;
  Greg Cook, "Catalogue of parametrised CRC algorithms"), computed by the kernels
  (`crc32_into`) in two 16-bit halves: `binascii.crc32` returns a long int on a 32-bit port.

wire frame := COBS(body) 0x00; body := header payload crc; header := version:u8 type:u8
seq:u16le.  The writer packs payloads straight into its body buffer (`body`, payload at
`PAYLOAD_AT`), checks and stuffs them into its wire buffer: encoding allocates nothing, and the
board writes `wire[:n]` with `hw.write(wire, n)` (DEVELOPERS.md, the board contract).
"""

try:
    from runtrue_fw.kernels_viper import cobs_encode_into, crc32_into
except (SyntaxError, ImportError, AttributeError):   # CPython (or a shim), or a port without viper
    from runtrue_fw.kernels import cobs_encode_into, crc32_into
from runtrue_fw.kernels import make_crc_table

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

PROTO_VERSION = const(2)
HEADER_LEN = const(4)
PAYLOAD_AT = const(4)
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
C_SET_LINE = const(0x8A)

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

REV_HEADER_FMT = "<IIHHBBBB"   # rev, length_q8, n_samples, flags, n_ch, mask, first_off_q8, n_sums
REV_HEADER_LEN = const(16)
REV_CHANNEL_LEN = const(70)    # 14 sums x int40
N_SUMS = const(14)
STATUS_FMT = "<IHIIIIIB"       # 27 bytes
ACK_FMT = "<HBB"

_CRC_TABLE = make_crc_table()


def crc32(data) -> int:
    """CRC-32/ISO-HDLC of `data` (for tests and tools; allocates)."""
    n = len(data)
    buf = bytearray(n + 4)
    buf[:n] = data
    crc32_into(buf, n, _CRC_TABLE)  # type: ignore[arg-type]  # viper ptr args take buffers
    return buf[n] | (buf[n + 1] << 8) | (buf[n + 2] << 16) | (buf[n + 3] << 24)


def _crc_ok(body, n: int) -> bool:
    """Does the CRC at body[n-4:n] match body[:n-4]?  Recomputes it in place (no allocation)."""
    m = n - 4
    b0 = body[m]
    b1 = body[m + 1]
    b2 = body[m + 2]
    b3 = body[m + 3]
    crc32_into(body, m, _CRC_TABLE)  # type: ignore[arg-type]
    return body[m] == b0 and body[m + 1] == b1 and body[m + 2] == b2 and body[m + 3] == b3


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
    """Numbers and encodes outgoing frames in buffers allocated once."""

    def __init__(self) -> None:
        self.seq = 0
        self.body = bytearray(MAX_BODY)     # payloads are packed at body[PAYLOAD_AT:]
        self.wire = bytearray(MAX_WIRE)
        self._ctab = _CRC_TABLE

    def finish(self, ftype: int, n: int) -> int:
        """Frame the payload already in body[PAYLOAD_AT:PAYLOAD_AT + n] as `ftype` with the next
        seq number; returns the wire length (delimiter included) of `wire`.  No allocation."""
        if n > MAX_PAYLOAD:
            raise ValueError("payload longer than 240 bytes")
        body = self.body
        body[0] = PROTO_VERSION
        body[1] = ftype
        body[2] = self.seq & 0xFF
        body[3] = self.seq >> 8
        end = crc32_into(body, HEADER_LEN + n, self._ctab)  # type: ignore[arg-type]
        m = cobs_encode_into(body, end, self.wire)  # type: ignore[arg-type]
        self.wire[m] = 0
        self.seq = (self.seq + 1) & 0xFFFF
        return m + 1

    def encode(self, ftype: int, payload, n: int = -1) -> int:
        """Copy payload[:n] (all of it if n < 0) into the body and frame it; returns the wire
        length.  For command replies (allocation-free only if `payload` is not sliced)."""
        if n < 0:
            n = len(payload)
        if n > MAX_PAYLOAD:
            raise ValueError("payload longer than 240 bytes")
        body = self.body
        i = 0
        while i < n:
            body[PAYLOAD_AT + i] = payload[i]
            i += 1
        return self.finish(ftype, n)


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
        self._body = bytearray(MAX_BODY + CRC_LEN)
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
            if m < HEADER_LEN + CRC_LEN or m > MAX_BODY:
                self.framing_errors += 1
                handler(self.BAD, 0, 0, b"")
                continue
            body = self._body
            if not _crc_ok(body, m):
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
    if not _crc_ok(body, m):
        raise ValueError("CRC mismatch")
    return (body[0], body[1], body[2] | (body[3] << 8), bytes(body[HEADER_LEN:m - 4]))
