"""The simulator's numpy twin of the meter's revolution kernel gives the portable kernel's bytes."""

from __future__ import annotations

import random
from array import array

import pytest

from runtrue.sim.fastsums import rev_sums as fast
from runtrue_fw import basis, kernels


@pytest.mark.parametrize("seed", range(6))
def test_numpy_twin_writes_the_same_sums_and_extremes_as_the_portable_kernel(seed: int) -> None:
    rng = random.Random(seed)
    nch = 1 + seed % 3
    ring = array("H", [rng.choice([0, 4095, rng.randrange(4096)]) for _ in range(8192 * nch)])
    length_q8 = rng.randrange(15 * 256, 4096 * 256)
    inc1 = basis.rev_increment(length_q8)
    outs = []
    for fn in (kernels.rev_sums, fast):
        p = kernels.make_params()
        for i, v in ((kernels.P_N, min(4096, length_q8 // 256)), (kernels.P_NCH, nch), (kernels.P_START, rng.randrange(8192)),
                     (kernels.P_MASK, 8191), (kernels.P_SLOT, 8192), (kernels.P_OFFSET, 2048), (kernels.P_INC, inc1),
                     (kernels.P_A1, basis.first_angle(inc1, 77)), (kernels.P_LINE, basis.line_increment(50.0, 4000.0)),
                     (kernels.P_OUT, 20)):
            p[i] = v
        rng2 = random.Random(seed)  # the same start for both
        p[kernels.P_START] = rng2.randrange(8192)
        out = bytearray(240)
        fn(ring, kernels.make_kernel_table(), p, out)
        outs.append((bytes(out), list(p[kernels.P_MIN:kernels.P_MIN + nch]), list(p[kernels.P_MAX:kernels.P_MAX + nch])))
    assert outs[0] == outs[1]
