"""Unit conversions, centrifugal force and refusals, static/couple split, and the uncertainty
propagation checked by Monte Carlo."""

from __future__ import annotations

import math

import numpy as np
import pytest

from runtrue.balancing import (
    BalancingError,
    Run,
    Weight,
    amp_phase,
    centrifugal_force_n,
    check_speed_rpm,
    convert_1x,
    g_to_oz,
    gmm_to_ozin,
    in_to_mm,
    mm_to_in,
    oz_to_g,
    ozin_to_gmm,
    phasor,
    solve,
    static_couple,
)


def test_mass_length_and_unbalance_units() -> None:
    # International yard and pound (1959): 1 oz = 28.349523125 g, 1 in = 25.4 mm.
    assert oz_to_g(1) == 28.349523125
    assert g_to_oz(oz_to_g(3.7)) == pytest.approx(3.7)
    assert in_to_mm(1) == 25.4 and mm_to_in(25.4) == 1
    assert ozin_to_gmm(1) == pytest.approx(720.0778, abs=1e-4)
    assert gmm_to_ozin(720.0778) == pytest.approx(1, abs=1e-6)


def test_vibration_units_at_one_x() -> None:
    # 1 g peak at 1800 rpm (30 Hz): v = a / w = 9.80665 / (2 pi 30) m/s = 52.03 mm/s, lag +90 deg.
    v = convert_1x(phasor(1.0, 10), "g", "mm/s", 1800)
    amp, lag = amp_phase(v)
    assert amp == pytest.approx(9.80665 / (2 * math.pi * 30) * 1000)
    assert lag == pytest.approx(100)
    d = convert_1x(phasor(1.0, 10), "g", "um", 1800)
    assert amp_phase(d)[1] == pytest.approx(190)
    back = convert_1x(d, "um", "g", 1800)
    assert back == pytest.approx(phasor(1.0, 10))
    assert convert_1x(1 + 0j, "mil", "um", 1000) == pytest.approx(25.4)
    with pytest.raises(BalancingError, match="unknown vibration unit"):
        convert_1x(1, "furlong", "g", 1000)


def test_centrifugal_force_by_hand() -> None:
    # 10 g at 100 mm, 3000 rpm: 0.01 kg * 0.1 m * (314.159 rad/s)^2 = 98.70 N.
    assert centrifugal_force_n(10, 100, 3000) == pytest.approx(0.01 * 0.1 * (100 * math.pi) ** 2)
    assert centrifugal_force_n(10, 100, 3000) == pytest.approx(98.70, abs=0.01)


@pytest.mark.parametrize(
    ("args", "match"),
    [((10, 100, 0), "above 0 rpm"), ((10, 100, 10), "too slow"), ((10, 100, 1e7), "above"),
     ((0, 100, 3000), "above 0 g"), ((10, -1, 3000), "above 0 mm"), ((math.inf, 100, 3000), "finite")],
)
def test_nonsense_speeds_masses_and_radii_are_refused(args, match: str) -> None:
    with pytest.raises(BalancingError, match=match):
        centrifugal_force_n(*args)


def test_check_speed_passes_sensible_speeds() -> None:
    assert check_speed_rpm(1480) == 1480.0


def test_static_couple_split_recombines() -> None:
    c = [Weight(1, 10, 30, 100), Weight(2, 14, 250, 120)]
    sc = static_couple(c)
    u1, u2 = c[0].unbalance_gmm, c[1].unbalance_gmm
    assert sc.static_gmm == pytest.approx(u1 + u2)
    assert sc.static_gmm / 2 + sc.couple_gmm == pytest.approx(u1)
    assert sc.static_gmm / 2 - sc.couple_gmm == pytest.approx(u2)
    assert sc.couple[0].mass_g == pytest.approx(sc.couple[1].mass_g)
    assert (sc.couple[1].angle_deg - sc.couple[0].angle_deg) % 360 == pytest.approx(180)
    pure_couple = static_couple([Weight(1, 10, 0, 100), Weight(2, 10, 180, 100)])
    assert abs(pure_couple.static_gmm) == pytest.approx(0, abs=1e-9)
    with pytest.raises(BalancingError):
        static_couple(c[:1])


@pytest.mark.slow
def test_propagated_uncertainty_agrees_with_monte_carlo() -> None:
    # Two planes, two pickups; each reading scattered with spread s (circular Gaussian).
    a = np.array([[phasor(0.004, 30), phasor(0.0012, 190)], [phasor(0.0015, 250), phasor(0.005, 80)]])
    u = np.array([phasor(900, 10), phasor(1300, 220)])
    ws = [[], [Weight(1, 20, 0, 100)], [Weight(2, 20, 90, 100)]]
    s = 0.08

    def runs(noise: np.ndarray | None) -> list[Run]:
        out = []
        for k, w in enumerate(ws):
            tot = u.copy()
            for x in w:
                tot[x.plane - 1] += x.unbalance_gmm
            y = a @ tot + (0 if noise is None else noise[k])
            out.append(Run(w, list(y), [s, s] if noise is None else None))
        return out

    sol = solve(runs(None))
    assert sol.mass_sd_g is not None and sol.angle_sd_deg is not None
    rng = np.random.default_rng(11)
    masses, angles = [], []
    for _ in range(2000):
        noise = s / math.sqrt(2) * (rng.normal(size=(3, 2)) + 1j * rng.normal(size=(3, 2)))
        c = solve(runs(noise)).corrections
        masses.append([x.mass_g for x in c])
        angles.append([x.angle_deg for x in c])
    masses_a = np.array(masses)
    ang = np.array(angles)
    for p in range(2):
        dev = (ang[:, p] - sol.corrections[p].angle_deg + 180) % 360 - 180
        assert np.std(masses_a[:, p]) == pytest.approx(sol.mass_sd_g[p], rel=0.15)
        assert np.std(dev) == pytest.approx(sol.angle_sd_deg[p], rel=0.15)
