"""Benchmark: the weight allocator against a mixed-integer reference (scipy milp / HiGHS).

Run: .venv/bin/python tests/bench/bench_allocation.py [--quick] [--sizes 12x3,36x12] [--fractions 0.05,0]
     .venv/bin/python tests/bench/bench_allocation.py --strip    (strip and groove timings, ours only)

For sizes up to 36 positions × 12 piece sizes it prints, per case, our time and the MILP's,
their ratio, and the residual ratio (ours / MILP, 1.0 = equal; ours is exact so it is never
above 1 when we prove optimality), plus pieces and mass of both.  The MILP replaces the
Euclidean residual by a 256-gon norm (within 7.6e-5 relative, see
tests/host/allocation/allocation_reference.py).  Figures only; nothing here is a test.
"""

from __future__ import annotations

import math
import random
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "host" / "allocation"))

from allocation_reference import Case, milp_reference  # noqa: E402

from runtrue.allocation import Positions, Stock, allocate  # noqa: E402

PIECE_SIZES = [0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 7.5, 10.0, 15.0, 20.0]


def make_case(rng: random.Random, P: int, K: int, g_fraction: float) -> tuple[Case, int]:
    first = rng.uniform(0, 360 / P)
    angles = [(first + 360 * i / P) % 360 for i in range(P)]
    sizes = sorted(rng.sample(PIECE_SIZES, K))
    counts = [rng.choice([2, 3, 4, 6, None]) for _ in range(K)]
    t = rng.uniform(0, 2 * math.pi)
    target = rng.uniform(3, 25) * 120 * complex(math.cos(t), math.sin(t))
    stack = 3
    return Case(target, angles, [120.0] * P, sizes, counts, stack, None, g_fraction * abs(target)), stack


def run(quick: bool, sizes: list[tuple[int, int]] | None = None, fractions: list[float] | None = None) -> None:
    sizes = sizes or [(12, 3), (12, 6), (24, 8), (36, 12)]
    fractions = fractions if fractions is not None else [0.05, 0.01, 0.0]
    n_cases = 2 if quick else 5
    milp_limit_s = 20.0 if quick else 60.0
    print(f"{'size':>8} {'good enough':>11} {'ours s':>8} {'milp s':>8} {'time ratio':>10} "
          f"{'resid ratio':>11} {'pieces us/milp':>14} {'mass us/milp':>14} {'proven':>6}")
    for P, K in sizes:
        for frac in fractions:
            rng = random.Random(P * 100 + K * 10 + int(frac * 1000))
            ours_t, milp_t, ratios = [], [], []
            for _ in range(n_cases):
                case, stack = make_case(rng, P, K, frac)
                t0 = time.perf_counter()
                a = allocate(case.target, Positions.at_angles(case.angles_deg, 120.0),
                             stock=Stock.of(list(zip(case.sizes_g, case.counts))),
                             max_pieces_per_position=stack, good_enough_gmm=case.good_enough_gmm)
                t1 = time.perf_counter()
                ref = milp_reference(case, time_limit_s=milp_limit_s)
                t2 = time.perf_counter()
                ours_t.append(t1 - t0)
                milp_t.append(t2 - t1)
                rho = abs(a.residual_gmm)
                if ref is None:
                    print(f"{P:>3}x{K:<4} {frac:>11.0%} {t1 - t0:>8.3f} {'none':>8}")
                    continue
                m_rho, m_pieces, m_mass = ref
                g = case.good_enough_gmm
                level_ratio = max(rho, g) / max(m_rho, g) if max(m_rho, g) > 0 else 1.0
                ratios.append(level_ratio)
                print(f"{P:>3}x{K:<4} {frac:>11.0%} {t1 - t0:>8.3f} {t2 - t1:>8.3f} {(t1 - t0) / (t2 - t1):>10.4f} "
                      f"{level_ratio:>11.4f} {a.piece_count:>6}/{m_pieces:<7} {a.added_mass_g:>6.1f}/{m_mass:<7.1f} "
                      f"{'yes' if a.optimal else 'no':>6}")
            if ours_t and milp_t:
                print(f"  -> {P}x{K} good enough {frac:.0%}: median ours {statistics.median(ours_t):.3f} s, "
                      f"max ours {max(ours_t):.3f} s, median MILP {statistics.median(milp_t):.3f} s, "
                      f"median time ratio {statistics.median(o / m for o, m in zip(ours_t, milp_t)):.4f}, "
                      f"worst residual ratio {max(ratios) if ratios else float('nan'):.4f}")


def run_strip_and_groove(n_cases: int = 20) -> None:
    """Our times alone (the MILP reference here covers discrete stock only)."""
    from runtrue.allocation import Strip

    rng = random.Random(99)
    strips = [Strip(0.1, 10, 1), Strip(0.25, 12, 5, 80), Strip(0.05, 20, 0.5)]
    times: list[float] = []
    proven = 0
    for _ in range(n_cases):
        corr = (rng.uniform(3, 25), rng.uniform(0, 360), 120.0)
        for strip in strips:
            t0 = time.perf_counter()
            a = allocate(corr, Positions.equally_spaced(36, 120.0), strip=strip)
            times.append(time.perf_counter() - t0)
            proven += a.optimal
    print(f"strip, 36 positions, {len(times)} cases: median {statistics.median(times) * 1000:.1f} ms, "
          f"max {max(times) * 1000:.1f} ms, proven optimal {proven}/{len(times)}")
    times = []
    for _ in range(n_cases):
        corr = (rng.uniform(3, 25), rng.uniform(0, 360), 120.0)
        stock = Stock.of([(m, rng.choice([2, 4, None])) for m in PIECE_SIZES])
        t0 = time.perf_counter()
        allocate(corr, Positions.groove(110.0), stock=stock)
        times.append(time.perf_counter() - t0)
    print(f"groove, 12 piece sizes, {len(times)} cases: median {statistics.median(times) * 1000:.1f} ms, "
          f"max {max(times) * 1000:.1f} ms")


def _arg(name: str) -> str | None:
    return sys.argv[sys.argv.index(name) + 1] if name in sys.argv else None


if __name__ == "__main__":
    # options: --quick, --sizes 12x3,36x12, --fractions 0.05,0
    sz = _arg("--sizes")
    fr = _arg("--fractions")
    if "--strip" in sys.argv:
        run_strip_and_groove()
        raise SystemExit(0)
    run("--quick" in sys.argv,
        [tuple(int(v) for v in x.split("x")) for x in sz.split(",")] if sz else None,  # type: ignore[misc]
        [float(v) for v in fr.split(",")] if fr else None)
