"""Benchmark: how fast the host decodes the meter's stream, against what the meter can send.

Run:  .venv/bin/python tests/bench/bench_decoder.py

A three-channel REV frame (PROTOCOL.md) arrives once per revolution: 500 a second at the
firmware's 30,000 rpm limit.  This prints the frames decoded and parsed per second of CPU
(COBS + CRC-32 check + struct parse) for clean streams fed in USB-sized reads, and the ratio
to that worst-case arrival rate, so a slow host (a workshop Raspberry Pi) can be judged by
running it there.  Figures depend on the machine; nothing here is a pass/fail test.
"""

from __future__ import annotations

import struct
import time

from runtrue.protocol.frames import FrameDecoder, encode_frame
from runtrue.protocol.messages import REV, parse_message

WORST_CASE_FRAMES_PER_S = 30000 / 60  # one REV per revolution at the firmware's top speed


def rev_payload(rev: int, n_ch: int = 3) -> bytes:
    head = struct.pack("<IfHHBB", rev, 2000.0, 8, 0, n_ch, (1 << n_ch) - 1)
    body = b"".join(struct.pack("<5f", 0.1 * k, -0.05, 0.0, 0.0, 0.08) for k in range(1, n_ch + 1))
    return head + body


def stream(n_frames: int, n_ch: int) -> bytes:
    return b"".join(encode_frame(REV, i & 0xFFFF, rev_payload(i, n_ch)) for i in range(n_frames))


def measure(n_frames: int, n_ch: int, read_size: int) -> float:
    data = stream(n_frames, n_ch)
    decoder = FrameDecoder()
    parsed = 0
    t0 = time.process_time()
    for i in range(0, len(data), read_size):
        for frame in decoder.feed(data[i:i + read_size]):
            parse_message(frame)
            parsed += 1
    cpu = time.process_time() - t0
    assert parsed == n_frames and decoder.errors == 0 and decoder.lost_frames == 0
    return parsed / cpu


def main() -> int:
    print(f"{'channels':>8} {'read bytes':>10} {'frames/s CPU':>13} {'x worst case (500/s)':>21}")
    for n_ch in (1, 3):
        for read_size in (64, 512, 4096):
            rate = measure(20000, n_ch, read_size)
            print(f"{n_ch:8d} {read_size:10d} {rate:13.0f} {rate / WORST_CASE_FRAMES_PER_S:21.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
