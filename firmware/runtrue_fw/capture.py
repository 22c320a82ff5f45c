"""Raw capture: a block of raw samples and the reference edges on the same timebase (RAW 0x8B).

Implements the RAW command and frames of firmware/PROTOCOL.md ("Raw capture").  A capture takes
the next `n_frames` sample frames the meter stores in its ring (the enabled channels), waits a
few frames more for late edges, then sends, a bounded number of frames per `service()` pass so
that revolutions keep flowing: BEGIN, the accepted reference edges around the block, the samples
(ADC codes, interleaved as the board delivers them), END.  The samples are copied straight from
the ring into the frame writer's body by `copy_frames` (viper on the board, the portable loop
below elsewhere): no allocation per frame.  If the ring overwrites a frame before it was sent
(the host stopped reading, or the block was larger than the ring allows) the capture ends with
END status OVERWRITTEN and the host discards it.

The meter calls: `note_edge(pos_q8)` for every accepted edge, `request(...)` for the command,
`service(frames_now, running)` from its service pass.  Nothing here touches hardware.
"""

import struct

from runtrue_fw import frames as fr
from runtrue_fw.buffers import RING_FRAMES
from runtrue_fw.buffers import zeros as _zeros
from runtrue_fw.edges import wrap_diff_q8

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

T_RAW = const(0x07)
C_RAW = const(0x8B)

K_BEGIN = const(0)
K_SAMPLES = const(1)
K_EDGES = const(2)
K_END = const(3)

END_OK = const(0)
END_OVERWRITTEN = const(1)
END_STOPPED = const(2)

RAW_HEAD_FMT = "<BBHB"          # cap_id, kind, index, count
RAW_HEAD_LEN = const(5)
BEGIN_FMT = "<IHBBH"            # start_frame, n_frames, n_ch, channel_mask, n_edges
RAW_DATA_MAX = const(235)       # 240 - RAW_HEAD_LEN
EDGES_PER_FRAME = const(58)     # i32 each: 232 bytes
MIN_FRAMES = const(16)
MAX_FRAMES = const(4096)        # half the ring: a full second at 4 kHz to send it out
FRAMES_PER_PASS = const(2)      # RAW frames written per service() pass at most
SETTLE_FRAMES = const(64)       # frames waited after the block for its last edges
EDGE_HISTORY = const(256)       # accepted edges remembered (a power of two)
_EH_MASK = const(255)
_EDGE_SEND_MAX = const(224)     # edges sent at most: the history keeps filling while we send
_FRAME_MASK = const(0x3FFFFF)   # as meter.FRAME_MASK
_FRAME_HALF = const(0x200000)
_RING_MASK = const(8191)        # RING_FRAMES - 1

_IDLE = const(0)
_WAIT = const(1)
_SEND_EDGES = const(2)
_SEND_SAMPLES = const(3)
_SEND_END = const(4)

def copy_frames_portable(ring, body, p):
    """p = [n, n_ch, first ring position, slot size, body offset]: n frames of the ring's
    per-channel slots into body as interleaved u16 little-endian.  Allocates nothing."""
    n = p[0]
    nch = p[1]
    w = p[2]
    size = p[3]
    o = p[4]
    mask = size - 1
    i = 0
    while i < n:
        pos = (w + i) & mask
        c = 0
        while c < nch:
            v = ring[c * size + pos]
            body[o] = v & 255
            body[o + 1] = v >> 8
            o += 2
            c += 1
        i += 1


try:
    from runtrue_fw.capture_viper import copy_frames
    COPY = "viper"
except (SyntaxError, ImportError, AttributeError):   # CPython, or a port without viper
    copy_frames = copy_frames_portable
    COPY = "portable"


def _wrap_frames(d: int) -> int:
    d &= _FRAME_MASK
    if d >= _FRAME_HALF:
        d = d - _FRAME_MASK - 1
    return d


def frames_per_chunk(n_ch: int) -> int:
    """Sample frames in one RAW SAMPLES frame: 117, 58 or 39 for 1, 2 or 3 channels."""
    return RAW_DATA_MAX // (2 * n_ch)


class Capture:
    """One raw capture at a time, sent in bounded steps (see the module docstring)."""

    def __init__(self, ring, writer, write) -> None:
        self._ring = ring
        self._writer = writer
        self._write = write            # the meter's bound _write(n), kept once (no allocation later)
        self._hist = _zeros("i", EDGE_HISTORY)
        self._h_n = 0                  # edges noted, modulo 2**30
        self._last_edge = -1
        self._p = _zeros("i", 5)
        self.state = _IDLE
        self.cap_id = 0
        self._start = 0
        self._n = 0
        self._nch = 1
        self._mask = 1
        self._e_first = 0              # history counter of the first edge sent
        self._e_n = 0
        self._idx = 0
        self._status = END_OK

    def note_edge(self, pos_q8: int) -> None:
        """An accepted reference edge (1/256 sample since START).  Allocates nothing."""
        if pos_q8 == self._last_edge:
            return
        self._last_edge = pos_q8
        self._hist[self._h_n & _EH_MASK] = pos_q8
        self._h_n = (self._h_n + 1) & 0x3FFFFFFF

    def restart(self) -> None:
        """START: the timebase begins again; old edges mean nothing."""
        self._h_n = 0
        self._last_edge = -1

    def request(self, payload, frames_now: int, streaming: bool, n_ch: int, mask: int):
        """The RAW command: (ACK result, message)."""
        if len(payload) != 2:
            return fr.ACK_BAD_ARGUMENT, "RAW needs n_frames:u16"
        n = payload[0] | (payload[1] << 8)
        if n < MIN_FRAMES or n > MAX_FRAMES:
            return fr.ACK_BAD_ARGUMENT, "RAW n_frames %d outside %d-%d" % (n, MIN_FRAMES, MAX_FRAMES)
        if not streaming:
            return fr.ACK_BUSY, "START first: a capture takes samples while streaming"
        if self.state != _IDLE:
            return fr.ACK_BUSY, "a capture is being sent"
        self.cap_id = (self.cap_id + 1) & 255
        self._start = frames_now & _FRAME_MASK
        self._n = n
        self._nch = n_ch
        self._mask = mask
        self._status = END_OK
        self.state = _WAIT
        return fr.ACK_OK, ""

    def _select_edges(self) -> None:
        """The remembered edges from one block length before the block to its settle end."""
        start_q8 = self._start << 8
        span = self._n << 8
        top = span + (SETTLE_FRAMES << 8)
        total = self._h_n
        have = total if total < EDGE_HISTORY else EDGE_HISTORY
        first = total
        count = 0
        k = 1
        while k <= have and count < _EDGE_SEND_MAX:
            pos = self._hist[(total - k) & _EH_MASK]
            rel = wrap_diff_q8(pos, start_q8)
            if rel < -span:
                break
            if rel < top:
                first = total - k
                count += 1
            k += 1
        self._e_first = first
        self._e_n = count

    def _head(self, kind: int, index: int, count: int) -> None:
        struct.pack_into(RAW_HEAD_FMT, self._writer.body, fr.PAYLOAD_AT, self.cap_id, kind, index, count)

    def service(self, frames_now: int, running: bool) -> None:
        """Write up to FRAMES_PER_PASS RAW frames.  Allocates nothing."""
        st = self.state
        if st == _IDLE:
            return
        if not running and st != _SEND_END:
            self._status = END_STOPPED
            self.state = _SEND_END
            st = _SEND_END
        if st == _WAIT:
            if _wrap_frames(frames_now - self._start - self._n - SETTLE_FRAMES) < 0:
                return
            self._select_edges()
            self._head(K_BEGIN, 0, 0)
            struct.pack_into(BEGIN_FMT, self._writer.body, fr.PAYLOAD_AT + RAW_HEAD_LEN,
                             self._start, self._n, self._nch, self._mask, self._e_n)
            self._write(self._writer.finish(T_RAW, RAW_HEAD_LEN + 10))
            self._idx = 0
            self.state = _SEND_EDGES
            return
        sent = 0
        body = self._writer.body
        while sent < FRAMES_PER_PASS:
            st = self.state
            if st == _SEND_EDGES:
                left = self._e_n - self._idx
                if left <= 0:
                    self._idx = 0
                    self.state = _SEND_SAMPLES
                    continue
                cnt = left if left < EDGES_PER_FRAME else EDGES_PER_FRAME
                self._head(K_EDGES, self._idx, cnt)
                start_q8 = self._start << 8
                o = fr.PAYLOAD_AT + RAW_HEAD_LEN
                j = 0
                while j < cnt:
                    pos = self._hist[(self._e_first + self._idx + j) & _EH_MASK]
                    struct.pack_into("<i", body, o, wrap_diff_q8(pos, start_q8))
                    o += 4
                    j += 1
                self._write(self._writer.finish(T_RAW, RAW_HEAD_LEN + 4 * cnt))
                self._idx += cnt
            elif st == _SEND_SAMPLES:
                left = self._n - self._idx
                if left <= 0:
                    self.state = _SEND_END
                    continue
                first = (self._start + self._idx) & _FRAME_MASK
                if _wrap_frames(frames_now - first) >= RING_FRAMES:
                    self._status = END_OVERWRITTEN
                    self.state = _SEND_END
                    continue
                per = frames_per_chunk(self._nch)
                cnt = left if left < per else per
                self._head(K_SAMPLES, self._idx, cnt)
                p = self._p
                p[0] = cnt
                p[1] = self._nch
                p[2] = first & _RING_MASK
                p[3] = RING_FRAMES
                p[4] = fr.PAYLOAD_AT + RAW_HEAD_LEN
                copy_frames(self._ring, body, p)  # type: ignore[arg-type]  # viper ptr args
                self._write(self._writer.finish(T_RAW, RAW_HEAD_LEN + 2 * cnt * self._nch))
                self._idx += cnt
            else:
                self._head(K_END, 0, 0)
                body[fr.PAYLOAD_AT + RAW_HEAD_LEN] = self._status
                self._write(self._writer.finish(T_RAW, RAW_HEAD_LEN + 1))
                self.state = _IDLE
                return
            sent += 1
