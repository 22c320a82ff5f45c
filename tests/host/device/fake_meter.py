"""A fake meter speaking protocol version 2, for the device and transport tests.

``FakeMeter`` answers commands exactly as firmware/PROTOCOL.md says and, while streaming, makes
one REV frame per :meth:`tick`: the integer sums (basis of runtrue_fw.basis) of a revolution
with a fixed 1x vector plus a little deterministic scatter, taken without quantisation so the
host's fit gives that vector back to ~1e-7 g.
``FakeMeterTransport`` puts it behind the Transport contract in memory; ``PtyMeter`` serves it
on a pseudo-terminal from a thread, behind a fixed symlink (like /dev/serial/by-id), and can
be "unplugged" and "plugged back in".
"""

from __future__ import annotations

import json
import math
import os
import select
import struct
import threading
import time
from pathlib import Path

from runtrue.device.revfit import basis_q14
from runtrue.protocol.commands import (
    CMD_IDENTIFY,
    CMD_SELFTEST,
    CMD_SET_CHANNELS,
    CMD_SET_EDGE,
    CMD_SET_RATE,
    CMD_START,
    CMD_STATUS,
    CMD_STOP,
)
from runtrue.protocol.frames import FrameDecoder, encode_frame
from runtrue.protocol.messages import RevStats, rev_payload
from runtrue.transport.base import Transport, TransportLost
from runtrue_fw import basis

TRUE_1X = [complex(0.12, -0.05), complex(-0.02, 0.07), complex(0.0, 0.01)]  # g, per channel
PERIOD_US = 20_000.0  # 3,000 rpm
COUNTS_PER_G = 400.0


class FakeMeter:
    def __init__(self, *, silent: bool = False, serial: str = "FAKE0001") -> None:
        self.silent = silent  # a board without the runtrue firmware: never answers
        self.serial = serial
        self.seq = 0
        self.rate_hz = 4000
        self.mask = 0b001
        self.edge = "rising"
        self.streaming = False
        self.rev = 0
        self.commands: list[int] = []
        self._decoder = FrameDecoder()
        self._out = bytearray()

    def _send(self, frame_type: int, payload: bytes = b"") -> None:
        self._out += encode_frame(frame_type, self.seq, payload)
        self.seq = (self.seq + 1) & 0xFFFF

    def _info(self) -> None:
        info = {"fw": "fake-1", "board": "fake", "proto": 2, "channel_mask": self.mask,
                "rate_hz": float(self.rate_hz), "counts_per_g": [COUNTS_PER_G] * 3,
                "edge": self.edge, "serial": self.serial,
                "basis": basis.BASIS_ID, "line_inc": 0, "adc_offset": 2048}
        self._send(0x01, json.dumps(info, separators=(",", ":")).encode())  # INFO must fit in 240 bytes

    def _ack(self, seq: int, cmd: int, result: int = 0, message: str = "") -> None:
        self._send(0x04, struct.pack("<HBB", seq, cmd, result) + message.encode())

    def receive(self, data: bytes) -> None:
        if self.silent:
            return
        for frame in self._decoder.feed(data):
            self.commands.append(frame.type)
            cmd, seq, p = frame.type, frame.seq, frame.payload
            if cmd == CMD_IDENTIFY:
                self._info()
                self._ack(seq, cmd)
            elif cmd == CMD_START:
                self._ack(seq, cmd)
                self.streaming = True
                self.rev = 0
            elif cmd == CMD_STOP:
                self.streaming = False
                self._ack(seq, cmd)
            elif cmd == CMD_SET_RATE:
                (rate,) = struct.unpack("<I", p)
                if not 500 <= rate <= 10_000:
                    self._ack(seq, cmd, 1, f"rate {rate} Hz outside 500-10000")
                else:
                    self.rate_hz = rate
                    self._ack(seq, cmd)
                    self._info()
            elif cmd == CMD_SET_CHANNELS:
                self.mask = p[0]
                self._ack(seq, cmd)
                self._info()
            elif cmd == CMD_SET_EDGE:
                self.edge = "falling" if p[0] else "rising"
                self._ack(seq, cmd)
                self._info()
            elif cmd == CMD_SELFTEST:
                self._send(0x05, json.dumps({"pass": True, "checks": [{"name": "adc", "pass": True, "value": 2048, "unit": "counts", "note": ""}]}).encode())
                self._ack(seq, cmd)
            elif cmd == CMD_STATUS:
                self._send(0x03, struct.pack("<IHIIIIIB", 1234, 250, 0, 0, 0, self.rev, 0, int(self.streaming)))
                self._ack(seq, cmd)
            else:
                self._ack(seq, cmd, 2)

    def tick(self) -> None:
        """One revolution's worth of time."""
        if not self.streaming:
            return
        chans = [ch for ch in range(3) if self.mask >> ch & 1]
        flags = 0x20 if self.rev == 0 else 0
        length_q8 = round(PERIOD_US * 1e-6 * self.rate_hz * 256)
        n = (length_q8 - 1) // 256 + 1
        b = basis_q14(n, 0, length_q8, 0).astype(float)
        sums = []
        for ch in chans:
            wobble = 0.002 * complex(math.cos(self.rev * 2.1 + ch), math.sin(self.rev * 1.3 + ch))
            h1 = (TRUE_1X[ch] + wobble) * COUNTS_PER_G
            y = (h1.real * b[:, 1] + h1.imag * b[:, 2]) / 16384.0  # |h1| cos(phi - lag), in counts
            s = [round(float(y.sum()))] + [round(float(v)) for v in y @ b[:, 1:]] + [round(float(y @ y))]
            sums.append(tuple(s))
        self._send(0x02, rev_payload(RevStats(self.rev, length_q8, n, flags, self.mask, 0, tuple(sums))))
        self.rev += 1

    def take_output(self) -> bytes:
        out = bytes(self._out)
        self._out.clear()
        return out


class FakeMeterTransport(Transport):
    """The fake meter in memory; each read is one revolution's time."""

    def __init__(self, meter: FakeMeter | None = None) -> None:
        self.meter = meter or FakeMeter()
        self.name = "fake"
        self.gone = False
        self.closed = False

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        if self.gone:
            raise TransportLost("fake meter unplugged")
        self.meter.tick()
        return self.meter.take_output()

    def write(self, data: bytes) -> None:
        if self.gone:
            raise TransportLost("fake meter unplugged")
        self.meter.receive(data)

    def close(self) -> None:
        self.closed = True


class PtyMeter:
    """A fake meter on a pty behind ``link`` (a symlink), served by a thread."""

    def __init__(self, link: Path, interval_s: float = 0.005) -> None:
        self.link = link
        self.interval_s = interval_s
        self.meter = FakeMeter()
        self._master: int | None = None
        self._slave: int | None = None
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self.plug_in()

    def plug_in(self) -> None:
        """(Re)appear: a fresh pty, a restarted meter, the symlink pointing at it."""
        self.meter = FakeMeter()
        master, slave = os.openpty()
        name = os.ttyname(slave)
        tmp = self.link.with_suffix(".new")
        if tmp.is_symlink():
            tmp.unlink()
        tmp.symlink_to(name)
        os.replace(tmp, self.link)
        self._master, self._slave = master, slave
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._serve, args=(master, self.meter, self._stop), daemon=True)
        self._thread.start()

    def unplug(self) -> None:
        """Disappear: the pty's master side closes and the symlink goes away."""
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout=2)
        if self.link.is_symlink():
            self.link.unlink()
        for fd in (self._master, self._slave):
            if fd is not None:
                os.close(fd)
        self._master = self._slave = None

    def _serve(self, master: int, meter: FakeMeter, stop: threading.Event) -> None:
        next_tick = time.monotonic()
        while not stop.is_set():
            ready, _, _ = select.select([master], [], [], self.interval_s)
            if ready:
                try:
                    meter.receive(os.read(master, 4096))
                except OSError:
                    pass
            if time.monotonic() >= next_tick:
                meter.tick()
                next_tick += self.interval_s
            out = meter.take_output()
            if out:
                try:
                    os.write(master, out)
                except OSError:
                    pass

    def close(self) -> None:
        self.unplug()
