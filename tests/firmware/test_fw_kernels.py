"""The revolution kernels: bit for bit with basis.reference_sums, every intermediate within 31 bits.

Under CPython the viper module is executed with `micropython.viper` replaced by the identity (a
pure-Python reading of the same code); tests/micropython/test_mp_unix.py runs the real viper
code under MicroPython's unix port.  MicroPython's WebAssembly build rejects the viper decorators.
CRC: Greg Cook, "Catalogue of parametrised CRC algorithms", CRC-32/ISO-HDLC, check 0xCBF43926.
"""

from __future__ import annotations

import math
import random
import sys
import types
import zlib
from array import array
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rtlib.revinputs import rev_inputs  # type: ignore[import-not-found]

from runtrue.protocol.cobs import cobs_decode
from runtrue_fw import basis, kernels

VIPER_SRC = Path(kernels.__file__).with_name("kernels_viper.py")
TABLE = basis.make_cos_table()
KTAB = kernels.make_kernel_table()
CTAB = kernels.make_crc_table()
SLOT = 8192
WORD = 1 << 31   # viper words are 32-bit on the RP2040: every value must lie in (-2**31, 2**31)


@pytest.fixture(scope="module")
def viper() -> types.ModuleType:
    fake = types.ModuleType("micropython")
    fake.viper = fake.native = lambda f: f           # type: ignore[attr-defined]
    fake.const = lambda x: x                          # type: ignore[attr-defined]
    saved = sys.modules.get("micropython")
    sys.modules["micropython"] = fake
    try:
        mod = types.ModuleType("kernels_viper_as_python")
        mod.__dict__.update(ptr8=object, ptr16=object, ptr32=object)
        exec(compile(VIPER_SRC.read_text(), str(VIPER_SRC), "exec"), mod.__dict__)
    finally:
        if saved is None:
            del sys.modules["micropython"]
        else:
            sys.modules["micropython"] = saved
    return mod


def _int40(out: bytearray, o: int) -> int:
    return int.from_bytes(out[o:o + 3], "little") + (int.from_bytes(out[o + 3:o + 5], "little", signed=True) << 24)


def run_kernel(fn, codes: list[list[int]], f: int, length_q8: int, line_inc: int, start: int = 5000):
    """Put the channels' codes in a ring (wrapping), run `fn` (a rev_sums), return sums, min, max, p."""
    nch = len(codes)
    ring, p = rev_inputs(codes, length_q8, f, line_inc, start, SLOT)
    out = bytearray(240)
    fn(ring, KTAB, p, out)
    sums = [[_int40(out, 20 + 70 * c + 5 * j) for j in range(14)] for c in range(nch)]
    return sums, [p[kernels.P_MIN + c] for c in range(nch)], [p[kernels.P_MAX + c] for c in range(nch)], p


def _n(f: int, length_q8: int) -> int:
    return (length_q8 - f - 1) // 256 + 1


def _cases(seed: int) -> tuple[list[list[int]], int, int, int]:
    rng = random.Random(seed)
    nch = 1 + seed % 3
    length_q8 = rng.choice([15 * 256 + rng.randrange(256), rng.randrange(15 * 256, 4096 * 256),
                            4096 * 256 - rng.randrange(256)])
    f = rng.randrange(256)
    n = min(_n(f, length_q8), 4096)
    line_inc = rng.choice([0, basis.line_increment(50.0, 4000.0), basis.line_increment(60.0, 3333.0),
                           rng.randrange(1 << 30)])
    kind = seed % 4
    if kind == 0:
        codes = [[rng.randrange(4096) for _ in range(n)] for _ in range(nch)]
    elif kind == 1:
        codes = [[0] * n for _ in range(nch)]        # full scale, negative
    elif kind == 2:
        codes = [[4095] * n for _ in range(nch)]     # full scale, positive
    else:
        codes = [[rng.choice((0, 4095)) for _ in range(n)] for _ in range(nch)]
    return codes, f, length_q8, line_inc


@pytest.mark.parametrize("seed", range(12))
def test_portable_and_viper_kernels_equal_the_specification_bit_for_bit(seed: int, viper) -> None:
    codes, f, length_q8, line_inc = _cases(seed)
    want = [basis.reference_sums(TABLE, c, 2048, f, length_q8, line_inc) for c in codes]
    for fn in (kernels.rev_sums, viper.rev_sums):
        sums, lo, hi, _ = run_kernel(fn, codes, f, length_q8, line_inc)
        assert sums == want
        assert lo == [min(c) for c in codes] and hi == [max(c) for c in codes]


def test_the_longest_revolution_at_full_scale_on_three_channels(viper) -> None:
    length_q8 = 4096 * 256
    n = _n(0, length_q8)
    assert n == 4096
    phi = [2 * math.pi * i / n for i in range(n)]
    codes = [[0 if math.cos(a) < 0 else 4095 for a in phi],      # drives Sy.cos(phi) to its extreme
             [0] * n, [4095 if math.sin(2 * a) < 0 else 0 for a in phi]]
    want = [basis.reference_sums(TABLE, c, 2048, 0, length_q8, 0) for c in codes]
    assert run_kernel(viper.rev_sums, codes, 0, length_q8, 0)[0] == want
    assert all(abs(v) < 1 << 39 for ch in want for v in ch)        # int40 holds the sums


def _traced_run(codes, f, length_q8, line_inc) -> tuple[int, int]:
    """Run the portable kernel with a line tracer that checks every integer local of rev_sums
    before each line executes; returns (largest |local| seen, number of checks)."""
    worst = [0, 0]
    code = kernels.rev_sums.__code__

    def tracer(frame, event, arg):
        if frame.f_code is not code:
            return None
        for name, v in frame.f_locals.items():
            if type(v) is int:
                assert -WORD < v < WORD, (name, v)
                if abs(v) > worst[0]:
                    worst[0] = abs(v)
        worst[1] += 1
        return tracer

    sys.settrace(lambda fr_, ev, a: tracer if fr_.f_code is code else None)
    try:
        _, _, _, p = run_kernel(kernels.rev_sums, codes, f, length_q8, line_inc)
    finally:
        sys.settrace(None)
    assert all(0 <= v < WORD for v in p), "words stored in p stay non-negative 32-bit"
    return worst[0], worst[1]


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["low", "high", "square"])
def test_every_intermediate_fits_31_bits_at_the_extremes(kind: str) -> None:
    """An instrumented run: the block sums reach their bound (32 products of 2**25 = 2**30) for
    full-scale codes in phase with a basis value held at +-1 (a slow order, the line terms at
    angle 0 when off), and no local ever leaves (-2**31, 2**31)."""
    length_q8 = 1024 * 256
    n = _n(0, length_q8)
    if kind == "low":
        codes = [[0] * n]
    elif kind == "high":
        codes = [[4095] * n]
    else:
        codes = [[0 if math.cos(2 * math.pi * i / n) < 0 else 4095 for i in range(n)]]
    worst, checks = _traced_run(codes, 0, length_q8, 0)
    assert checks > 1000
    assert worst >= 2**29               # the extreme was really exercised
    assert worst < WORD


def test_deinterleave_is_the_same_in_both(viper) -> None:
    rng = random.Random(3)
    block = array("H", [rng.randrange(4096) for _ in range(3 * 100)])
    rings = []
    for fn in (kernels.deinterleave, viper.deinterleave):
        ring = array("H", bytes(2 * 3 * 128))
        fn(block, ring, array("i", [100, 3, 90, 128]))
        rings.append(ring)
    assert rings[0] == rings[1]
    assert rings[0][128 + ((90 + 7) & 127)] == block[3 * 7 + 1]


def _crc(fn, data: bytes) -> int:
    buf = bytearray(data) + bytes(4)
    assert fn(buf, len(data), CTAB) == len(data) + 4
    return int.from_bytes(buf[len(data):], "little")


def test_crc_kernels_give_the_catalogue_check_value(viper) -> None:
    for fn in (kernels.crc32_into, viper.crc32_into):
        assert _crc(fn, b"123456789") == 0xCBF43926


@settings(deadline=None, max_examples=150)
@given(st.binary(max_size=300))
def test_crc_kernels_match_zlib(data: bytes) -> None:
    assert _crc(kernels.crc32_into, data) == zlib.crc32(data)


@settings(deadline=None, max_examples=150)
@given(st.binary(max_size=248))
def test_cobs_kernel_round_trips_through_the_host_decoder(data: bytes) -> None:
    dst = bytearray(len(data) + len(data) // 254 + 2)
    n = kernels.cobs_encode_into(data, len(data), dst)
    enc = bytes(dst[:n])
    assert 0 not in enc
    assert cobs_decode(enc) == data
