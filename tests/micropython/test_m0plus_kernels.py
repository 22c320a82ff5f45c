"""The viper kernels' machine code on an emulated RP2040 core: bit for bit with the portable
kernels (and the raw-capture copy with its portable loop), 32-bit words, and no call into the
runtime inside their loops.

mpy-cross compiles firmware/runtrue_fw/kernels_viper.py for armv6m (the RP2040's Cortex-M0+);
m0plus.mjs runs each function's machine code on rp2040js's Cortex-M0+ core.  Unlike MicroPython's
unix port (64-bit words), this core's registers are 32 bits wide, as on the chip.
CRC: Greg Cook, "Catalogue of parametrised CRC algorithms", CRC-32/ISO-HDLC, check 0xCBF43926.
COBS: S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Transactions on
Networking 7(2), 1999 (decoded by the host's implementation).
"""

from __future__ import annotations

import random
import zlib
from array import array
from pathlib import Path

import m0plus
import pytest
from rtlib.revinputs import rev_inputs

from runtrue.protocol.cobs import cobs_decode
from runtrue_fw import basis, capture, kernels

pytestmark = pytest.mark.skipif(m0plus.missing() is not None, reason=str(m0plus.missing()))

SLOT = 8192
KTAB = kernels.make_kernel_table()
CTAB = kernels.make_crc_table()


def rev_cases() -> list[tuple[array, array]]:
    rnd = random.Random(7)
    cases = []
    for nch in (1, 2, 3):
        for n, line_hz in ((24, 50.0), (97, 60.0), (400, 0.0), (2000, 50.0)):
            codes = [[rnd.randrange(4096) for _ in range(n)] for _ in range(nch)]
            cases.append(rev_inputs(codes, n * 256 + rnd.randrange(256), rnd.randrange(256),
                                    basis.line_increment(line_hz, 4000.0), rnd.randrange(SLOT), SLOT))
    # the extremes: full-scale codes (0 and 4095), wrapping the ring, 8 samples and 8,000 samples
    for n in (8, 8000):
        codes = [[4095 if (i // 3) % 2 else 0 for i in range(n)] for _ in range(3)]
        cases.append(rev_inputs(codes, n * 256, 255, basis.line_increment(60.0, 4000.0), SLOT - 5, SLOT))
    return cases


def test_rev_sums_on_the_chips_core_equal_the_portable_kernel_bit_for_bit() -> None:
    code = m0plus.viper_kernels()["rev_sums"]
    cases = rev_cases()
    calls, expected = [], []
    for ring, p in cases:
        out = bytearray(240)
        calls.append([ring, KTAB, p, out])
        p_ref, out_ref = array("i", p), bytearray(out)
        kernels.rev_sums(ring, KTAB, p_ref, out_ref)
        expected.append((bytes(out_ref), bytes(p_ref)))
    for (ring, p), got, (out_ref, p_ref) in zip(cases, m0plus.run(code, calls), expected, strict=True):
        assert got.buffers[3] == out_ref, (p[kernels.P_NCH], p[kernels.P_N])   # the REV payload's sums
        assert got.buffers[2] == p_ref, (p[kernels.P_NCH], p[kernels.P_N])     # min/max and work words
        assert got.buffers[0] == bytes(ring)                                    # the ring is only read


def test_the_kernels_call_the_runtime_only_on_entry_whatever_the_revolutions_length() -> None:
    # The loops run with no call into MicroPython's runtime (so nothing there can allocate): the
    # same entry calls (argument checks and conversions) for 8 samples as for 8,000.
    code = m0plus.viper_kernels()["rev_sums"]
    short, long_ = (rev_inputs([[(37 * i) % 4096 for i in range(n)]], n * 256, 0, 0, 0, SLOT) for n in (8, 8000))
    runs = m0plus.run(code, [[short[0], KTAB, short[1], bytearray(240)], [long_[0], KTAB, long_[1], bytearray(240)]])
    assert runs[0].runtime_calls == runs[1].runtime_calls
    assert len(runs[0].runtime_calls) <= 4 + 1        # one per argument, and the argument check
    assert runs[1].cycles > 500 * runs[0].cycles / 8  # the loop really ran 1,000 times longer


def test_deinterleave_and_the_ring_copy_equal_the_portable_kernels() -> None:
    code = m0plus.viper_kernels()
    rnd = random.Random(3)
    calls_d, calls_c, want_d, want_c = [], [], [], []
    for nch, n, w, size in ((1, 64, 0, 1024), (3, 64, 1000, 1024), (2, 50, 8190, 8192)):
        block = array("H", [rnd.randrange(4096) for _ in range(n * nch)])
        ring = array("H", bytes(2 * size * nch))
        p = array("i", [n, nch, w, size])
        calls_d.append([block, ring, p])
        ring_ref = array("H", ring)
        kernels.deinterleave(block, ring_ref, p)
        want_d.append(bytes(ring_ref))
        src = array("H", [rnd.randrange(65536) for _ in range(size)])
        dst = array("H", bytes(2 * n * nch))
        pc = array("i", [size - 7, n * nch, size])
        calls_c.append([src, dst, pc])
        dst_ref = array("H", dst)
        kernels.copy_wrapped(src, dst_ref, pc)
        want_c.append(bytes(dst_ref))
    assert [r.buffers[1] for r in m0plus.run(code["deinterleave"], calls_d)] == want_d
    assert [r.buffers[1] for r in m0plus.run(code["copy_wrapped"], calls_c)] == want_c


def test_crc32_on_the_chips_core_gives_the_catalogue_check_value_and_zlibs_crc() -> None:
    code = m0plus.viper_kernels()["crc32_into"]
    rnd = random.Random(5)
    datas = [b"123456789"] + [bytes(rnd.randrange(256) for _ in range(n)) for n in (0, 1, 240, 1000)]
    runs = m0plus.run(code, [[bytearray(d + bytes(4)), len(d), CTAB] for d in datas])
    for d, r in zip(datas, runs, strict=True):
        assert r.r0 == len(d) + 4
        assert int.from_bytes(r.buffers[0][len(d):len(d) + 4], "little") == zlib.crc32(d)
    assert int.from_bytes(runs[0].buffers[0][9:13], "little") == 0xCBF43926


def test_cobs_on_the_chips_core_decodes_back_with_the_hosts_decoder() -> None:
    code = m0plus.viper_kernels()["cobs_encode_into"]
    rnd = random.Random(9)
    datas = [b"", b"\x00", b"\x11\x00\x00\x22", bytes(range(1, 255)), bytes(range(1, 256)) * 2,
             bytes(rnd.randrange(256) for _ in range(600))]
    runs = m0plus.run(code, [[bytearray(d), len(d), bytearray(len(d) + len(d) // 254 + 2)] for d in datas])
    for d, r in zip(datas, runs, strict=True):
        encoded = r.buffers[2][:r.r0]
        assert b"\x00" not in encoded
        assert cobs_decode(encoded) == d


VIPER_WORD = """
import micropython

@micropython.viper
def add(a: int, b: int) -> int:
    return a + b
"""


def test_the_emulated_core_has_32_bit_words_where_the_unix_port_has_64(tmp_path: Path) -> None:
    # The check that this is the chip's arithmetic: 2**31 - 1 + 1 wraps to -2**31 in a 32-bit
    # register; under the unix port (64-bit) the same viper code returns 2**31.
    src = tmp_path / "word.py"
    src.write_text(VIPER_WORD)
    add = m0plus.viper_kernels(src)["add"]
    wrapped, small = m0plus.run(add, [[0x7FFFFFFF, 1], [2, 3]])
    assert wrapped.r0 == -(1 << 31)
    assert small.r0 == 5


def test_the_raw_capture_copy_equals_the_portable_loop() -> None:
    code = m0plus.viper_kernels(Path(capture.__file__).with_name("capture_viper.py"))["copy_frames"]
    rnd = random.Random(11)
    calls, want = [], []
    for nch, n, w in ((1, 100, 8000), (3, 37, 8190), (2, 64, 0)):
        ring = array("H", [rnd.randrange(4096) for _ in range(8192 * nch)])
        body = bytearray(12 + 2 * n * nch)
        p = array("i", [n, nch, w, 8192, 12])
        calls.append([ring, body, p])
        ref = bytearray(body)
        capture.copy_frames_portable(ring, ref, p)
        want.append(bytes(ref))
    assert [r.buffers[1] for r in m0plus.run(code, calls)] == want
