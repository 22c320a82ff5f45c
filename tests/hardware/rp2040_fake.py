"""A fake RP2040 for the board module: a register file behind ``machine.mem32`` that records every
write, fake ``rp2.DMA`` channels that pack their control word as the datasheet lays it out, a
fake ``Pin``, ``uctypes`` and ``select``, and MicroPython's ``time.ticks_*``.

The board module imports ``machine``/``rp2`` at module level, so each test imports a fresh copy
with these fakes in ``sys.modules`` (fixture ``rig`` in conftest.py).

Field positions of DMA CH_CTRL_TRIG: Raspberry Pi Ltd, *RP2040 Datasheet*, section 2.5.7
(EN 0, HIGH_PRIORITY 1, DATA_SIZE 3:2, INCR_READ 4, INCR_WRITE 5, RING_SIZE 9:6, RING_SEL 10,
CHAIN_TO 14:11, TREQ_SEL 20:15, IRQ_QUIET 21).
"""

from __future__ import annotations

import sys
import types
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

ADC_BASE = 0x4004C000
ADC_CS = ADC_BASE + 0x00
ADC_FCS = ADC_BASE + 0x08
ADC_FIFO = ADC_BASE + 0x0C
ADC_DIV = ADC_BASE + 0x10
DMA_BASE = 0x50000000
DMA_CHAN_ABORT = DMA_BASE + 0x444
TICKS_PERIOD = 1 << 30  # MicroPython ticks wrap at 2**30 on the rp2 port (from memory)

RAM_ADDRESS_OF_RING = 0x20012346  # deliberately not aligned: the board must align the ring


class FakeMem32:
    """Register file: remembers writes in order; reads come from ``values`` with fixed read-only
    bits (ADC ready, FIFO empty) so the board's wait loops end."""

    def __init__(self) -> None:
        self.values: dict[int, int] = {}
        self.writes: list[tuple[int, int]] = []

    def __setitem__(self, addr: int, value: int) -> None:
        self.writes.append((addr, value & 0xFFFFFFFF))
        if addr == DMA_CHAN_ABORT:
            return  # abort completes at once
        if addr == ADC_FCS:  # OVER (bit 11) and UNDER (bit 10) are write-1-to-clear
            old = self.values.get(addr, 0)
            self.values[addr] = (value & ~0xC00 & 0xFFFFFFFF) | (old & 0xC00 & ~value)
            return
        self.values[addr] = value & 0xFFFFFFFF

    def __getitem__(self, addr: int) -> int:
        value = self.values.get(addr, 0)
        if addr == ADC_CS:
            value |= 1 << 8  # READY
        if addr == ADC_FCS:
            value |= 1 << 8  # EMPTY
        if value >= 1 << 31:  # MicroPython's mem32 returns a signed 32-bit value (from memory)
            value -= 1 << 32
        return value

    def writes_to(self, addr: int) -> list[int]:
        return [v for a, v in self.writes if a == addr]


class FakePin:
    IN = 0
    OUT = 1
    PULL_UP = 1
    IRQ_RISING = 8
    IRQ_FALLING = 4
    instances: dict[int, FakePin] = {}

    def __init__(self, gpio: int, mode: int = -1, pull: int = -1, *, value: int | None = None) -> None:
        self.gpio = gpio
        self.mode = mode
        self.pull = pull
        self.level = 1 if value is None else value
        self.handler: Callable[..., Any] | None = None
        self.trigger: int | None = None
        self.hard: bool | None = None
        FakePin.instances[gpio] = self

    def value(self, v: int | None = None) -> int:
        if v is not None:
            self.level = v
        return self.level

    def irq(self, handler: Callable[..., Any] | None = None, trigger: int = 0, hard: bool = False) -> None:
        self.handler, self.trigger, self.hard = handler, trigger, hard


@dataclass
class FakeDMA:
    channel: int
    mem: FakeMem32
    configs: list[dict[str, Any]] = field(default_factory=list)

    def pack_ctrl(self, *, enable: bool = True, high_pri: bool = False, size: int = 2, inc_read: bool = True,
                  inc_write: bool = True, ring_size: int = 0, ring_sel: bool = False, chain_to: int | None = None,
                  treq_sel: int = 0x3F, irq_quiet: bool = True, bswap: bool = False, sniff_en: bool = False) -> int:
        chain = self.channel if chain_to is None else chain_to
        return (int(enable) | int(high_pri) << 1 | (size & 3) << 2 | int(inc_read) << 4 | int(inc_write) << 5
                | (ring_size & 0xF) << 6 | int(ring_sel) << 10 | (chain & 0xF) << 11 | (treq_sel & 0x3F) << 15
                | int(irq_quiet) << 21 | int(bswap) << 22 | int(sniff_en) << 23)

    def config(self, *, read: Any = None, write: Any = None, count: int | None = None, ctrl: int | None = None,
               trigger: bool = False) -> None:
        self.configs.append(dict(read=read, write=write, count=count, ctrl=ctrl, trigger=trigger))
        if count is not None:
            self.mem.values[DMA_BASE + 0x40 * self.channel + 0x08] = count


@dataclass
class FakeClock:
    now_us: int = 0

    def ticks_us(self) -> int:
        return self.now_us % TICKS_PERIOD

    def ticks_ms(self) -> int:
        return (self.now_us // 1000) % TICKS_PERIOD

    @staticmethod
    def ticks_diff(a: int, b: int) -> int:
        d = (a - b) % TICKS_PERIOD
        return d - TICKS_PERIOD if d >= TICKS_PERIOD // 2 else d

    @staticmethod
    def ticks_add(a: int, b: int) -> int:
        return (a + b) % TICKS_PERIOD

    def sleep_ms(self, ms: int) -> None:
        self.now_us += 1000 * ms


class FakeHost:
    """USB serial: bytes the host sent (stdin) and bytes the board wrote (stdout)."""

    def __init__(self) -> None:
        self.to_board = bytearray()
        self.from_board = bytearray()
        host = self

        class _In:
            def read(self, n: int) -> bytes:
                out = bytes(host.to_board[:n])
                del host.to_board[:n]
                return out

            def readinto(self, buf: bytearray) -> int:
                n = min(len(buf), len(host.to_board))
                buf[:n] = host.to_board[:n]
                del host.to_board[:n]
                return n

        class _Out:
            def write(self, data: bytes, max_len: int | None = None) -> int:
                # MicroPython's stream write(buf, max_len) sends at most max_len bytes of buf
                n = len(data) if max_len is None else min(max_len, len(data))
                host.from_board += bytes(data[:n])
                return n

        self.stdin = types.SimpleNamespace(buffer=_In())
        self.stdout = types.SimpleNamespace(buffer=_Out())

    def poll_module(self) -> types.ModuleType:
        host = self
        mod = types.ModuleType("select")
        mod.POLLIN = 1  # type: ignore[attr-defined]

        class _Poll:
            def register(self, obj: Any, mask: int = 1) -> None:
                pass

            def poll(self, timeout: int = -1) -> list[tuple[Any, int]]:
                return [(host.stdin, 1)] if host.to_board else []

            def ipoll(self, timeout: int = -1) -> Any:
                return iter(self.poll(timeout))

        mod.poll = _Poll  # type: ignore[attr-defined]
        return mod


class RecordingMeter:
    """Stands in for runtrue_fw.meter.Meter: records what the board feeds it."""

    def __init__(self, n_ch: int = 1) -> None:
        self.n_ch = n_ch
        self.samples: list[int] = []
        self.frames = 0
        self.edges: list[int] = []
        self.commands = bytearray()
        self.dropped_frames: list[tuple[int, int]] = []

    def feed_samples(self, block: Any, n_frames: int) -> None:
        self.frames += n_frames
        self.samples.extend(block[i] for i in range(n_frames * self.n_ch))

    def feed_edge(self, pos_q8: int) -> None:
        self.edges.append(pos_q8)

    def feed_command_bytes(self, data: bytes) -> None:
        self.commands += data

    def mark_dropped(self, first_frame: int, end_frame: int) -> None:
        self.dropped_frames.append((first_frame, end_frame))

    def service(self) -> None:
        pass


@dataclass
class Rig:
    module: types.ModuleType
    mem: FakeMem32
    clock: FakeClock
    host: FakeHost
    dmas: list[FakeDMA]
    kbd_intr: list[int]
    monkeypatch: Any

    def board(self) -> Any:
        # pytest's output capture replaces sys.stdout at each test phase: patch it here.
        self.monkeypatch.setattr(sys, "stdin", self.host.stdin)
        self.monkeypatch.setattr(sys, "stdout", self.host.stdout)
        return self.module.Board()


