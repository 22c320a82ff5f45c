"""The meter's acquisition: samples into a ring, edges into revolutions, REV frames out.

Implements the sampling and per-revolution half of the device side of firmware/PROTOCOL.md; the
command side (commands, INFO, STATUS, the self-test) is `meter.Meter`, built on this class.
Imports no hardware: a board object `hw` drives it (DEVELOPERS.md, "Firmware: Meter and board").

Sampling path (may run in interrupt context, allocates nothing, proven under
`micropython.heap_lock()` by the tests): `feed_samples` copies a block into a ring of
RING_FRAMES frames per channel; `feed_edge` queues an edge position.  The Meter's `service()`
then runs the edge logic (edges.py) and, per revolution, ONE pass of the integer kernel over all
enabled channels (kernels.rev_sums: the 14 exact sums of basis.py per channel, written straight
into the REV payload) and the REV frame (frames.py).  No floating point on the revolution path;
the host finishes the least-squares fit (protocol version 2).  Nothing here allocates after
__init__.

Timebase: frame i (one sample of every enabled channel) is at position i·256 in 1/256 sample,
modulo 2**30, counted from START.  If the board reports `round_robin: True` in `info()`, the
k-th enabled channel of a frame was converted k/n_ch of a sample period after the first (ADC
round robin); INFO says so and the host's fit corrects for it.
"""

import gc
import struct
from array import array

from runtrue_fw import basis, envelope
from runtrue_fw import frames as fr
from runtrue_fw import kernels as _k
from runtrue_fw.buffers import RING_FRAMES
from runtrue_fw.buffers import zeros as _zeros
from runtrue_fw.capture import Capture
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
DEFAULT_LINE_HZ = const(50)
COUNTER_MASK = const(0x3FFFFFFF)   # counters wrap at 2**30: always small ints on the chip
_SUMS_AT = const(20)               # REV sums in the writer's body: payload at 4, header 16 bytes


def wrap_frames(d: int) -> int:
    """A difference of frame indices (mod 2**22) as a signed number of frames."""
    d &= FRAME_MASK
    if d >= _FRAME_HALF:
        d = d - FRAME_MASK - 1
    return d


class Acquisition:
    """Samples, edges and revolutions of the meter; `meter.Meter` adds the commands."""

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
        self._cap = Capture(self._ring, self._writer, self._write)   # raw capture (RAW 0x8B)
        # set by the first _apply_channels (Meter.__init__)
        self._channel_mask = (1 << self._channels_max) - 1
        self._rate_hz = 0.0
        self._requested_rate_hz = 0
        self._line_hz = DEFAULT_LINE_HZ
        self._line_inc = 0
        self._slots: list = []

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
    def _service_revolutions(self) -> None:
        """Edges into revolutions, completed revolutions into REV frames.  Allocates nothing."""
        self._process_edges()
        self._analyse_pending()
        tr = self._tracker
        if tr.have_edge and wrap_diff_q8(self._frames << 8, tr.last_q8) > _STALE_Q8:
            tr.restart()

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
                    wrap_frames(self._frames - ((i0 + n) & FRAME_MASK)) < 0
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
        if wrap_frames(self._frames - i0) > RING_FRAMES:
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

    def edges_lost(self) -> int:
        """Edges lost before the edge logic saw them: the board's queue and the meter's."""
        board = self._board_edges_lost() if self._board_edges_lost is not None else 0
        return (board + self._eq_overflow) & COUNTER_MASK
