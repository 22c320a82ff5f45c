"""Benchmark: how fast the host decodes the meter's stream, against what the meter can send.

Run:  .venv/bin/python tests/bench/bench_decoder.py

A three-channel REV frame (PROTOCOL.md, version 2: integer sums) arrives once per revolution:
167 a second at the envelope's 10,000 rpm (firmware/runtrue_fw/envelope.py).  This prints the
frames decoded and parsed per second of CPU (COBS + CRC-32 check + struct parse), and the same
with the host's fit (runtrue.device.revfit, numpy) that turns each into phasors, for clean
streams fed in USB-sized reads, and the ratio to that worst-case arrival rate, so a slow host (a workshop Raspberry Pi) can be judged by
running it there.  Figures depend on the machine; nothing here is a pass/fail test.
"""

from __future__ import annotations

import time

from runtrue.device import revfit
from runtrue.protocol.frames import FrameDecoder, encode_frame
from runtrue.protocol.messages import REV, RevStats, parse_message
from runtrue.protocol.messages import rev_payload as encode_rev
from runtrue_fw import basis, envelope

WORST_CASE_FRAMES_PER_S = envelope.MAX_RPM / 60  # one REV per revolution at the envelope's top speed
SETTINGS = revfit.FitSettings(4000.0, (409.6,) * 3, 2048, basis.line_increment(50.0, 4000.0), True)


def rev_payload(rev: int, n_ch: int = 3) -> bytes:
    sums = tuple(tuple(1000 * k + j for j in range(14)) for k in range(1, n_ch + 1))
    return encode_rev(RevStats(rev, 24 * 256 + 77, 24, 0, (1 << n_ch) - 1, 100, sums))


def stream(n_frames: int, n_ch: int) -> bytes:
    return b"".join(encode_frame(REV, i & 0xFFFF, rev_payload(i, n_ch)) for i in range(n_frames))


def measure(n_frames: int, n_ch: int, read_size: int, fit: bool = False) -> float:
    data = stream(n_frames, n_ch)
    decoder = FrameDecoder()
    parsed = 0
    t0 = time.process_time()
    for i in range(0, len(data), read_size):
        for frame in decoder.feed(data[i:i + read_size]):
            msg = parse_message(frame)
            if fit:
                revfit.revolution(msg, SETTINGS)  # type: ignore[arg-type]
            parsed += 1
    cpu = time.process_time() - t0
    assert parsed == n_frames and decoder.errors == 0 and decoder.lost_frames == 0
    return parsed / cpu


def main() -> int:
    print(f"{'channels':>8} {'read bytes':>10} {'frames/s CPU':>13} {'with fit':>9} "
          f"{'x worst case (' + str(round(WORST_CASE_FRAMES_PER_S)) + '/s), with fit':>30}")
    for n_ch in (1, 3):
        for read_size in (64, 512, 4096):
            rate = measure(20000, n_ch, read_size)
            rate_fit = measure(3000, n_ch, read_size, fit=True)
            print(f"{n_ch:8d} {read_size:10d} {rate:13.0f} {rate_fit:9.0f} {rate_fit / WORST_CASE_FRAMES_PER_S:30.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
