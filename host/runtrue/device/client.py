"""MeterClient: the meter's commands and its revolution records over any transport.

Contract: DEVELOPERS.md, "Device client".  The client owns one :class:`FrameDecoder`, numbers
its commands, waits for each command's ACK (matched by the command's sequence number,
firmware/PROTOCOL.md) and keeps every other message: revolutions in a queue, the latest INFO and
STATUS, TEXT lines in a log.

Reconnection: when the transport reports :class:`TransportLost` (meter unplugged), the client
keeps its session (queued revolutions, counters, the settings asked for) and asks the transport
to reopen the same device while the caller's timeout lasts.  When the device is back it
applies the settings again and restarts streaming if it was streaming, so a reading in
progress simply carries on.  If the device is still away when the timeout ends, the call raises
:class:`TransportLost`; calling again later resumes the same session.  A caller may also reopen
the transport itself (``client.transport.reopen(...)``): the next command then starts a fresh
stream and applies the session's settings again (streaming is left for the caller to restart).
"""

from __future__ import annotations

import collections
import time
from collections.abc import Callable
from typing import Any

import runtrue.device.revfit as revfit
from runtrue.device.advice import FLAGGED_LIMIT, envelope_warning, flagged_advice, link_diagnosis, no_answer_text
from runtrue.device.capture import CaptureError, RawAssembler, RawCapture
from runtrue.device.errors import AllRevolutionsFlagged, CommandRejected, MeterError, NoAnswer, NoRevolutions
from runtrue.device.sequence import DUPLICATE, RESTART, STALE, SequenceTracker
from runtrue.protocol.admit import counts, why_left_out
from runtrue.protocol.commands import (
    CMD_IDENTIFY,
    CMD_RAW,
    CMD_SELFTEST,
    CMD_SET_CHANNELS,
    CMD_SET_EDGE,
    CMD_SET_LINE,
    CMD_SET_RATE,
    CMD_START,
    CMD_STATUS,
    CMD_STOP,
    COMMAND_NAMES,
    CommandEncoder,
    raw_payload,
    set_channels_payload,
    set_edge_payload,
    set_line_payload,
    set_rate_payload,
)
from runtrue.protocol.errors import MessageError
from runtrue.protocol.frames import FrameDecoder
from runtrue.protocol.messages import (
    ACK,
    INFO,
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
    parse_message,
)
from runtrue.protocol.raw import RawPart
from runtrue.transport import open_transport
from runtrue.transport.base import Transport, TransportLost
from runtrue_fw import basis

READ_CHUNK = 4096
POLL_S = 0.05
REV_QUEUE_MAX = 100_000  # about 30 min at 3,600 rpm; the oldest go first beyond that


class MeterClient:
    """Commands and readings of one meter over ``transport``."""

    def __init__(self, transport: Transport, port: str | None = None, *, command_timeout_s: float = 2.0) -> None:
        self.transport = transport
        self.port = port or transport.name
        self.command_timeout_s = command_timeout_s
        self.decoder = FrameDecoder()
        self.commands = CommandEncoder()
        self.info: DeviceInfo | None = None
        self.last_status: Status | None = None
        self.log: collections.deque[str] = collections.deque(maxlen=200)
        self.message_errors = 0  # checked frames whose message could not be read or kept
        self.sequence = SequenceTracker()  # duplicates, restarts and lost frames by sequence number
        self.bytes_in = 0
        self.envelope_warning: str | None = None  # set while the latest revolution is outside the envelope
        self.reconnects = 0
        self.connected = True
        self.streaming = False
        self._revs: collections.deque[Revolution] = collections.deque(maxlen=REV_QUEUE_MAX)
        self._last_stats: RevStats | None = None  # for the speed change within the next revolution
        self._clock = revfit.SampleClock()  # where each revolution's samples lie, for the line tone
        self._acks: dict[int, Ack] = {}
        self._selftest: SelfTest | None = None
        self._selftest_parts: dict[int, dict[str, Any]] = {}
        self._info_parts = InfoAssembler()
        self._raw = RawAssembler()
        self._raw_done: RawPart | None = None
        self._frames_seen = 0
        self._flush_next = True  # start with a lone 0x00: the meter drops any half-received frame
        self._resync_pending = False
        self._was_streaming = False
        # Settings asked for in this session: applied again after a reconnect.
        self._wanted: dict[str, Any] = {}

    # ---- counters ---------------------------------------------------------------------------

    @property
    def lost_frames(self) -> int:
        """Device frames that never arrived (from sequence-number gaps)."""
        return self.sequence.lost_frames

    @property
    def duplicate_frames(self) -> int:
        """Frames delivered twice (same sequence number as the last): dropped."""
        return self.sequence.duplicates

    @property
    def meter_restarts(self) -> int:
        """Times the meter was seen to start again (its sequence numbers began anew)."""
        return self.sequence.restarts

    def counts(self) -> dict[str, int]:
        """A snapshot of the link counters, for :meth:`diagnose` after a wait."""
        return self._counts()

    def _counts(self) -> dict[str, int]:
        d = self.decoder
        return {"bytes_in": self.bytes_in, "frames_ok": d.frames_ok, "framing_errors": d.framing_errors,
                "crc_errors": d.crc_errors, "version_errors": d.version_errors, "restarts": self.sequence.restarts}

    def diagnose(self, since: dict[str, int] | None = None, revolutions: int = 0, waited_s: float = 0.0) -> str:
        """The likeliest cause of a silence or failure, from the counts since ``since`` (a
        snapshot of :meth:`_counts`; default: the whole session) over ``waited_s`` seconds."""
        now = self._counts()
        base = since or {k: 0 for k in now}
        delta = {k: now[k] - base.get(k, 0) for k in now}
        return link_diagnosis(revolutions=revolutions, streaming=self.streaming, waited_s=waited_s, **delta)

    @property
    def frame_errors(self) -> int:
        """Runs dropped for bad framing, CRC or version."""
        return self.decoder.errors

    # ---- the pump ---------------------------------------------------------------------------

    def _dispatch(self, message: Message) -> None:
        if isinstance(message, RevStats):
            if self.info is None:  # the fit needs the meter's settings (start() asks for them)
                self.message_errors += 1
                self.log.append(f"revolution {message.rev} before the meter's INFO: left out")
                return
            prev = revfit.previous_length(self._last_stats, message)
            self._last_stats = message
            first, run = self._clock.place(message)
            rev = revfit.revolution_from_info(message, self.info, prev, first, run)
            warning = envelope_warning(rev.speed_rpm, self.info.min_rpm, self.info.max_rpm)
            if warning and warning != self.envelope_warning:
                self.log.append(warning)
            self.envelope_warning = warning
            self._revs.append(rev)
        elif isinstance(message, Ack):
            self._acks[message.cmd_seq] = message
        elif isinstance(message, DeviceInfo):
            self.info = message
        elif isinstance(message, InfoPart):
            try:
                info = self._info_parts.feed(message)
            except MessageError as exc:
                self.message_errors += 1
                self.log.append(f"bad message: {exc}")
                return
            if info is not None:
                self.info = info
        elif isinstance(message, Status):
            self.last_status = message
        elif isinstance(message, SelfTest):
            raw = dict(message.raw)  # raises on a payload that is not an object: counted by feed()
            self._selftest_parts[int(raw.get("part", 0) or 0)] = raw
            self._selftest = message
        elif isinstance(message, Text):
            self.log.append(message.text)
        elif isinstance(message, RawPart):
            done = self._raw.feed(message)
            if done is not None:
                self._raw_done = done

    def feed(self, data: bytes) -> None:
        """Decode bytes from the transport and keep the messages they complete.

        Never raises on what the meter sends: a frame delivered twice or out of order is dropped
        (``runtrue.device.sequence``); a message that cannot be read or kept, whatever the
        exception, is counted in ``message_errors``, logged, and the next one is taken."""
        self.bytes_in += len(data)
        for frame in self.decoder.feed(data):
            verdict = self.sequence.verdict(frame.seq, answer=frame.type in (INFO, ACK), now_s=time.monotonic())
            if verdict in (DUPLICATE, STALE):
                continue
            self._frames_seen += 1
            if verdict == RESTART:
                self.log.append(f"the meter restarted (sequence number back to {frame.seq})")
            try:
                message = parse_message(frame)
                self._dispatch(message)
            except MessageError as exc:
                self.message_errors += 1
                self.log.append(f"bad message: {exc}")
            except Exception as exc:  # noqa: BLE001 - a payload the parser did not foresee: count it, go on
                self.message_errors += 1
                self.log.append(f"unreadable message of type {frame.type:#04x}: {type(exc).__name__}: {exc}"[:200])

    def _pump(self, timeout_s: float, deadline: float) -> None:
        """Read once (waiting up to ``timeout_s``); reconnect on loss while ``deadline`` allows."""
        if self._resync_pending and self.transport_is_back():
            self._resync()
        try:
            data = self.transport.read(READ_CHUNK, timeout_s)
        except TransportLost:
            self._lost()
            self._reconnect(deadline)
            return
        if data:
            self.feed(data)

    def transport_is_back(self) -> bool:
        """After a loss: has the transport been reopened (by this client or by its owner)?"""
        return bool(getattr(self.transport, "is_open", True))

    def _lost(self) -> None:
        if self.connected:
            self._was_streaming = self.streaming
        self.connected = False
        self.streaming = False
        self._resync_pending = True

    def _resync(self) -> None:
        """The device is back (possibly restarted): start a fresh stream and apply again the
        settings asked for in this session.  Streaming is not restarted here."""
        self._resync_pending = False
        self.connected = True
        self.decoder.discard_partial()
        self.decoder.reset_sequence()
        self.sequence.reset()
        self._acks.clear()
        self._flush_next = True
        wanted = dict(self._wanted)
        if "rate_hz" in wanted:
            self._command(CMD_SET_RATE, set_rate_payload(wanted["rate_hz"]))
        if "channel_mask" in wanted:
            self._command(CMD_SET_CHANNELS, set_channels_payload(wanted["channel_mask"]))
        if "edge" in wanted:
            self._command(CMD_SET_EDGE, set_edge_payload(wanted["edge"]))
        if "line_hz" in wanted:
            self._command(CMD_SET_LINE, set_line_payload(wanted["line_hz"]))

    def _reconnect(self, deadline: float) -> None:
        """Wait for the device until ``deadline``; when back, resynchronise and resume streaming."""
        remaining = max(0.0, deadline - time.monotonic())
        if not self.transport.reopen(remaining):
            raise TransportLost(
                f"the meter on {self.port} is unplugged or not answering: check the USB cable and plug it back in"
            )
        self.reconnects += 1
        self._resync()
        if self._was_streaming:
            self._command(CMD_START)
            self.streaming = True

    def _wait(self, until: Callable[[], bool], timeout_s: float) -> bool:
        deadline = time.monotonic() + timeout_s
        while not until():
            remaining = deadline - time.monotonic()
            if remaining <= 0:
                return until()
            self._pump(min(POLL_S, remaining), deadline)
        return True

    def _command(self, cmd_type: int, payload: bytes = b"", timeout_s: float | None = None) -> Ack:
        """Send a command and wait for its ACK; raise :class:`CommandRejected` unless ok."""
        timeout = self.command_timeout_s if timeout_s is None else timeout_s
        name = COMMAND_NAMES.get(cmd_type, f"command {cmd_type:#04x}")
        if self._resync_pending and self.transport_is_back():
            self._resync()  # reopened by the caller: same session, settings applied again
        seq, wire = self.commands.encode(cmd_type, payload)
        if self._flush_next:
            wire = b"\x00" + wire
            self._flush_next = False
        deadline = time.monotonic() + timeout
        try:
            self.transport.write(wire)
        except TransportLost:
            self._lost()
            self._reconnect(deadline)
            return self._command(cmd_type, payload, max(0.1, deadline - time.monotonic()))
        frames_before = self._frames_seen
        counts_before = self._counts()
        if not self._wait(lambda: seq in self._acks, timeout):
            if self.decoder.version_errors and self.decoder.frames_ok == 0:
                raise MeterError(f"the meter on {self.port} answers in another protocol version: "
                                 f"{self.decoder.last_error}")
            cause = self.diagnose(counts_before, revolutions=1, waited_s=timeout)
            if self._frames_seen == frames_before and self.decoder.frames_ok == 0:
                raise NoAnswer(no_answer_text(self.port, cause))
            raise MeterError(
                f"the meter on {self.port} did not acknowledge {name} within {timeout:g} s "
                f"(frames lost so far: {self.lost_frames}): {cause}"
            )
        ack = self._acks.pop(seq)
        if not ack.ok:
            detail = f": {ack.message}" if ack.message else ""
            raise CommandRejected(f"the meter refused {name} ({ack.result_name}){detail}", ack.result)
        return ack

    # ---- commands ---------------------------------------------------------------------------

    def identify(self) -> DeviceInfo:
        """Ask the meter what it is (INFO) and return it."""
        self.info = None
        self._command(CMD_IDENTIFY)
        if self.info is None and not self._wait(lambda: self.info is not None, self.command_timeout_s):
            raise MeterError(f"the meter on {self.port} acknowledged IDENTIFY but sent no INFO")
        assert self.info is not None
        if self.info.basis != basis.BASIS_ID:
            raise MeterError(
                f"the meter on {self.port} sums on basis {self.info.basis or 'unknown'!r}, this runtrue "
                f"fits {basis.BASIS_ID!r}: update the firmware: runtrue device install")
        return self.info

    def start(self) -> None:
        """Start streaming revolutions (the queue is emptied first: old revolutions are stale).
        Asks for INFO first if it is not known: the host's fit needs the meter's settings."""
        if self.info is None:
            self.identify()
        self._revs.clear()
        self._command(CMD_START)
        self.streaming = True

    def stop(self) -> None:
        self._command(CMD_STOP)
        self.streaming = False

    def _set_and_wait_info(self, cmd_type: int, payload: bytes) -> None:
        old = self.info
        self.info = None
        self._command(cmd_type, payload)
        if not self._wait(lambda: self.info is not None, self.command_timeout_s):
            self.info = old

    def set_rate(self, hz: float) -> float:
        """Set the per-channel sample rate; returns the rate the meter really uses (Hz)."""
        self._set_and_wait_info(CMD_SET_RATE, set_rate_payload(int(round(hz))))
        self._wanted["rate_hz"] = int(round(hz))
        return self.info.rate_hz if self.info else float(hz)

    def set_channels(self, mask: int) -> None:
        """Choose the channels (bit 0 = channel 0)."""
        self._set_and_wait_info(CMD_SET_CHANNELS, set_channels_payload(mask))
        self._wanted["channel_mask"] = mask

    def set_edge(self, edge: str) -> None:
        """Which edge of the reference pulse marks the revolution: "rising" or "falling"."""
        self._set_and_wait_info(CMD_SET_EDGE, set_edge_payload(edge))
        self._wanted["edge"] = edge

    def set_line(self, line_hz: int) -> None:
        """The line frequency the meter fits as a tone (50 or 60 Hz; 0 = none)."""
        self._set_and_wait_info(CMD_SET_LINE, set_line_payload(line_hz))
        self._wanted["line_hz"] = line_hz

    def self_test(self, timeout_s: float = 10.0) -> dict[str, Any]:
        """Run the meter's self-test (about a second of measurement); returns its JSON object,
        ``{"pass", "checks"}``, with the checks of every part joined in order (the meter splits a
        long result into frames carrying ``"part"``/``"parts"``, PROTOCOL.md).  If a part was lost
        on the link, ``"missing_parts"`` says how many."""
        self._selftest = None
        self._selftest_parts = {}
        self._command(CMD_SELFTEST, timeout_s=timeout_s)
        if self._selftest is None and not self._wait(lambda: self._selftest is not None, 1.0):
            raise MeterError(f"the meter on {self.port} acknowledged SELFTEST but sent no result")
        assert self._selftest is not None
        last = dict(self._selftest.raw)
        if "parts" not in last:
            return last
        checks: list[dict[str, Any]] = []
        for i in sorted(self._selftest_parts):
            part = self._selftest_parts[i].get("checks", [])
            checks.extend(c for c in part if isinstance(c, dict)) if isinstance(part, list) else None
        result: dict[str, Any] = {"pass": bool(last.get("pass")), "checks": checks}
        parts = last.get("parts")
        expected = parts if isinstance(parts, int) and 0 < parts < 1000 else len(self._selftest_parts)
        if len(self._selftest_parts) < expected:
            result["missing_parts"] = expected - len(self._selftest_parts)
        return result

    def status(self) -> Status:
        """Ask for a STATUS report now."""
        self.last_status = None
        self._command(CMD_STATUS)
        if self.last_status is None and not self._wait(lambda: self.last_status is not None, 1.0):
            raise MeterError(f"the meter on {self.port} acknowledged STATUS but sent no report")
        assert self.last_status is not None
        return self.last_status

    def capture(self, n_frames: int, timeout_s: float | None = None) -> RawCapture:
        """A raw capture of the next ``n_frames`` sample frames (16-4096) of the enabled channels,
        with the reference edges on the same timebase (streaming must be on; revolutions keep
        arriving meanwhile).  Raises :class:`CaptureError` with what to do when it fails."""
        if self.info is None:
            self.identify()
        assert self.info is not None
        self._raw_done = None
        self._raw = RawAssembler()
        self._command(CMD_RAW, raw_payload(n_frames))
        rate = self.info.rate_hz or 1000.0
        wait = timeout_s if timeout_s is not None else 3.0 + 2.0 * n_frames / rate
        if not self._wait(lambda: self._raw_done is not None, wait):
            raise CaptureError(f"the meter on {self.port} accepted the capture but did not finish sending it "
                               f"within {wait:.0f} s: try again")
        return self._raw.result(self.info)

    # ---- revolutions ------------------------------------------------------------------------

    @property
    def pending(self) -> int:
        """Revolutions received and not yet read."""
        return len(self._revs)

    def discard_revolutions(self) -> None:
        self._revs.clear()

    def read_revolution(self, timeout_s: float) -> Revolution | None:
        """The next revolution (usable or not: see ``Revolution.usable``), or None on timeout."""
        if not self._revs:
            self._wait(lambda: bool(self._revs), timeout_s)
        return self._revs.popleft() if self._revs else None

    def revolutions(self, n: int, timeout_s: float = 5.0, *, usable_only: bool = False) -> list[Revolution]:
        """The next ``n`` revolutions.  ``timeout_s`` is the longest wait for each one; if it
        passes with none, :class:`NoRevolutions` says to check the reference sensor.  With
        ``usable_only``, flagged revolutions are skipped, but not for ever: after
        ``max(FLAGGED_LIMIT, 4 n)`` of them :class:`AllRevolutionsFlagged` says which flags and
        what to do."""
        out: list[Revolution] = []
        flagged: dict[str, int] = {}
        n_flagged = 0
        limit = max(FLAGGED_LIMIT, 4 * n)
        while len(out) < n:
            counts_before = self._counts()
            rev = self.read_revolution(timeout_s)
            if rev is None:
                raise NoRevolutions(
                    f"no revolution from the meter on {self.port} within {timeout_s:g} s "
                    f"({len(out)} of {n} so far): {self.diagnose(counts_before, waited_s=timeout_s)}"
                )
            if usable_only and not counts(rev):
                n_flagged += 1
                for name in why_left_out(rev):
                    flagged[name] = flagged.get(name, 0) + 1
                if n_flagged >= limit:
                    raise AllRevolutionsFlagged(flagged_advice(self.port, n_flagged, len(out), n, flagged), flagged)
                continue
            out.append(rev)
        return out

    def close(self) -> None:
        """Stop streaming if possible and release the port."""
        if self.streaming and self.connected:
            try:
                self.stop()
            except (MeterError, TransportLost):
                pass
        self.transport.close()

    def __enter__(self) -> MeterClient:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def open_meter(
    port: str,
    seed: int | None = None,
    realtime: bool = False,
    *,
    command_timeout_s: float = 2.0,
    spy: str | None = None,
) -> MeterClient:
    """Open ``port`` (a serial device, or ``sim:NAME``) and return a client (not yet identified).
    ``spy``: a file to hex-dump the traffic into."""
    transport = open_transport(port, seed=seed, realtime=realtime, spy=spy)
    return MeterClient(transport, port, command_timeout_s=command_timeout_s)
