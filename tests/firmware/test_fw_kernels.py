"""The viper/native kernels give the same numbers as the portable ones.

Under CPython the viper module is executed with `micropython.viper`/`native` replaced by the
identity (a pure-Python reading of the same code); under MicroPython on the board the emitters
compile it to machine code.  toolchain.md: the WebAssembly build rejects the decorators.
"""

from __future__ import annotations

import math
import random
import sys
import types
from array import array
from pathlib import Path

import pytest

from runtrue_fw import kernels

VIPER_SRC = Path(kernels.__file__).with_name("kernels_viper.py")


@pytest.fixture(scope="module")
def viper() -> types.ModuleType:
    fake = types.ModuleType("micropython")
    fake.viper = fake.native = lambda f: f           # type: ignore[attr-defined]
    fake.const = lambda x: x                          # type: ignore[attr-defined]
    saved = sys.modules.get("micropython")
    sys.modules["micropython"] = fake
    try:
        mod = types.ModuleType("kernels_viper_as_python")
        mod.__dict__.update(ptr16=object, ptr32=object)
        exec(compile(VIPER_SRC.read_text(), str(VIPER_SRC), "exec"), mod.__dict__)
    finally:
        if saved is None:
            del sys.modules["micropython"]
        else:
            sys.modules["micropython"] = saved
    return mod


def test_meter_uses_the_portable_kernels_under_cpython() -> None:
    from runtrue_fw import meter
    assert meter.KERNELS == "portable"


def test_deinterleave_same_as_portable(viper: types.ModuleType) -> None:
    rnd = random.Random(3)
    for nch, n, w in [(1, 100, 0), (2, 300, 8000), (3, 257, 8191)]:
        block = array("H", [rnd.randrange(4096) for _ in range(nch * n)])
        rings = [array("H", bytes(2 * 3 * 8192)) for _ in range(2)]
        for impl, ring in zip((kernels, viper), rings):
            impl.deinterleave(block, ring, array("i", [n, nch, w, 8192]))
        assert rings[0] == rings[1]
        assert rings[0][(nch - 1) * 8192 + (w + n - 1) % 8192] == block[-1]


def test_ring_stats_and_fit_sums_same_as_portable(viper: types.ModuleType) -> None:
    rnd = random.Random(4)
    ring = array("H", [rnd.randrange(4096) for _ in range(2 * 8192)])
    for start, n in [(0, 8), (8100, 500), (3, 4096)]:
        pa = array("i", [8192, start, n, 8191, 0, 0, 0])
        pb = array("i", pa)
        kernels.ring_stats(ring, pa)
        viper.ring_stats(ring, pb)
        assert pa == pb
        got = [impl.fit_sums(ring, pa, 2048, 0.3, 2 * math.pi / 97.3) for impl in (kernels, viper)]
        assert got[0] == got[1]
