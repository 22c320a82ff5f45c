"""Meter: the portable meter device (commands, INFO, STATUS, the self-test, service()).

Implements the device side of firmware/PROTOCOL.md and the Meter/board contract in
DEVELOPERS.md.  Imports no hardware: a board object `hw` drives it (board_rp2040 on the
device, runtrue.sim.board.SimBoard in the simulator).  The sampling path and the revolutions
are `acquisition.Acquisition`, which this class extends; the INFO and SELFTEST payloads are
built by replies.py.

`service()` does the pending work: the revolutions (acquisition.py), STATUS once a second, the
self-test, the raw capture.  It allocates nothing while it only handles revolutions and STATUS.
"""

import struct

from runtrue_fw import FW_VERSION, basis, envelope
from runtrue_fw import frames as fr
from runtrue_fw.acquisition import COUNTER_MASK, Acquisition, rev_sums, wrap_frames
from runtrue_fw.buffers import RING_FRAMES
from runtrue_fw.capture import C_RAW
from runtrue_fw.replies import info_payloads, selftest_frames, sig

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

STATUS_PERIOD_MS = const(1000)
SELFTEST_MS = const(1000)
RATE_MIN_HZ = envelope.RATE_MIN_HZ
RATE_MAX_HZ = envelope.RATE_MAX_HZ
DEFAULT_RATE_HZ = envelope.DEFAULT_RATE_HZ
_MS_MASK = const(0x3FFFFFFF)       # ticks_ms wraps at 2**30 on MicroPython


class Meter(Acquisition):
    """The meter.  See DEVELOPERS.md ("Firmware: Meter and board") for the board contract."""

    def __init__(self, hw, rev_sums_kernel=None, ring=None) -> None:
        """`rev_sums_kernel`: another implementation of kernels.rev_sums (the simulator passes a
        numpy twin held to it bit for bit); None uses the viper or portable kernel.  `ring`: the
        sample ring allocated early (buffers.meter_ring; main.py), else allocated here."""
        super().__init__(hw, rev_sums_kernel, ring)    # the ring first (acquisition.py)
        self._reader = fr.FrameReader()
        self._t0_ms = hw.ticks_ms()
        self._last_status_ms = self._t0_ms
        self._st_active = False
        self._st_seq = 0
        self._st_t0_ms = 0
        self._st_frames0 = 0
        self._st_dropped0 = 0
        self._st_revs0 = 0
        self._st_own_sampling = False
        self.repl_requested = False
        self._falling = False
        self._apply_channels(self._channel_mask, DEFAULT_RATE_HZ)
        hw.set_edge(False)

    # ----------------------------------------------------------------- host side
    def feed_command_bytes(self, data) -> None:
        """Bytes from the host; each complete command frame is executed at once."""
        self._reader.feed(data, self._on_frame)

    def service(self) -> None:
        """Pending work: edges, completed revolutions, STATUS, the self-test.  Allocates nothing
        while no command or self-test result is being answered."""
        if self._running:
            self._service_revolutions()
        now = self._hw.ticks_ms()
        if self._streaming and ((now - self._last_status_ms) & _MS_MASK) >= STATUS_PERIOD_MS:
            self._last_status_ms = now
            self._send_status()
        if self._st_active and ((now - self._st_t0_ms) & _MS_MASK) >= SELFTEST_MS:
            self._finish_selftest(now)
        if self._cap.state:
            self._cap.service(self._frames, self._running)

    # ----------------------------------------------------------------- replies
    def _send(self, ftype: int, payload, n: int = -1) -> None:
        self._write(self._writer.encode(ftype, payload, n))

    def _ack(self, seq: int, ctype: int, result: int, msg: str = "") -> None:
        m = msg.encode()[:fr.MAX_PAYLOAD - 4]
        self._send(fr.T_ACK, struct.pack(fr.ACK_FMT, seq & 0xFFFF, ctype & 0xFF, result) + m)

    def info_items(self, digits: int = 6) -> list:
        """INFO fields (PROTOCOL.md) as (key, value) pairs in a fixed order; calibration floats
        rounded to `digits` significant digits."""
        return [
            ("fw", FW_VERSION),
            ("board", self._board),
            ("proto", fr.PROTO_VERSION),
            ("serial", self._serial),
            ("channels_max", self._channels_max),
            ("channel_mask", self._channel_mask),
            ("rate_hz", sig(self._rate_hz, 7)),
            ("adc_bits", self._adc_bits),
            ("adc_offset", self._adc_offset),
            ("counts_per_g", [sig(v, digits) for v in self._counts_per_g]),
            ("zero_code", [sig(v, digits) for v in self._zero_code]),
            ("edge", "falling" if self._falling else "rising"),
            ("streaming", self._streaming),
            ("basis", basis.BASIS_ID),
            ("line_hz", self._line_hz),
            ("line_inc", self._line_inc),
            ("round_robin", self._round_robin),
            ("fe", [sig(v, 4) for v in self._fe]),
            ("max_rpm", int(envelope.max_rpm(self._rate_hz))),
            ("min_rpm", int(envelope.min_rpm(self._rate_hz) + 0.999)),
        ]

    def info_dict(self, digits: int = 6) -> dict:
        d = {}
        for k, v in self.info_items(digits):
            d[k] = v
        return d

    def info_payloads(self) -> list:
        """INFO as UTF-8 JSON objects of at most 240 bytes each (replies.info_payloads)."""
        return info_payloads(self.info_items())

    def _send_info(self) -> None:
        for part in self.info_payloads():
            self._send(fr.T_INFO, part)

    def status_fields(self) -> tuple:
        hw = self._hw
        uptime = (hw.ticks_ms() - self._t0_ms) & _MS_MASK
        cpu = max(0, min(65535, int(hw.cpu_load_permille())))
        return (uptime, cpu, hw.dropped_samples() & COUNTER_MASK,
                self._tracker.rejected & COUNTER_MASK, self.edges_lost(),
                self._revs_sent, self._tx_overflows, 1 if self._streaming else 0)

    def _send_status(self) -> None:
        hw = self._hw
        uptime = (hw.ticks_ms() - self._t0_ms) & _MS_MASK
        cpu = hw.cpu_load_permille()
        if cpu < 0:
            cpu = 0
        elif cpu > 65535:
            cpu = 65535
        struct.pack_into(fr.STATUS_FMT, self._writer.body, fr.PAYLOAD_AT, uptime, cpu,
                         hw.dropped_samples() & COUNTER_MASK, self._tracker.rejected & COUNTER_MASK,
                         self.edges_lost(), self._revs_sent, self._tx_overflows,
                         1 if self._streaming else 0)
        self._write(self._writer.finish(fr.T_STATUS, 27))

    # ----------------------------------------------------------------- commands
    def _on_frame(self, kind: int, ctype: int, seq: int, payload: bytes) -> None:
        if kind == fr.FrameReader.BAD:
            self._ack(0xFFFF, 0, fr.ACK_BAD_FRAME, "bad frame: CRC or framing error")
            return
        if kind == fr.FrameReader.VERSION:
            self._ack(seq, ctype, fr.ACK_BAD_FRAME,
                      "protocol version %d not supported; this meter speaks version %d"
                      % (payload[0], fr.PROTO_VERSION))
            return
        self._command(ctype, seq, payload)

    def _command(self, ctype: int, seq: int, payload: bytes) -> None:
        no_payload = (fr.C_IDENTIFY, fr.C_START, fr.C_STOP, fr.C_SELFTEST, fr.C_STATUS, fr.C_REPL)
        if ctype in no_payload and payload:
            self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT, "this command takes no payload")
            return
        if ctype == fr.C_IDENTIFY:
            self._send_info()
            self._ack(seq, ctype, fr.ACK_OK)
        elif ctype == fr.C_START:
            if self._st_active:
                self._ack(seq, ctype, fr.ACK_BUSY, "self-test in progress")
            elif self._streaming:
                self._ack(seq, ctype, fr.ACK_OK, "already streaming")
            else:
                self._begin_sampling()
                self._streaming = True
                self._last_status_ms = self._hw.ticks_ms()
                self._ack(seq, ctype, fr.ACK_OK)
        elif ctype == fr.C_STOP:
            if self._st_active:
                self._ack(seq, ctype, fr.ACK_BUSY, "self-test in progress")
            else:
                if self._running:
                    self._end_sampling()
                self._ack(seq, ctype, fr.ACK_OK)
        elif ctype in (fr.C_SET_RATE, fr.C_SET_CHANNELS, fr.C_SET_EDGE, fr.C_SET_LINE):
            self._configure(ctype, seq, payload)
        elif ctype == fr.C_SELFTEST:
            if self._st_active:
                self._ack(seq, ctype, fr.ACK_BUSY, "self-test already in progress")
                return
            self._st_own_sampling = not self._running
            if self._st_own_sampling:
                self._begin_sampling()
            self._st_active = True
            self._st_seq = seq
            self._st_t0_ms = self._hw.ticks_ms()
            self._st_frames0 = self._frames
            self._st_dropped0 = self._hw.dropped_samples() & COUNTER_MASK
            self._st_revs0 = self._rev_index
        elif ctype == fr.C_STATUS:
            self._send_status()
            self._ack(seq, ctype, fr.ACK_OK)
        elif ctype == fr.C_REPL:
            self._ack(seq, ctype, fr.ACK_OK, "returning to the MicroPython REPL")
            if self._running:
                self._end_sampling()
            self._st_active = False
            self.repl_requested = True
            self._hw.enter_repl()
        elif ctype == C_RAW:
            result, msg = self._cap.request(payload, self._frames, self._streaming,
                                            len(self._slots), self._channel_mask)
            self._ack(seq, ctype, result, msg)
        else:
            self._ack(seq, ctype, fr.ACK_UNKNOWN_COMMAND, "unknown command 0x%02x" % ctype)

    def _configure(self, ctype: int, seq: int, payload: bytes) -> None:
        if self._running:
            self._ack(seq, ctype, fr.ACK_BUSY, "stop streaming (and wait for the self-test) first")
            return
        if ctype == fr.C_SET_RATE:
            if len(payload) != 4:
                self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT, "SET_RATE needs rate_hz:u32")
                return
            rate = struct.unpack("<I", payload)[0]
            if not RATE_MIN_HZ <= rate <= RATE_MAX_HZ:
                self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT,
                          "rate %d Hz outside %d-%d Hz" % (rate, RATE_MIN_HZ, RATE_MAX_HZ))
                return
            self._apply_channels(self._channel_mask, rate)
        elif ctype == fr.C_SET_CHANNELS:
            if len(payload) != 1:
                self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT, "SET_CHANNELS needs mask:u8")
                return
            mask = payload[0]
            allowed = (1 << self._channels_max) - 1
            if mask == 0 or mask & ~allowed:
                self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT,
                          "channel mask 0x%02x: use bits 0-%d, at least one"
                          % (mask, self._channels_max - 1))
                return
            self._apply_channels(mask, self._requested_rate_hz)
        elif ctype == fr.C_SET_LINE:
            if len(payload) != 1 or payload[0] not in (0, 50, 60):
                self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT, "SET_LINE needs line_hz:u8, 50, 60 or 0 (off)")
                return
            self._line_hz = payload[0]
            self._line_inc = basis.line_increment(float(self._line_hz), self._rate_hz)
        else:
            if len(payload) != 1 or payload[0] > 1:
                self._ack(seq, ctype, fr.ACK_BAD_ARGUMENT, "SET_EDGE needs edge:u8, 0 rising or 1 falling")
                return
            self._falling = payload[0] == 1
            self._hw.set_edge(self._falling)
        self._ack(seq, ctype, fr.ACK_OK)
        self._send_info()

    # ----------------------------------------------------------------- self-test
    def _finish_selftest(self, now: int) -> None:
        from runtrue_fw.selftest import run_checks
        elapsed_ms = (now - self._st_t0_ms) & _MS_MASK
        frames = wrap_frames(self._frames - self._st_frames0)
        result = run_checks(
            ring=self._ring, ring_frames=RING_FRAMES, end_frame=self._frames, frames=frames,
            elapsed_ms=elapsed_ms, rate_hz=self._rate_hz, slots=self._slots,
            full_code=self._full_code, counts_per_g=self._counts_per_g,
            offset=self._adc_offset,
            dropped=(self._hw.dropped_samples() - self._st_dropped0) & COUNTER_MASK,
            revs=(self._rev_index - self._st_revs0) & COUNTER_MASK,
            ref_period_q8=self._tracker.ref_q8,
            cpu_permille=int(self._hw.cpu_load_permille()),
            rev_sums=rev_sums, table=self._ktab)
        self._st_active = False
        if self._st_own_sampling:
            self._end_sampling()
        for part in selftest_frames(result):
            self._send(fr.T_SELFTEST, part)
        self._ack(self._st_seq, fr.C_SELFTEST, fr.ACK_OK)

