"""Messages of protocol version 2: device -> host payloads parsed into dataclasses.  Implements
the table "Device -> host" of firmware/PROTOCOL.md; all numbers little-endian.  The host's
commands are in :mod:`runtrue.protocol.commands`, the raw capture parts in
:mod:`runtrue.protocol.raw`.

A REV frame carries the meter's exact integer sums of one revolution (:class:`RevStats`); the
host finishes the least-squares fit (:mod:`runtrue.device.revfit`) into a :class:`Revolution`.
Phasors follow the project convention: ``re + j*im = amp * e^{+j*lag}``, amplitude in g
peak, lag in degrees of rotation after the reference mark.

Whatever the payload, the parsers raise only :class:`MessageError`.
"""

from __future__ import annotations

import json
import struct
from dataclasses import dataclass, field
from typing import Any

from runtrue.protocol.errors import MessageError
from runtrue.protocol.frames import Frame
from runtrue.protocol.raw import RawPart, parse_raw

# Device -> host frame types.
INFO = 0x01
REV = 0x02
STATUS = 0x03
ACK = 0x04
SELFTEST = 0x05
TEXT = 0x06
RAW = 0x07  # raw capture parts (firmware/PROTOCOL.md, "Raw capture")

# ACK results.
ACK_OK = 0
ACK_BAD_ARGUMENT = 1
ACK_UNKNOWN_COMMAND = 2
ACK_BUSY = 3
ACK_BAD_FRAME = 4
ACK_RESULT_NAMES = {
    ACK_OK: "ok",
    ACK_BAD_ARGUMENT: "bad argument",
    ACK_UNKNOWN_COMMAND: "unknown command",
    ACK_BUSY: "busy",
    ACK_BAD_FRAME: "bad frame",
}

# REV flags.
FLAG_MISSING_PULSE = 1 << 0
FLAG_EXTRA_PULSE = 1 << 1
FLAG_SPEED_JUMP = 1 << 2
FLAG_CLIPPED = 1 << 3
FLAG_DROPPED_SAMPLES = 1 << 4
FLAG_FIRST = 1 << 5
FLAG_NO_FIT = 1 << 6  # no phasors computed for this revolution (PROTOCOL.md)
FLAG_CLIP_CH0 = 1 << 8
FLAG_CLIP_CH1 = 1 << 9
FLAG_CLIP_CH2 = 1 << 10
# Bits 0-4 mean "do not average" (PROTOCOL.md).  To stay safe with newer firmware every flag
# is taken as disqualifying except the ones known to be harmless: FIRST, and the per-channel
# clip bits (which never come without CLIPPED anyway).
BENIGN_FLAGS = FLAG_FIRST | (0b111 << 8)
UNUSABLE_FLAGS = 0xFFFF & ~BENIGN_FLAGS
FLAG_NAMES = {
    FLAG_MISSING_PULSE: "missing pulse",
    FLAG_EXTRA_PULSE: "extra pulse",
    FLAG_SPEED_JUMP: "speed jump",
    FLAG_CLIPPED: "clipped",
    FLAG_DROPPED_SAMPLES: "dropped samples",
    FLAG_FIRST: "first",
    FLAG_NO_FIT: "no fit",
    FLAG_CLIP_CH0: "clip ch0",
    FLAG_CLIP_CH1: "clip ch1",
    FLAG_CLIP_CH2: "clip ch2",
}

_REV_HEAD = struct.Struct("<IIHHBBBB")  # 16 bytes
N_SUMS = 14  # sums per channel, in the order of firmware/runtrue_fw/basis.py
INT40_LEN = 5  # lo:u24 then hi:i16, little-endian
REV_CHANNEL_LEN = N_SUMS * INT40_LEN  # 70 bytes
_STATUS = struct.Struct("<IHIIIIIB")  # 27 bytes
_ACK = struct.Struct("<HBB")


def channels_of_mask(mask: int) -> list[int]:
    """Physical channel numbers in ``mask``, ascending (bit 0 = channel 0)."""
    return [ch for ch in range(8) if mask >> ch & 1]


@dataclass(frozen=True)
class DeviceInfo:
    """INFO: what the meter is and how it is set."""

    fw: str
    board: str
    proto: int
    channels_max: int = 3
    channel_mask: int = 1
    rate_hz: float = 0.0
    adc_bits: int = 12
    counts_per_g: list[float] = field(default_factory=list)
    zero_code: list[float] = field(default_factory=list)
    edge: str = "rising"
    streaming: bool = False
    serial: str = ""
    basis: str = ""  # names the meter's integer basis (basis.BASIS_ID); the host fit needs its own
    line_hz: int = 0  # line frequency fitted as a tone (0 = off)
    line_inc: int = 0  # line-tone angle step per sample, 2**-30 turn (0 = no line tones)
    round_robin: bool = False  # channel of rank r converted r/n_ch of a sample after the first
    adc_offset: int = 2048  # code subtracted before the sums (1 << (adc_bits - 1))
    fe: list[float] = field(default_factory=list)  # front end H(s) = 1/(1 + a1 s + a2 s^2): [a1_s, a2_s2]
    max_rpm: float = 0.0  # the envelope at the current channels and rate (0 = not said)
    min_rpm: float = 0.0
    raw: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)


@dataclass(frozen=True)
class InfoPart:
    """One frame of an INFO sent in several parts (``part`` of ``parts``); join them with
    :class:`InfoAssembler`."""

    part: int
    parts: int
    fields: dict[str, Any]


class InfoAssembler:
    """Joins INFO parts (firmware/PROTOCOL.md: the meter splits INFO into frames of at most
    240 bytes): ``feed(part)`` returns the :class:`DeviceInfo` once every part has come."""

    def __init__(self) -> None:
        self._parts: dict[int, dict[str, Any]] = {}
        self._expected = 0

    def feed(self, msg: InfoPart) -> DeviceInfo | None:
        if msg.part == 0 or msg.parts != self._expected:
            self._parts = {}
            self._expected = msg.parts
        self._parts[msg.part] = msg.fields
        if len(self._parts) < self._expected:
            return None
        merged: dict[str, Any] = {}
        for i in sorted(self._parts):
            merged.update(self._parts[i])
        self._parts = {}
        return info_from_dict(merged)


class RevFlags:
    """What a revolution's flags and channel mask say: one home for the meter's sums
    (:class:`RevStats`) and the host's fitted revolution (:class:`Revolution`)."""

    flags: int
    channel_mask: int

    @property
    def channels(self) -> list[int]:
        return channels_of_mask(self.channel_mask)

    @property
    def flag_names(self) -> list[str]:
        return [name for bit, name in FLAG_NAMES.items() if self.flags & bit]


@dataclass(frozen=True)
class RevStats(RevFlags):
    """REV: the meter's exact integer sums of one completed revolution.

    ``length_q8`` is the revolution between its reference edges in 1/256 sample,
    ``first_off_q8`` the offset from the first edge to the first whole sample (1/256 sample),
    ``sums`` one tuple of 14 integers per enabled channel (ascending), in the order of
    ``basis.py``: Sy, Sy.cos(k.phi), Sy.sin(k.phi) for k = 1..4, the two line tones' cos/sin,
    Sy.y; y is the ADC code minus ``DeviceInfo.adc_offset``, basis values in Q14.
    """

    rev: int
    length_q8: int
    n_samples: int
    flags: int
    channel_mask: int
    first_off_q8: int
    sums: tuple[tuple[int, ...], ...]


@dataclass(frozen=True)
class Revolution(RevFlags):
    """REV: one completed revolution measured by the meter.

    ``h1``/``h2`` are the 1x/2x phasors per enabled channel (ascending), in g peak, phase-lag
    convention; ``rms_g`` the overall RMS per channel with DC removed.
    """

    rev: int
    period_us: float
    n_samples: int
    flags: int
    channel_mask: int
    h1: list[complex]
    h2: list[complex]
    rms_g: list[float]
    h3: list[complex] = field(default_factory=list)  # 3x phasors (empty where not fitted)
    # What the host's fit modelled (runtrue.device.revmodel); defaults: nothing modelled.
    line_collisions: tuple[tuple[float, int, float], ...] = ()  # (line tone Hz, order k, gap %) not separable
    fe_lag_deg: float = 0.0  # front-end lag taken out of the 1x (already corrected in h1)
    fe_lag_tol_deg: float = 0.0  # its spread over the parts' tolerances
    fe_gain: float = 1.0  # front-end gain divided out of the 1x
    fe_gain_tol: float = 0.0
    accel: float = 0.0  # modelled angular acceleration, turns per sample squared
    stats: RevStats | None = field(default=None, compare=False, repr=False)  # the sums it came from
    first_sample: int = -1  # index of its first sample in an unbroken run of samples (-1: unknown)
    run_id: int = 0  # which unbroken run of samples (a new one after START or lost samples)
    h1_per_code: tuple[complex, ...] = ()  # per channel: h1 = (1x in codes, cos + j sin) * this

    @property
    def speed_rpm(self) -> float:
        return 60e6 / self.period_us if self.period_us > 0 else 0.0

    @property
    def usable(self) -> bool:
        """True unless a flag (bits 0-4, or any flag not known to be harmless) says this
        revolution must not be averaged."""
        return not self.flags & UNUSABLE_FLAGS and self.period_us > 0

    @property
    def warnings(self) -> list[str]:
        """What the fit could not separate in this revolution, in words."""
        return [line_hum_warning(hz, k, gap) for hz, k, gap in self.line_collisions]


def line_hum_warning(line_hz: float, order: int, gap_pct: float) -> str:
    """The user's words for a line tone too close to a running-speed order."""
    return (f"line hum at {line_hz:.0f} Hz is within {max(gap_pct, 0.1):.1f} % of {order}x: "
            "average longer or change speed")


@dataclass(frozen=True)
class Status:
    """STATUS: is the meter keeping up."""

    uptime_ms: int
    cpu_load_permille: int
    dropped_samples: int
    edges_rejected: int
    revs_sent: int
    tx_overflows: int
    streaming: bool
    edges_lost: int = 0  # lost before the edge logic saw them (board queue and meter queue overflows)


@dataclass(frozen=True)
class Ack:
    """ACK: the meter's answer to the command with sequence number ``cmd_seq``."""

    cmd_seq: int
    cmd_type: int
    result: int
    message: str = ""

    @property
    def ok(self) -> bool:
        return self.result == ACK_OK

    @property
    def result_name(self) -> str:
        return ACK_RESULT_NAMES.get(self.result, f"result {self.result}")


@dataclass(frozen=True)
class SelfTest:
    """SELFTEST: ``{"pass": bool, "checks": [{"name", "pass", "value", "unit", "note"}]}``."""

    passed: bool
    checks: list[dict[str, Any]]
    raw: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)


@dataclass(frozen=True)
class Text:
    """TEXT: a log line from the firmware."""

    text: str


@dataclass(frozen=True)
class Unknown:
    """A good frame of a type this runtrue does not know (newer firmware)."""

    type: int
    payload: bytes


Message = DeviceInfo | InfoPart | RevStats | Status | Ack | SelfTest | Text | RawPart | Unknown


def _json_object(payload: bytes, what: str) -> dict[str, Any]:
    try:
        obj = json.loads(payload.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise MessageError(f"{what} payload is not UTF-8 JSON: {exc}") from None
    if not isinstance(obj, dict):
        raise MessageError(f"{what} payload is not a JSON object")
    return obj


def _int_list(v: Any) -> list[float]:
    if not isinstance(v, list):
        raise TypeError("not a list")
    return [float(x) for x in v]


def parse_info(payload: bytes) -> DeviceInfo | InfoPart:
    """INFO, or one part of it (a meter sends INFO in parts when it does not fit one frame)."""
    obj = _json_object(payload, "INFO")
    if "parts" in obj:
        try:
            part, parts = int(obj.pop("part")), int(obj.pop("parts"))
        except (KeyError, TypeError, ValueError, OverflowError) as exc:
            raise MessageError(f"INFO part garbles 'part'/'parts': {exc}") from None
        if not 0 <= part < parts <= 16:
            raise MessageError(f"INFO part {part} of {parts}")
        if parts > 1:
            return InfoPart(part, parts, obj)
    return info_from_dict(obj)


def info_from_dict(obj: dict[str, Any]) -> DeviceInfo:
    """The :class:`DeviceInfo` of a (joined) INFO object; raises :class:`MessageError`."""
    try:
        adc_bits = int(obj.get("adc_bits", 12))
        if not 1 <= adc_bits <= 16:
            raise ValueError(f"adc_bits {adc_bits}")
        return DeviceInfo(
            fw=str(obj["fw"]),
            board=str(obj["board"]),
            proto=int(obj["proto"]),
            channels_max=int(obj.get("channels_max", 3)),
            channel_mask=int(obj.get("channel_mask", 1)),
            rate_hz=float(obj.get("rate_hz", 0.0)),
            adc_bits=adc_bits,
            counts_per_g=_int_list(obj.get("counts_per_g", [])),
            zero_code=_int_list(obj.get("zero_code", [])),
            edge=str(obj.get("edge", "rising")),
            streaming=bool(obj.get("streaming", False)),
            serial=str(obj.get("serial", "")),
            basis=str(obj.get("basis", "")),
            line_hz=int(obj.get("line_hz", 0)),
            line_inc=int(obj.get("line_inc", 0)) & 0x3FFFFFFF,
            round_robin=bool(obj.get("round_robin", False)),
            adc_offset=int(obj.get("adc_offset", 1 << (adc_bits - 1))),
            fe=_int_list(obj.get("fe", [])),
            max_rpm=float(obj.get("max_rpm", 0.0)),
            min_rpm=float(obj.get("min_rpm", 0.0)),
            raw=obj,
        )
    except (KeyError, TypeError, ValueError, OverflowError, AttributeError) as exc:
        raise MessageError(f"INFO lacks or garbles a key: {exc}") from None


def _int40(payload: bytes, off: int) -> int:
    lo = payload[off] | payload[off + 1] << 8 | payload[off + 2] << 16
    hi = payload[off + 3] | payload[off + 4] << 8
    if hi >= 0x8000:
        hi -= 0x10000
    return (hi << 24) + lo


def parse_rev(payload: bytes) -> RevStats:
    if len(payload) < _REV_HEAD.size:
        raise MessageError(f"REV payload of {len(payload)} bytes; the header alone is {_REV_HEAD.size}")
    rev, length_q8, n_samples, flags, n_ch, mask, first_off_q8, n_sums = _REV_HEAD.unpack_from(payload)
    if n_sums != N_SUMS:
        raise MessageError(f"REV carries {n_sums} sums per channel; this runtrue knows the basis of {N_SUMS}")
    expected = _REV_HEAD.size + REV_CHANNEL_LEN * n_ch
    if len(payload) != expected:
        raise MessageError(f"REV with {n_ch} channel(s) should be {expected} bytes, got {len(payload)}")
    if bin(mask).count("1") != n_ch:
        raise MessageError(f"REV channel mask {mask:#04x} does not match its {n_ch} channel block(s)")
    sums = tuple(
        tuple(_int40(payload, _REV_HEAD.size + c * REV_CHANNEL_LEN + j * INT40_LEN) for j in range(N_SUMS))
        for c in range(n_ch)
    )
    return RevStats(rev, length_q8, n_samples, flags, mask, first_off_q8, sums)


def encode_int40(v: int) -> bytes:
    """The wire form of one sum (for tests and the simulator's tools): lo:u24 hi:i16."""
    if not -(1 << 39) <= v < 1 << 39:
        raise ValueError(f"sum {v} does not fit 40 bits")
    lo = v & 0xFFFFFF
    hi = (v >> 24) & 0xFFFF
    return bytes((lo & 255, lo >> 8 & 255, lo >> 16, hi & 255, hi >> 8))


def rev_payload(stats: RevStats) -> bytes:
    """Encode a :class:`RevStats` as a REV payload (the meter's layout; for tests and tools)."""
    head = _REV_HEAD.pack(stats.rev, stats.length_q8, stats.n_samples, stats.flags, len(stats.sums),
                          stats.channel_mask, stats.first_off_q8, N_SUMS)
    return head + b"".join(encode_int40(v) for ch in stats.sums for v in ch)


def parse_status(payload: bytes) -> Status:
    if len(payload) != _STATUS.size:
        raise MessageError(f"STATUS payload of {len(payload)} bytes; it should be {_STATUS.size}")
    up, cpu, dropped, rejected, lost, sent, overflows, streaming = _STATUS.unpack(payload)
    return Status(up, cpu, dropped, rejected, sent, overflows, bool(streaming), edges_lost=lost)


def parse_ack(payload: bytes) -> Ack:
    if len(payload) < _ACK.size:
        raise MessageError(f"ACK payload of {len(payload)} bytes; it needs at least {_ACK.size}")
    cmd_seq, cmd_type, result = _ACK.unpack_from(payload)
    message = payload[_ACK.size :].decode("utf-8", errors="replace")
    return Ack(cmd_seq, cmd_type, result, message)


def parse_selftest(payload: bytes) -> SelfTest:
    obj = _json_object(payload, "SELFTEST")
    checks = obj.get("checks", [])
    if "pass" not in obj or not isinstance(checks, list) or not all(isinstance(c, dict) for c in checks):
        raise MessageError("SELFTEST needs 'pass' and a list 'checks' of objects")
    return SelfTest(bool(obj["pass"]), checks, obj)


def parse_message(frame: Frame) -> Message:
    """Parse a checked device frame into its message; raises :class:`MessageError`."""
    if frame.type == INFO:
        return parse_info(frame.payload)
    if frame.type == REV:
        return parse_rev(frame.payload)
    if frame.type == STATUS:
        return parse_status(frame.payload)
    if frame.type == ACK:
        return parse_ack(frame.payload)
    if frame.type == SELFTEST:
        return parse_selftest(frame.payload)
    if frame.type == RAW:
        return parse_raw(frame.payload)
    if frame.type == TEXT:
        return Text(frame.payload.decode("utf-8", errors="replace"))
    return Unknown(frame.type, frame.payload)
