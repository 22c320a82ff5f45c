"""Single precision, as on the RP2040 (MicroPython floats are 32-bit there; toolchain.md).

The portable fit code (kernels.fit_sums, phasor.fit) is executed with every float replaced by
numpy.float32 (NumPy 2's promotion keeps float32 op float32 in float32), so each operation rounds
as the board's would (libm aside).  The 1x estimate must stay far inside what matters
(0.001 % of the amplitude, 0.001 degree; measured ~1e-6 and ~3e-5 degree) even for the longest revolution the meter fits.
"""

from __future__ import annotations

import cmath
import math
import types
from array import array
from pathlib import Path

import numpy as np
import pytest

from runtrue_fw import kernels, phasor
from runtrue_fw.meter import MAX_REV_SAMPLES

F32 = np.float32


def _f32_module(src_path: str, name: str) -> types.ModuleType:
    mod = types.ModuleType(name)
    mod.__dict__.update(
        cos=lambda x: F32(math.cos(x)), sin=lambda x: F32(math.sin(x)),
        sqrt=lambda x: F32(math.sqrt(x)), float=F32)
    src = Path(src_path).read_text()
    # the modules import cos/sin/sqrt from math: keep our float32 versions instead
    src = src.replace("from math import cos, sin, sqrt", "").replace("from math import cos, sin", "")
    exec(compile(src, src_path, "exec"), mod.__dict__)
    return mod


@pytest.mark.parametrize("n_per_rev", [97.3125, 1000.4, MAX_REV_SAMPLES - 0.3])
def test_single_precision_fit_stays_within_a_thousandth_of_a_degree(n_per_rev: float) -> None:
    k32 = _f32_module(kernels.__file__, "kernels_f32")
    p32 = _f32_module(phasor.__file__, "phasor_f32")
    rng = np.random.default_rng(11)
    h1 = cmath.rect(150.0, math.radians(123.0))          # 150 counts peak: ~0.37 g at 409.5/g
    first_off = 0.6171875
    d = 2 * math.pi / n_per_rev
    n = int(math.floor(n_per_rev - first_off)) + 1
    phi = first_off * d + d * np.arange(n)
    y = 2048 + abs(h1) * np.cos(phi - cmath.phase(h1)) + 20 * np.cos(2 * phi) + rng.normal(0, 3, n)
    ring = array("H", np.clip(np.round(y), 0, 4095).astype(int).tolist())
    p = array("i", [0, 0, n, (1 << 16) - 1])
    dc = sum(ring) // n
    x64 = phasor.fit(kernels.fit_sums(ring, p, dc, first_off * d, d), n, first_off * d, d)
    a0_32, d_32 = F32(first_off * d), F32(d)
    x32 = p32.fit(k32.fit_sums(ring, p, dc, a0_32, d_32), n, a0_32, d_32)
    assert isinstance(x32[1], np.float32)
    z64 = complex(x64[1], x64[2])
    z32 = complex(float(x32[1]), float(x32[2]))
    assert abs(z32) == pytest.approx(abs(z64), rel=1e-5)
    assert math.degrees(abs(cmath.phase(z32 / z64))) < 0.001
