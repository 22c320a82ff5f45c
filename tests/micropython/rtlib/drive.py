"""Drive the real Meter with a FakeBoard and a synthetic Shaft; decode what it sends.

Runs under CPython and MicroPython (the same scenario gives the same revolutions in both).
"""

import struct

from rtlib.fakeboard import FakeBoard, Shaft
from runtrue_fw import frames as fr
from runtrue_fw.meter import Meter


class Host:
    """The host side of the link, just enough for tests."""

    def __init__(self, meter, hw):
        self.meter = meter
        self.hw = hw
        self.writer = fr.FrameWriter()

    def command(self, ctype, payload=b""):
        seq = self.writer.seq
        n = self.writer.encode(ctype, payload)
        self.meter.feed_command_bytes(bytes(self.writer.wire[:n]))
        return seq

    def wire(self, ctype, payload=b""):
        """The wire bytes of a command frame (numbered like `command`), not sent."""
        n = self.writer.encode(ctype, payload)
        return bytes(self.writer.wire[:n])

    def frames(self):
        """Decoded (type, seq, payload) of everything the meter wrote since the last call."""
        out = []
        for chunk in self.hw.take_output().split(b"\x00")[:-1]:
            _, t, seq, p = fr.decode_frame(chunk + b"\x00")
            out.append((t, seq, p))
        return out


def int40(p, o):
    hi = p[o + 3] | (p[o + 4] << 8)
    if hi >= 32768:
        hi -= 65536
    return hi * 16777216 + (p[o] | (p[o + 1] << 8) | (p[o + 2] << 16))


def parse_rev(p):
    rev, length_q8, n, flags, nch, mask, first_off_q8, n_sums = struct.unpack_from(
        fr.REV_HEADER_FMT, p)
    sums = []
    for k in range(nch):
        sums.append([int40(p, 16 + 70 * k + 5 * j) for j in range(n_sums)])
    return {"rev": rev, "length_q8": length_q8, "n_samples": n, "flags": flags,
            "channel_mask": mask, "first_off_q8": first_off_q8, "sums": sums}


def revs_of(frames):
    return [parse_rev(p) for t, _, p in frames if t == fr.T_REV]


def stream(meter, hw, shaft, n_frames, block=64, slots=None, edges=None, edges_late=0,
           drop_at=None, ms_per_block=0):
    """Feed n_frames of the shaft's signal in blocks, its edges (or `edges`) as they fall.

    edges_late: feed each edge this many blocks after its block (0: before the block's samples).
    drop_at: frame index at which the board reports one dropped sample.
    """
    full = (1 << hw.adc_bits) - 1
    if edges is None:
        edges = shaft.edges_q8(n_frames)
    ei = 0
    f = 0
    queue = []
    while f < n_frames:
        n = block if f + block <= n_frames else n_frames - f
        while ei < len(edges) and edges[ei] < (f + n) * 256:
            queue.append((f // block + edges_late, edges[ei]))
            ei += 1
        while queue and queue[0][0] <= f // block:
            meter.feed_edge(queue.pop(0)[1])
        if drop_at is not None and f <= drop_at < f + n:
            hw.dropped += 1
        meter.feed_samples(shaft.block(f, n, hw.counts_per_g, hw.zero_code, full, slots), n)
        hw.ms += ms_per_block
        meter.service()
        f += n
    for _, e in queue:
        meter.feed_edge(e)
    meter.service()


def feed_blocks(meter, hw, blocks, edges, first, last, block=64, ms_per_block=16):
    """Feed prepared blocks[first:last] (each `block` frames) and the edges that fall in them,
    one service pass a block.  Allocates nothing itself, so tests can hold heap_lock() across it."""
    k = 0
    while k < len(edges) and edges[k] < first * block * 256:
        k += 1
    b = first
    while b < last:
        while k < len(edges) and edges[k] < (b + 1) * block * 256:
            meter.feed_edge(edges[k])
            k += 1
        meter.feed_samples(blocks[b], block)
        meter.service()
        hw.ms += ms_per_block
        b += 1


def run_with_overrun(nch, drop_first, drop_len, samples_per_rev, n_frames=3000, block=50):
    """A started `nch`-channel meter fed `n_frames` of a shaft turning once in `samples_per_rev`
    frames, the board reporting frames [drop_first, drop_first + drop_len) lost.  Returns
    (revolutions, edges)."""
    hw = FakeBoard(channels_max=nch)
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_START)
    host.frames()
    sh = Shaft(4000, 4000 * 60 / samples_per_rev, [(0.5, 30.0, 0.0, 0.0, 0.0)] * nch, t0_samples=0.375)
    edges = sh.edges_q8(n_frames)
    k = 0
    f = 0
    while f < n_frames:
        while k < len(edges) and edges[k] < (f + block) * 256:
            m.feed_edge(edges[k])
            k += 1
        m.feed_samples(sh.block(f, block, hw.counts_per_g, hw.zero_code), block)
        # the board lost frames [drop_first, drop_first + drop_len) inside this block: it says so
        lo = drop_first if drop_first > f else f
        hi = drop_first + drop_len if drop_first + drop_len < f + block else f + block
        if lo < hi:
            m.mark_dropped(lo, hi)
        m.service()
        f += block
    m.service()
    return revs_of(host.frames()), edges


def scenario(rate_hz=4000, rpm=2466.42, channels=None, n_frames=1200, round_robin=False,
             noise_codes=0.0, block=64, adc_bits=12, counts_per_g=400.0, with_meter=False):
    """A started meter fed with a shaft; returns the revolutions it reported (and the meter
    with `with_meter`)."""
    if channels is None:
        channels = [(0.5, 30.0, 0.1, 200.0, 0.2), (0.25, 300.0, 0.05, 10.0, -0.1),
                    (1.0, 181.0, 0.0, 0.0, 0.0)]
    nch = len(channels)
    zero = float(1 << (adc_bits - 1))
    hw = FakeBoard(channels_max=nch, adc_bits=adc_bits, counts_per_g=[counts_per_g] * nch,
                   zero_code=[zero] * nch, round_robin=round_robin)
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_SET_RATE, struct.pack("<I", rate_hz))
    host.command(fr.C_START)
    host.frames()
    sh = Shaft(rate_hz, rpm, channels, t0_samples=0.375, round_robin=round_robin,
               noise_codes=noise_codes)
    stream(m, hw, sh, n_frames, block=block)
    revs = revs_of(host.frames())
    return (revs, m) if with_meter else revs


def raw_of(frames):
    """The RAW parts in `frames` put together: {"begin": {...}, "codes": [..interleaved..],
    "edges_q8": [...], "status": int or None, "per_pass": []} (CPython and MicroPython)."""
    from runtrue_fw import capture as cap
    out = {"begin": None, "codes": [], "edges_q8": [], "status": None, "indices": []}
    for t, _, p in frames:
        if t != cap.T_RAW:
            continue
        cap_id, kind, index, count = struct.unpack_from(cap.RAW_HEAD_FMT, p)
        data = p[cap.RAW_HEAD_LEN:]
        if kind == cap.K_BEGIN:
            s, n, nch, mask, ne = struct.unpack(cap.BEGIN_FMT, data)
            out["begin"] = {"cap_id": cap_id, "start_frame": s, "n_frames": n, "n_ch": nch,
                            "channel_mask": mask, "n_edges": ne}
        elif kind == cap.K_SAMPLES:
            out["indices"].append(index)
            out["codes"].extend(struct.unpack("<%dH" % (len(data) // 2), data))
        elif kind == cap.K_EDGES:
            out["edges_q8"].extend(struct.unpack("<%di" % count, data))
        else:
            out["status"] = data[0]
    return out


def capture_scenario(channels=None, rate_hz=4000, rpm=2466.24, n_capture=1000, request_at=640,
                     n_frames=4000, block=64, stop_at=None):
    """A started meter fed with a shaft, asked for a raw capture of `n_capture` frames when
    `request_at` frames have been fed (and STOP at `stop_at`).  Returns (raw_of(frames), revs,
    the RAW frames written by each service pass, the ACK of RAW, the shaft's codes and edges)."""
    from runtrue_fw import capture as cap
    if channels is None:
        channels = [(0.5, 30.0, 0.1, 200.0, 0.2)]
    nch = len(channels)
    hw = FakeBoard(channels_max=nch)
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_SET_RATE, struct.pack("<I", rate_hz))
    host.command(fr.C_START)
    host.frames()
    sh = Shaft(rate_hz, rpm, channels, t0_samples=0.375)
    edges = sh.edges_q8(n_frames)
    frames = []
    per_pass = []
    ack = None
    ei = 0
    f = 0
    while f < n_frames:
        if f == request_at:
            host.command(cap.C_RAW, struct.pack("<H", n_capture))
            got = host.frames()
            for t, _s, p in got:
                if t == fr.T_ACK:
                    ack = (p[3], p[4:].decode())
            frames.extend(got)
        if stop_at is not None and f == stop_at:
            host.command(fr.C_STOP)
        n = block
        while ei < len(edges) and edges[ei] < (f + n) * 256:
            m.feed_edge(edges[ei])
            ei += 1
        m.feed_samples(sh.block(f, n, hw.counts_per_g, hw.zero_code), n)
        hw.ms += 16
        m.service()
        got = host.frames()
        per_pass.append(len([1 for t, _, _ in got if t == cap.T_RAW]))
        frames.extend(got)
        f += n
    return raw_of(frames), revs_of(frames), per_pass, ack, sh, edges
