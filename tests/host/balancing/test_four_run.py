"""Amplitude-only (four-run) balancing.

Yardsticks: (1) a noise-free linear machine with a known unbalance; (2) the classic closed form
for a trial weight at 0, 120 and 240 deg, derived from the law of cosines as in the graphical
three-circle construction (Wowk, *Machinery Vibration: Balancing*, McGraw-Hill 1995, balancing
without phase -- from memory), coded here independently of the least-squares solver.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from runtrue.balancing import BalancingError, Run, Weight, four_run, phasor, solve_amplitude_only


def _amps(a: complex, u: complex, t: list[complex]) -> list[float]:
    return [abs(a * (u + ti)) for ti in t]


def test_noise_free_four_run_recovers_the_unbalance() -> None:
    a = phasor(0.004, 217)  # its phase is never seen by the method
    u = phasor(1500, 70)
    m, r = 12.0, 100.0
    t = [0j] + [phasor(m * r, ang) for ang in (0, 120, 240)]
    sol = four_run(_amps(a, u, t), m, [0, 120, 240], r)
    (c,) = sol.corrections
    assert c.unbalance_gmm == pytest.approx(-u, rel=1e-9)
    assert abs(sol.influence[0, 0]) == pytest.approx(abs(a), rel=1e-9)
    assert abs(sol.predicted[0]) == pytest.approx(0, abs=1e-6)
    assert sol.method == "four-run"


def test_four_run_matches_the_law_of_cosines_closed_form() -> None:
    m, r = 20.0, 150.0
    # Amplitudes of a machine with |a| = 0.003 per g*mm and 2000 g*mm at 100 deg (our own numbers).
    v0, v1, v2, v3 = _amps(0.003, phasor(2000, 100), [0j] + [phasor(m * r, x) for x in (0, 120, 240)])
    # Closed form: V_k^2 = V0^2 + E^2 + 2 V0 E cos(phi - theta_k); the cosines sum to 0 at 0/120/240.
    e = math.sqrt((v1**2 + v2**2 + v3**2 - 3 * v0**2) / 3)
    cos0 = (v1**2 - v0**2 - e**2) / (2 * v0 * e)
    cos120 = (v2**2 - v0**2 - e**2) / (2 * v0 * e)
    sin0 = (cos120 + 0.5 * cos0) / (math.sqrt(3) / 2)
    phi = math.degrees(math.atan2(sin0, cos0))
    mass = m * v0 / e
    angle = (phi + 180) % 360
    sol = four_run([v0, v1, v2, v3], m, [0, 120, 240], r)
    (c,) = sol.corrections
    assert c.mass_g == pytest.approx(mass, rel=1e-9)
    assert c.angle_deg == pytest.approx(angle, abs=1e-7)
    assert c.radius_mm == r
    assert c.mass_g == pytest.approx(2000 / r) and c.angle_deg == pytest.approx(280)


def test_rounded_meter_readings_still_land_close() -> None:
    # The same machine read to 0.1 (as a meter display would show): 5.9, 11.1, 8.1, 3.5 or so.
    m, r = 20.0, 150.0
    exact = _amps(0.003, phasor(2000, 100), [0j] + [phasor(m * r, x) for x in (0, 120, 240)])
    sol = four_run([round(v, 1) for v in exact], m, [0, 120, 240], r)
    (c,) = sol.corrections
    assert c.mass_g == pytest.approx(2000 / r, rel=0.03)
    assert c.angle_deg == pytest.approx(280, abs=2)


def test_any_three_or_more_angles_work() -> None:
    a = phasor(0.02, 10)
    u = phasor(300, 300)
    angs = [0, 90, 180, 270]
    t = [0j] + [phasor(5 * 40, x) for x in angs]
    sol = four_run(_amps(a, u, t), 5, angs, 40, correction_radius_mm=80)
    assert sol.corrections[0].unbalance_gmm == pytest.approx(-u, rel=1e-9)
    assert sol.corrections[0].radius_mm == 80


def test_small_trial_effect_warns_how_much_larger() -> None:
    a = phasor(0.01, 0)
    u = phasor(5000, 45)
    t = [0j] + [phasor(2 * 50, x) for x in (0, 120, 240)]  # 100 g*mm against 5000 g*mm
    sol = four_run(_amps(a, u, t), 2, [0, 120, 240], 50)
    assert any("times larger" in w for w in sol.warnings)


def test_repeated_angle_is_refused() -> None:
    with pytest.raises(BalancingError, match="three or more different angles"):
        four_run([5, 6, 6, 6], 10, [0, 0, 0], 100)


def test_too_few_runs_and_bad_amplitudes_are_refused() -> None:
    with pytest.raises(BalancingError, match="four runs"):
        four_run([5, 6, 4], 10, [0, 120], 100)
    with pytest.raises(BalancingError, match=">= 0"):
        four_run([5, -6, 4, 3], 10, [0, 120, 240], 100)
    with pytest.raises(BalancingError, match="above 0 g"):
        four_run([5, 6, 4, 3], 0, [0, 120, 240], 100)


def test_amplitude_only_from_runs_uses_every_pickup() -> None:
    a1, a2 = phasor(0.004, 217), phasor(0.001, 40)
    u = phasor(1500, 70)
    ws = [[], [Weight(1, 12, 0, 100)], [Weight(1, 12, 120, 100)], [Weight(1, 12, 240, 100)]]
    runs = []
    for w in ws:
        tot = u + sum((x.unbalance_gmm for x in w), 0j)
        runs.append(Run(w, [abs(a2 * tot), abs(a1 * tot)]))
    sol = solve_amplitude_only(runs)
    assert sol.corrections[0].unbalance_gmm == pytest.approx(-u, rel=1e-9)
    assert [abs(z) for z in sol.influence[:, 0]] == pytest.approx([abs(a2), abs(a1)], rel=1e-9)
    assert not any("not used" in w for w in sol.warnings)
    with pytest.raises(BalancingError, match="exactly one trial weight"):
        solve_amplitude_only(runs[:3] + [Run([Weight(2, 12, 240, 100)], [1.0, 1.0])])


@pytest.mark.slow
@settings(max_examples=60, deadline=None)
@given(a_amp=st.floats(1e-4, 1e-1), a_ph=st.floats(0, 360), u_amp=st.floats(50, 5000), u_ph=st.floats(0, 360),
       t_gmm=st.floats(100, 5000), start=st.floats(0, 360), step=st.floats(40, 140))
def test_noise_free_amplitudes_recover_any_unbalance(a_amp, a_ph, u_amp, u_ph, t_gmm, start, step) -> None:
    a, u = phasor(a_amp, a_ph), phasor(u_amp, u_ph)
    angs = [start, start + step, start + 2 * step]
    t = [0j] + [phasor(t_gmm, x) for x in angs]
    sol = four_run(_amps(a, u, t), t_gmm / 50, angs, 50)
    assert sol.corrections[0].unbalance_gmm == pytest.approx(-u, rel=1e-6, abs=1e-6 * u_amp)
