"""Fixture ``rig``: a fresh import of the board module on the fake RP2040 of rp2040_fake.py."""

from __future__ import annotations

import importlib
import sys
import time
import types
from collections.abc import Iterator

import pytest
from rp2040_fake import (
    RAM_ADDRESS_OF_RING,
    TICKS_PERIOD,
    FakeClock,
    FakeDMA,
    FakeHost,
    FakeMem32,
    FakePin,
    Rig,
)


@pytest.fixture
def rig(monkeypatch: pytest.MonkeyPatch) -> Iterator[Rig]:
    mem = FakeMem32()
    clock = FakeClock(now_us=TICKS_PERIOD - 5_000)  # start just before the ticks wrap
    host = FakeHost()
    dmas: list[FakeDMA] = []
    kbd: list[int] = []

    machine = types.ModuleType("machine")
    machine.mem32 = mem  # type: ignore[attr-defined]
    machine.Pin = FakePin  # type: ignore[attr-defined]
    machine.ADC = lambda pin: ("adc", pin.gpio)  # type: ignore[attr-defined]
    machine.disable_irq = lambda: 7  # type: ignore[attr-defined]
    machine.enable_irq = lambda state: None  # type: ignore[attr-defined]
    machine.unique_id = lambda: bytes([0xE6, 0x60, 0x58, 0x38, 0x83, 0x1F, 0x2A, 0x2B])  # type: ignore[attr-defined]

    def new_dma() -> FakeDMA:
        d = FakeDMA(channel=len(dmas) + 2, mem=mem)  # channels 0-1 taken by someone else
        dmas.append(d)
        return d

    rp2 = types.ModuleType("rp2")
    rp2.DMA = new_dma  # type: ignore[attr-defined]
    micropython = types.ModuleType("micropython")
    micropython.const = lambda x: x  # type: ignore[attr-defined]
    micropython.kbd_intr = kbd.append  # type: ignore[attr-defined]

    def no_emitters(name: str) -> None:  # like the WebAssembly port: no viper/native code here
        if name in ("viper", "native"):
            raise ImportError(f"fake micropython has no {name}")
        raise AttributeError(name)

    micropython.__getattr__ = no_emitters  # type: ignore[attr-defined]
    uctypes = types.ModuleType("uctypes")
    uctypes.addressof = lambda obj: RAM_ADDRESS_OF_RING  # type: ignore[attr-defined]

    for name, mod in (("machine", machine), ("rp2", rp2), ("micropython", micropython), ("uctypes", uctypes),
                      ("select", host.poll_module())):
        monkeypatch.setitem(sys.modules, name, mod)
    for name in ("ticks_us", "ticks_ms", "ticks_diff", "ticks_add", "sleep_ms"):
        monkeypatch.setattr(time, name, getattr(clock, name), raising=False)
    monkeypatch.delitem(sys.modules, "runtrue_fw.board_rp2040", raising=False)
    FakePin.instances = {}
    module = importlib.import_module("runtrue_fw.board_rp2040")
    yield Rig(module=module, mem=mem, clock=clock, host=host, dmas=dmas, kbd_intr=kbd, monkeypatch=monkeypatch)
    sys.modules.pop("runtrue_fw.board_rp2040", None)
