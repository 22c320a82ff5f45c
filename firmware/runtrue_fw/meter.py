"""Meter: the portable meter device (commands, revolutions, frames, status).

Implements the device side of firmware/PROTOCOL.md and the Meter/board contract in
DEVELOPERS.md.  Imports no hardware: a board object `hw` drives it (board_rp2040 on the
device, runtrue.sim.board.SimBoard in the simulator).

Sampling path (may run in interrupt context, allocates nothing, proven under
`micropython.heap_lock()` by the tests): `feed_samples` copies a block into a ring of
RING_FRAMES frames per channel; `feed_edge` queues an edge position.  Everything else happens in
`service()`: edge logic (edges.py), per revolution ONE pass of the integer kernel over all
enabled channels (kernels.rev_sums: the 14 exact sums of basis.py per channel, written straight
into the REV payload), frames (frames.py), STATUS once a second, the self-test.  No floating
point on the revolution path; the host finishes the least-squares fit (protocol version 2).
service() allocates nothing while it only handles revolutions and STATUS.

Timebase: frame i (one sample of every enabled channel) is at position i·256 in 1/256 sample,
modulo 2**30, counted from START.  If the board reports `round_robin: True` in `info()`, the
k-th enabled channel of a frame was converted k/n_ch of a sample period after the first (ADC
round robin); INFO says so and the host's fit corrects for it.
"""

import gc
import json
import struct
from array import array

from runtrue_fw import FW_VERSION, basis, envelope
from runtrue_fw import frames as fr
from runtrue_fw import kernels as _k
from runtrue_fw.buffers import RING_FRAMES
from runtrue_fw.buffers import zeros as _zeros
from runtrue_fw.capture import C_RAW, Capture
from runtrue_fw.edges import DEBOUNCE_Q8, Q8_MASK, EdgeTracker, wrap_diff_q8

try:
    from runtrue_fw.kernels_viper import deinterleave, rev_sums
    KERNELS = "viper"
except (SyntaxError, ImportError, AttributeError):   # CPython (or a shim), or a port without viper
    from runtrue_fw.kernels import deinterleave, rev_sums
    KERNELS = "portable"

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

_RING_MASK = const(8191)           # RING_FRAMES (buffers.py) - 1; 48 KiB ring for 3 channels
FRAME_MASK = const(0x3FFFFF)       # frame index modulo 2**22 (its q8 position fits 2**30)
_FRAME_HALF = const(0x200000)
MAX_REV_SAMPLES = envelope.MAX_REV_SAMPLES
MIN_REV_SAMPLES = envelope.MIN_REV_SAMPLES
_EDGE_QUEUE = const(64)            # edges waiting for service(); more are counted as lost
_EQ_MASK = const(63)
_EQ_COUNTER_MASK = const(1023)
_PENDING_MAX = const(16)           # completed revolutions waiting for their samples
_DROP_MAX = const(8)               # dropped-frame intervals remembered (more are merged)
_STALE_Q8 = const(1 << 28)         # no accepted edge for 2**20 frames: the reference is lost
STATUS_PERIOD_MS = const(1000)
SELFTEST_MS = const(1000)
RATE_MIN_HZ = envelope.RATE_MIN_HZ
RATE_MAX_HZ = envelope.RATE_MAX_HZ
DEFAULT_RATE_HZ = envelope.DEFAULT_RATE_HZ
DEFAULT_LINE_HZ = const(50)
COUNTER_MASK = const(0x3FFFFFFF)   # counters wrap at 2**30: always small ints on the chip
_MS_MASK = const(0x3FFFFFFF)       # ticks_ms wraps at 2**30 on MicroPython
_SUMS_AT = const(20)               # REV sums in the writer's body: payload at 4, header 16 bytes


def _wrap_frames(d: int) -> int:
    d &= FRAME_MASK
    if d >= _FRAME_HALF:
        d = d - FRAME_MASK - 1
    return d


class Meter:
    """The meter.  See DEVELOPERS.md ("Firmware: Meter and board") for the board contract."""

    def __init__(self, hw, rev_sums_kernel=None, ring=None) -> None:
        """`rev_sums_kernel`: another implementation of kernels.rev_sums (the simulator passes a
        numpy twin held to it bit for bit); None uses the viper or portable kernel.  `ring`: the
        sample ring allocated early (buffers.meter_ring; main.py), else allocated here."""
        self._hw = hw
        self._rev_sums = rev_sums_kernel if rev_sums_kernel is not None else rev_sums
        info = hw.info()
        self._board = str(info.get("board", ""))
        self._adc_bits = int(info.get("adc_bits", 12))
        if not 8 <= self._adc_bits <= 12:
            # the kernels' word budget (kernels.py): |code - offset| <= 2**11
            raise ValueError("adc_bits must be 8..12")
        self._full_code = (1 << self._adc_bits) - 1
        self._adc_offset = 1 << (self._adc_bits - 1)
        self._channels_max = int(info.get("channels_max", 1))
        if not 1 <= self._channels_max <= 3:
            raise ValueError("channels_max must be 1..3")
        self._counts_per_g = [float(v) for v in info.get("counts_per_g", [1.0] * self._channels_max)]
        self._zero_code = [float(v) for v in info.get("zero_code", [0.0] * self._channels_max)]
        self._serial = str(info.get("serial", ""))
        self._round_robin = bool(info.get("round_robin", False))
        self._fe = [float(v) for v in info.get("fe", [])]
        self._board_edges_lost = getattr(hw, "edges_lost", None)

        # Buffers, allocated once and in place (start-up peak: firmware/README.md); the largest
        # first, after a collection, so that it finds one free stretch of the heap.
        if ring is not None and len(ring) >= RING_FRAMES * self._channels_max:
            self._ring = ring
        else:
            gc.collect()
            self._ring = _zeros("H", RING_FRAMES * self._channels_max)
        self._ktab = _k.make_kernel_table()
        self._pk = _k.make_params()
        self._pk[_k.P_MASK] = _RING_MASK
        self._pk[_k.P_SLOT] = RING_FRAMES
        self._pk[_k.P_OFFSET] = self._adc_offset
        self._pk[_k.P_OUT] = _SUMS_AT
        self._pfeed = array("i", [0, 0, 0, RING_FRAMES])
        self._eq = _zeros("i", _EDGE_QUEUE)
        self._eq_head = 0
        self._eq_tail = 0
        self._eq_overflow = 0
        self._frames = 0
        self._running = False       # board sampling, revolutions analysed
        self._streaming = False     # REV frames sent (after START)
        self._tracker = EdgeTracker()
        # pending revolutions: a ring of _PENDING_MAX entries in four integer arrays
        self._pe0 = _zeros("i", _PENDING_MAX)
        self._pe1 = _zeros("i", _PENDING_MAX)
        self._pflags = _zeros("i", _PENDING_MAX)
        self._prev = _zeros("i", _PENDING_MAX)
        self._p_head = 0
        self._p_count = 0
        self._rev_index = 0
        # dropped-frame intervals [lo, hi) in q8, oldest first
        self._drop_lo = _zeros("i", _DROP_MAX)
        self._drop_hi = _zeros("i", _DROP_MAX)
        self._drop_n = 0
        self._drop_seen = 0
        self._revs_sent = 0
        self._tx_overflows = 0
        self._writer = fr.FrameWriter()
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
        self._cap = Capture(self._ring, self._writer, self._write)   # raw capture (RAW 0x8B)

        self._channel_mask = (1 << self._channels_max) - 1
        self._falling = False
        self._rate_hz = 0.0
        self._line_hz = DEFAULT_LINE_HZ
        self._line_inc = 0
        self._slots: list = []
        self._apply_channels(self._channel_mask, DEFAULT_RATE_HZ)
        hw.set_edge(False)

    # ----------------------------------------------------------------- sampling path
    def feed_samples(self, block, n_frames: int) -> None:
        """`n_frames` interleaved frames (enabled channels ascending) from `block` (array('H')).

        Allocates nothing.  Samples are ADC codes of `adc_bits` bits.  If the board lost
        samples it must still feed the right number of frames (placeholders), so that the
        frame count stays the timebase, and count them in `dropped_samples()` before this call:
        the frames of a block fed while that count moved are marked dropped (an interval).
        """
        if not self._running or n_frames <= 0:
            return
        start = self._frames
        p = self._pfeed
        p[0] = n_frames
        p[2] = start & _RING_MASK
        deinterleave(block, self._ring, p)  # type: ignore[arg-type]  # viper ptr args take arrays
        end = (start + n_frames) & FRAME_MASK
        self._frames = end
        d = self._hw.dropped_samples() & COUNTER_MASK
        if d != self._drop_seen:
            self._drop_seen = d
            self.mark_dropped(start, end)

    def mark_dropped(self, first_frame: int, end_frame: int) -> None:
        """Frames [first_frame, end_frame) (frame indices mod 2**22) hold no real samples.
        Every revolution touching them is flagged DROPPED_SAMPLES.  Allocates nothing."""
        lo = (first_frame & FRAME_MASK) << 8
        hi = (end_frame & FRAME_MASK) << 8
        n = self._drop_n
        if n > 0 and wrap_diff_q8(lo, self._drop_hi[n - 1]) <= 0:
            self._drop_hi[n - 1] = hi          # touches the last interval: extend it
            return
        if n == _DROP_MAX:                     # full: merge into the last (flags more, never fewer)
            self._drop_hi[n - 1] = hi
            return
        self._drop_lo[n] = lo
        self._drop_hi[n] = hi
        self._drop_n = n + 1

    def feed_edge(self, pos_q8: int) -> None:
        """Queue an active reference edge at `pos_q8` (1/256 sample since START, mod 2**30).

        Allocates nothing.  A full queue (service() not called for 64 edges) drops the edge;
        it is counted in STATUS edges_lost and the revolution shows MISSING_PULSE.
        """
        if not self._running:
            return
        t = self._eq_tail
        if ((t - self._eq_head) & _EQ_COUNTER_MASK) >= _EDGE_QUEUE:
            self._eq_overflow = (self._eq_overflow + 1) & COUNTER_MASK
            return
        self._eq[t & _EQ_MASK] = pos_q8 & Q8_MASK
        self._eq_tail = (t + 1) & _EQ_COUNTER_MASK

    # ----------------------------------------------------------------- host side
    def feed_command_bytes(self, data) -> None:
        """Bytes from the host; each complete command frame is executed at once."""
        self._reader.feed(data, self._on_frame)

    def service(self) -> None:
        """Pending work: edges, completed revolutions, STATUS, the self-test.  Allocates nothing
        while no command or self-test result is being answered."""
        if self._running:
            self._process_edges()
            self._analyse_pending()
            tr = self._tracker
            if tr.have_edge and wrap_diff_q8(self._frames << 8, tr.last_q8) > _STALE_Q8:
                tr.restart()
        now = self._hw.ticks_ms()
        if self._streaming and ((now - self._last_status_ms) & _MS_MASK) >= STATUS_PERIOD_MS:
            self._last_status_ms = now
            self._send_status()
        if self._st_active and ((now - self._st_t0_ms) & _MS_MASK) >= SELFTEST_MS:
            self._finish_selftest(now)
        if self._cap.state:
            self._cap.service(self._frames, self._running)

    # ----------------------------------------------------------------- state
    @property
    def streaming(self) -> bool:
        return self._streaming

    @property
    def rate_hz(self) -> float:
        return self._rate_hz

    @property
    def channel_mask(self) -> int:
        return self._channel_mask

    def _apply_channels(self, mask: int, rate_hz: int) -> None:
        actual = float(self._hw.configure(mask, rate_hz))
        self._channel_mask = mask
        self._slots = [ch for ch in range(3) if mask & (1 << ch)]
        self._pfeed[1] = len(self._slots)
        self._pk[_k.P_NCH] = len(self._slots)
        self._rate_hz = actual
        self._requested_rate_hz = rate_hz
        self._line_inc = basis.line_increment(float(self._line_hz), actual)

    def _begin_sampling(self) -> None:
        self._frames = 0
        self._eq_head = 0
        self._eq_tail = 0
        self._tracker.restart()
        self._p_head = 0
        self._p_count = 0
        self._rev_index = 0
        self._drop_seen = self._hw.dropped_samples() & COUNTER_MASK
        self._drop_n = 0
        self._cap.restart()
        self._running = True
        self._hw.start()

    def _end_sampling(self) -> None:
        self._hw.stop()
        self._running = False
        self._streaming = False
        self._p_count = 0

    # ----------------------------------------------------------------- revolutions
    def _process_edges(self) -> None:
        tr = self._tracker
        while self._eq_head != self._eq_tail and self._p_count < _PENDING_MAX:
            h = self._eq_head
            pos = self._eq[h & _EQ_MASK]
            self._eq_head = (h + 1) & _EQ_COUNTER_MASK
            done = tr.edge(pos)
            if tr.last_q8 == pos:
                self._cap.note_edge(pos)        # accepted: the raw capture's edge history
            if done:
                j = (self._p_head + self._p_count) % _PENDING_MAX
                self._pe0[j] = tr.rev_start_q8
                self._pe1[j] = tr.rev_end_q8
                self._pflags[j] = tr.rev_flags
                self._prev[j] = self._rev_index
                self._p_count += 1
                self._rev_index = (self._rev_index + 1) & COUNTER_MASK
            elif tr.suspect_previous and self._p_count:
                j = (self._p_head + self._p_count - 1) % _PENDING_MAX
                if self._pe1[j] == tr.last_q8:
                    self._pflags[j] |= fr.F_EXTRA_PULSE

    def _analyse_pending(self) -> None:
        while self._p_count:
            j = self._p_head
            e0 = self._pe0[j]
            e1 = self._pe1[j]
            length_q8 = wrap_diff_q8(e1, e0)
            first_off_q8 = (256 - (e0 & 255)) & 255
            n = (length_q8 - first_off_q8 - 1) // 256 + 1 if length_q8 > first_off_q8 else 0
            i0 = ((e0 >> 8) + (1 if e0 & 255 else 0)) & FRAME_MASK
            # wait for its samples, and a quarter turn more: an edge rejected just after e1
            # would mean e1 itself may have been the glitch (edges.py, suspect_previous)
            hold_q8 = (e1 + (length_q8 >> 2) + DEBOUNCE_Q8) & Q8_MASK
            if n <= MAX_REV_SAMPLES and (
                    _wrap_frames(self._frames - ((i0 + n) & FRAME_MASK)) < 0
                    or wrap_diff_q8(self._frames << 8, hold_q8) < 0):
                return
            self._p_head = (j + 1) % _PENDING_MAX
            self._p_count -= 1
            self._finish_revolution(e0, e1, length_q8, first_off_q8, i0, n, self._pflags[j], self._prev[j])

    def _dropped_flag(self, e0: int, e1: int) -> int:
        """DROPPED_SAMPLES if any remembered dropped interval overlaps [e0, e1]; intervals that
        end before e0 are forgotten (revolutions are finished in order)."""
        flag = 0
        k = 0
        while k < self._drop_n:
            if wrap_diff_q8(self._drop_lo[k], e1) < 0 and wrap_diff_q8(self._drop_hi[k], e0) > 0:
                flag = fr.F_DROPPED_SAMPLES
            k += 1
        while self._drop_n and wrap_diff_q8(self._drop_hi[0], e0) <= 0:
            k = 1
            while k < self._drop_n:
                self._drop_lo[k - 1] = self._drop_lo[k]
                self._drop_hi[k - 1] = self._drop_hi[k]
                k += 1
            self._drop_n -= 1
        return flag

    def _finish_revolution(self, e0, e1, length_q8, first_off_q8, i0, n, flags, rev) -> None:
        flags |= self._dropped_flag(e0, e1)
        if _wrap_frames(self._frames - i0) > RING_FRAMES:
            flags |= fr.F_NO_FIT | fr.F_DROPPED_SAMPLES     # overwritten before service() ran
        if n > MAX_REV_SAMPLES or n < MIN_REV_SAMPLES:
            flags |= fr.F_NO_FIT
        if not self._streaming:
            return      # sampling only for the self-test: nothing to send, spare the CPU
        n_slots = self._pk[_k.P_NCH]
        body = self._writer.body
        if not flags & fr.F_NO_FIT:
            p = self._pk
            inc1 = basis.rev_increment(length_q8)
            p[_k.P_N] = n
            p[_k.P_START] = i0 & _RING_MASK
            p[_k.P_INC] = inc1
            p[_k.P_A1] = basis.first_angle(inc1, first_off_q8)
            p[_k.P_LINE] = self._line_inc
            self._rev_sums(self._ring, self._ktab, p, body)  # type: ignore[arg-type]  # viper ptr args
            k = 0
            while k < n_slots:
                if p[_k.P_MIN + k] <= 0 or p[_k.P_MAX + k] >= self._full_code:
                    flags |= fr.F_CLIPPED | (fr.F_CLIP_CH0 << self._slots[k])
                k += 1
        else:
            i = _SUMS_AT
            end = _SUMS_AT + fr.REV_CHANNEL_LEN * n_slots
            while i < end:
                body[i] = 0
                i += 1
        struct.pack_into(fr.REV_HEADER_FMT, body, fr.PAYLOAD_AT, rev, length_q8,
                         n if n < 65535 else 65535, flags, n_slots, self._channel_mask,
                         first_off_q8, fr.N_SUMS)
        self._write(self._writer.finish(fr.T_REV, fr.REV_HEADER_LEN + fr.REV_CHANNEL_LEN * n_slots))
        self._revs_sent = (self._revs_sent + 1) & COUNTER_MASK

    # ----------------------------------------------------------------- frames out
    def _write(self, n: int) -> None:
        """Hand wire[:n] to the board: hw.write(buf, n) (DEVELOPERS.md)."""
        r = self._hw.write(self._writer.wire, n)
        if r is not None and r < n:
            self._tx_overflows = (self._tx_overflows + 1) & COUNTER_MASK

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
            ("rate_hz", _sig(self._rate_hz, 7)),
            ("adc_bits", self._adc_bits),
            ("adc_offset", self._adc_offset),
            ("counts_per_g", [_sig(v, digits) for v in self._counts_per_g]),
            ("zero_code", [_sig(v, digits) for v in self._zero_code]),
            ("edge", "falling" if self._falling else "rising"),
            ("streaming", self._streaming),
            ("basis", basis.BASIS_ID),
            ("line_hz", self._line_hz),
            ("line_inc", self._line_inc),
            ("round_robin", self._round_robin),
            ("fe", [_sig(v, 4) for v in self._fe]),
            ("max_rpm", int(envelope.max_rpm(self._rate_hz))),
            ("min_rpm", int(envelope.min_rpm(self._rate_hz) + 0.999)),
        ]

    def info_dict(self, digits: int = 6) -> dict:
        d = {}
        for k, v in self.info_items(digits):
            d[k] = v
        return d

    def info_payloads(self) -> list:
        """INFO as UTF-8 JSON objects of at most 240 bytes each: the fields in order, as many per
        frame as fit, each frame with "part" and "parts" (PROTOCOL.md); the host joins them."""
        items = self.info_items()
        groups = []
        cur = {"part": 99, "parts": 99}
        for k, v in items:
            cur[k] = v
            if len(_dumps(cur).encode()) > fr.MAX_PAYLOAD:
                del cur[k]
                groups.append(cur)
                cur = {"part": 99, "parts": 99}
                cur[k] = v
        groups.append(cur)
        out = []
        for i in range(len(groups)):
            g = groups[i]
            g["part"] = i
            g["parts"] = len(groups)
            out.append(_dumps(g).encode()[:fr.MAX_PAYLOAD])
        return out

    def _send_info(self) -> None:
        for part in self.info_payloads():
            self._send(fr.T_INFO, part)

    def edges_lost(self) -> int:
        """Edges lost before the edge logic saw them: the board's queue and the meter's."""
        board = self._board_edges_lost() if self._board_edges_lost is not None else 0
        return (board + self._eq_overflow) & COUNTER_MASK

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
        frames = _wrap_frames(self._frames - self._st_frames0)
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


def _sig(v: float, digits: int) -> float:
    return float("%.*g" % (digits, v))


def _dumps(obj) -> str:
    try:
        return json.dumps(obj, separators=(",", ":"))
    except TypeError:   # a MicroPython without the separators argument
        return json.dumps(obj)


def selftest_frames(result: dict) -> list:
    """SELFTEST payloads, each at most 240 bytes (PROTOCOL.md: split into parts if needed).

    Each part is {"pass": overall, "checks": [...some...], "part": i, "parts": n}; the host
    joins the checks of parts 0..n-1.
    """
    checks = result["checks"]
    groups: list = []
    cur: list = []
    for c in checks:
        trial = cur + [c]
        probe = {"pass": result["pass"], "checks": trial, "part": 99, "parts": 99}
        if cur and len(_dumps(probe).encode()) > fr.MAX_PAYLOAD:
            groups.append(cur)
            cur = [c]
        else:
            cur = trial
    groups.append(cur)
    out = []
    for i in range(len(groups)):
        body = {"pass": result["pass"], "checks": groups[i], "part": i, "parts": len(groups)}
        out.append(_dumps(body).encode()[:fr.MAX_PAYLOAD])
    return out
