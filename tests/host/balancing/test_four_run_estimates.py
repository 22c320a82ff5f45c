"""Amplitude-only balancing: how good the maximum-likelihood estimate and its stated uncertainty are.

Model that runs (the one the method assumes): a linear single-plane rotor, ``V_k = |a|·|u + T_k|``
with the trial weight at 0/120/240 deg from a random start, and random amplitude errors.
Random rotors (invented) from ``tests/random_rotors.py``: ``|u|`` log-uniform 100-10,000 g·mm at
any angle, ``|a|`` log-uniform over e^-8..e^-4 per g·mm, the trial unbalance 0.7-2 times ``|u|``
(log-uniform).  The same rotors as ``tests/bench/bench_balancing.py --part amplitude`` at a smaller
count.

Yardsticks: the linear least-squares solution on V^2 (the classic algebra of the three-circle
construction), which the fit must beat; the truth, which the stated 95 % intervals and the
residual's upper bound must hold as often as they claim (fixed seeds).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from runtrue.balancing import Run, Weight, phasor, solve_amplitude_only
from runtrue.balancing.amplitude_fit import linear_solution
from runtrue.balancing.four_run import Z95, amplitude_only, fit_amplitudes, residual_upper_bound_gmm

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
from random_rotors import amplitude_only_rotor  # noqa: E402


@pytest.mark.slow
def test_fit_beats_the_linear_solution_at_5_percent_amplitude_noise() -> None:
    rng = np.random.default_rng(5)
    lin, ml = [], []
    for _ in range(400):
        u, a, t = amplitude_only_rotor(rng)
        true = a * np.abs(u + t)
        v = np.abs(true * (1 + 0.05 * rng.normal(size=4)))
        ls = linear_solution(v, t)
        lin.append(abs(ls[0] - u) / abs(u) if ls else math.inf)
        ml.append(abs(fit_amplitudes(v, t, 0.05 * true).unbalance_gmm - u) / abs(u))
    # Done-when figures (bench: 3,000 rotors): median <= 0.09, 90th percentile <= 0.23.
    assert np.median(ml) <= 0.09
    assert np.percentile(ml, 90) <= 0.23
    assert np.median(ml) < 0.85 * np.median(lin)
    assert np.percentile(ml, 90) < 0.85 * np.percentile(lin, 90)


@pytest.mark.slow
def test_stated_95_percent_intervals_cover_the_true_correction_93_to_97_percent() -> None:
    # Reading error: 3 % of the amplitude (repeatability) and a floor of 1 % of the reference
    # amplitude (background vibration), the scatter the engine is told.
    rng = np.random.default_rng(11)
    n, hit_mass, hit_angle = 800, 0, 0
    for _ in range(n):
        u, a, t = amplitude_only_rotor(rng)
        true = a * np.abs(u + t)
        sd = np.hypot(0.03 * true, 0.01 * true[0])
        v = np.abs(true + sd * rng.normal(size=4))
        sol = amplitude_only(v, t, 100.0, amp_sd=sd)
        c = sol.corrections[0]
        assert sol.mass_sd_g is not None and sol.angle_sd_deg is not None
        hit_mass += abs(c.mass_g - abs(u) / 100.0) <= Z95 * sol.mass_sd_g[0]
        d = (c.angle_deg - math.degrees(np.angle(-u)) + 180.0) % 360.0 - 180.0
        hit_angle += abs(d) <= Z95 * sol.angle_sd_deg[0]
    assert 0.93 <= hit_mass / n <= 0.97
    assert 0.93 <= hit_angle / n <= 0.97


@pytest.mark.slow
def test_residual_upper_bound_holds_the_true_residual_at_least_95_percent() -> None:
    # After a correction with the fitted value, a check run reads |a|·|u + C|; the bound from its
    # amplitude and the fitted |a| must lie above the true |u + C| in >= 95 % of cases.
    rng = np.random.default_rng(3)
    n, under = 600, 0
    for _ in range(n):
        u, a, t = amplitude_only_rotor(rng)
        true = a * np.abs(u + t)
        sd = np.hypot(0.03 * true, 0.01 * true[0])
        v = np.abs(true + sd * rng.normal(size=4))
        fit = fit_amplitudes(v, t, sd)
        left = u - fit.unbalance_gmm
        v_check_true = a * abs(left)
        sd_check = math.hypot(0.03 * v_check_true, 0.01 * true[0])
        v_check = abs(v_check_true + sd_check * rng.normal())
        bound = residual_upper_bound_gmm(v_check, sd_check, float(fit.gains[0]), fit.gain_sd(0))
        under += bound < abs(left)
    assert under / n <= 0.05


@pytest.mark.slow
def test_no_false_pass_when_the_bound_decides() -> None:
    # Rotors whose correction leaves just over the allowance: the bound must never call them passed.
    rng = np.random.default_rng(17)
    false_pass = 0
    for _ in range(300):
        u, a, t = amplitude_only_rotor(rng)
        true = a * np.abs(u + t)
        sd = np.hypot(0.03 * true, 0.01 * true[0])
        v = np.abs(true + sd * rng.normal(size=4))
        fit = fit_amplitudes(v, t, sd)
        left = abs(u - fit.unbalance_gmm)
        permissible = left / 1.05  # the truth is 5 % over the allowance
        v_check = abs(a * left + math.hypot(0.03 * a * left, 0.01 * true[0]) * rng.normal())
        bound = residual_upper_bound_gmm(v_check, math.hypot(0.03 * a * left, 0.01 * true[0]),
                                         float(fit.gains[0]), fit.gain_sd(0))
        false_pass += bound <= permissible
    assert false_pass == 0


def test_unknown_scatter_gives_no_bound_and_no_pass() -> None:
    assert residual_upper_bound_gmm(1.0, None, 0.01, 0.001) == math.inf
    assert residual_upper_bound_gmm(1.0, 0.1, 0.01, 0.006) == math.inf  # |H| not known above zero
    assert residual_upper_bound_gmm(1.0, 0.0, 0.01, 0.0) == pytest.approx(100.0)


@pytest.mark.slow
def test_a_quiet_second_pickup_improves_the_estimate_and_a_noisy_one_does_no_harm() -> None:
    rng = np.random.default_rng(23)
    one, two, noisy = [], [], []
    for _ in range(150):
        u, a, t = amplitude_only_rotor(rng)
        true = a * np.abs(u + t)
        sd = 0.05 * true
        v1 = np.abs(true + sd * rng.normal(size=4))
        v2 = np.abs(true + sd * rng.normal(size=4))
        v3 = np.abs(true + 20 * sd * rng.normal(size=4))
        one.append(abs(fit_amplitudes(v1, t, sd).unbalance_gmm - u) / abs(u))
        two.append(abs(fit_amplitudes(np.column_stack([v1, v2]), t, np.column_stack([sd, sd])).unbalance_gmm - u) / abs(u))
        noisy.append(abs(fit_amplitudes(np.column_stack([v1, v3]), t,
                                        np.column_stack([sd, 20 * sd])).unbalance_gmm - u) / abs(u))
    assert np.median(two) < 0.85 * np.median(one)
    assert np.median(noisy) < 1.05 * np.median(one)


def test_runs_with_spreads_give_the_uncertainty_of_the_correction() -> None:
    a, u = 0.004, phasor(1500, 70)
    ws = [[], [Weight(1, 12, 0, 100)], [Weight(1, 12, 120, 100)], [Weight(1, 12, 240, 100)]]
    runs = [Run(w, [a * abs(u + sum((x.unbalance_gmm for x in w), 0j))], [0.1]) for w in ws]
    sol = solve_amplitude_only(runs)
    assert sol.mass_sd_g is not None and sol.mass_sd_g[0] > 0
    assert sol.angle_sd_deg is not None and 0 < sol.angle_sd_deg[0] < 10
    assert solve_amplitude_only([Run(r.weights, r.readings) for r in runs]).mass_sd_g is None


@pytest.mark.slow
def test_expected_error_used_for_planning_matches_simulation() -> None:
    from runtrue.balancing.four_run import expected_relative_error

    rng = np.random.default_rng(29)
    for ratio, noise, angles in ((1.0, 0.02, (0, 120, 240)), (2.0, 0.05, (0, 90, 180, 270))):
        sq = []
        for _ in range(350):
            u = 1000 * np.exp(1j * rng.uniform(0, 2 * math.pi))
            t = np.array([0j] + [ratio * 1000 * np.exp(1j * math.radians(x)) for x in angles])
            sd = np.full(len(t), noise)
            v = np.abs(np.abs(u + t) / 1000 + sd * rng.normal(size=len(t)))
            sq.append(abs(fit_amplitudes(v, t, sd).unbalance_gmm - u) ** 2 / 1e6)
        assert math.sqrt(np.mean(sq)) == pytest.approx(expected_relative_error(ratio, noise, angles), rel=0.15)


def test_plan_adds_trial_positions_when_the_readings_are_noisy() -> None:
    from runtrue.balancing.four_run import plan_amplitude_only

    quiet = plan_amplitude_only(1.0, 0.01, 1e-3, 100.0, 2000.0)
    noisy = plan_amplitude_only(1.0, 0.04, 1e-3, 100.0, 2000.0)
    assert len(quiet.trial_angles_deg) == 3
    assert len(noisy.trial_angles_deg) > 3
    assert quiet.trial_gmm <= 2000.0 and noisy.trial_gmm <= 2000.0  # the safety limit holds
    assert Z95 * noisy.expected_relative_error * 1000.0 <= 50.0 or "average more" in noisy.rule


def test_solve_command_gives_the_amplitude_only_uncertainty(capsys: pytest.CaptureFixture[str], tmp_path) -> None:
    import json

    from runtrue.cli import main

    a, u = 0.004, phasor(1500, 70)
    runs = [{"readings": [{"amp": a * abs(u), "spread": 0.1}]}]
    for ang in (0, 120, 240):
        w = Weight(1, 12, ang, 100)
        runs.append({"weights": [{"plane": 1, "mass": 12, "angle": ang, "radius": 100}],
                     "readings": [{"amp": a * abs(u + w.unbalance_gmm), "spread": 0.1}]})
    path = tmp_path / "runs.json"
    path.write_text(json.dumps({"runs": runs}))
    assert main(["solve", str(path)]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["method"] == "four-run"
    assert out["corrections"][0]["mass"] == pytest.approx(15.0, rel=1e-4)
    (unc,) = out["uncertainty"]
    assert unc["mass_sd"] > 0 and 0 < unc["angle_sd"] < 10
