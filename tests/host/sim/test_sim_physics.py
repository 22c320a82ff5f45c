"""The virtual machine's physics: linearity, two-plane cross-effects, speed, edges, ADC, seeds."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from sim_testkit import quiet, record

from runtrue.sim.board import actual_rate_hz
from runtrue.sim.frontend import lowpass_response, quantise
from runtrue.sim.machine import VirtualMachine
from runtrue.sim.rotor import support_for
from runtrue.sim.scenarios import SCENARIOS, get_scenario


@pytest.mark.parametrize("name", sorted(SCENARIOS))
def test_response_is_linear_in_the_complex_unbalance(name):
    # The influence-coefficient method rests on this: reading = A u (complex, not conjugate-
    # linear), even on anisotropic supports (every demo scenario has some anisotropy).
    m = VirtualMachine(quiet(name), seed=1)
    base = np.array(m.expected_1x())
    coeff = m.influence_coefficients()
    for plane in range(len(m.scenario.planes)):
        a = m.add_weight(plane, 7.0, 33.0, 50.0)
        b = m.add_weight(plane, 3.0, 250.0, 80.0)
        predicted = base + coeff[:, plane] * (
            7.0 * 50.0 * np.exp(1j * math.radians(33.0)) + 3.0 * 80.0 * np.exp(1j * math.radians(250.0))
        )
        assert np.allclose(m.expected_1x(), predicted, rtol=1e-9, atol=1e-12)
        m.remove_weight(a)
        m.remove_weight(b)


def test_doubling_the_unbalance_doubles_the_vibration():
    sc = quiet("fan")
    doubled = dataclasses.replace(
        sc, planes=(dataclasses.replace(sc.planes[0], initial_unbalance_gmm=2 * sc.planes[0].initial_unbalance_gmm),)
    )
    one = VirtualMachine(sc, seed=1).expected_1x()[0]
    two = VirtualMachine(doubled, seed=1).expected_1x()[0]
    assert two == pytest.approx(2 * one, rel=1e-12)


def test_two_plane_roller_each_plane_is_felt_at_both_bearings_more_at_its_own():
    m = VirtualMachine(quiet("roller"), seed=1)
    coeff = np.abs(m.influence_coefficients())  # rows: pickups (bearing A, B); cols: planes
    assert coeff.min() > 0.05 * coeff.max()  # cross-effects are real, not zero
    assert coeff[0, 0] > coeff[1, 0]  # plane near bearing A moves bearing A more
    assert coeff[1, 1] > coeff[0, 1]
    assert abs(np.linalg.det(m.influence_coefficients())) > 0  # solvable two-plane problem


def _symmetric_roller():
    sc = quiet("roller")
    sup = support_for(19.0, 21.0, 0.07)
    rotor = dataclasses.replace(sc.rotor, support_a=sup, support_b=sup, cg_mm=650.0)
    planes = tuple(dataclasses.replace(p, initial_unbalance_gmm=0j) for p in sc.planes)
    return dataclasses.replace(sc, rotor=rotor, planes=planes)


def test_static_unbalance_moves_both_ends_alike_and_couple_unbalance_rocks_them_opposite():
    # Rigid rotor, symmetric about its centre: static unbalance (equal, same angle, planes
    # symmetric about the CG) excites bounce only; couple unbalance (equal, opposite) rocking only.
    # Elementary rigid-body dynamics, e.g. Vance, Zeidan, Murphy, Machinery Vibration and
    # Rotordynamics (2010), ch. 2 (from memory).
    sc = _symmetric_roller()
    m = VirtualMachine(sc, seed=1)
    m.add_weight(0, 20.0, 60.0, 95.0)
    m.add_weight(1, 20.0, 60.0, 95.0)
    a, b = m.expected_1x()
    assert a == pytest.approx(b, rel=1e-9)
    m2 = VirtualMachine(sc, seed=1)
    m2.add_weight(0, 20.0, 60.0, 95.0)
    m2.add_weight(1, 20.0, 240.0, 95.0)
    a2, b2 = m2.expected_1x()
    assert a2 == pytest.approx(-b2, rel=1e-9)
    # bounce and rocking are different modes: the two responses differ in size
    assert abs(abs(a2) - abs(a)) > 0.05 * abs(a)


def test_response_peaks_near_the_support_resonance():
    sc = quiet("sander")  # supports ~80 Hz, running 57.5 Hz
    m = VirtualMachine(sc, seed=1)
    amps = {}
    for rpm in (2400, 3450, 4800, 6600):
        m.set_speed_rpm(rpm)
        amps[rpm] = abs(m.expected_1x()[0])
    assert amps[2400] < amps[3450] < amps[4800]
    assert amps[4800] > amps[6600] * 0.5  # past the peak it no longer climbs steeply


def test_expected_1x_is_the_vibration_with_the_anti_alias_filter_taken_out():
    """The host divides the filter's response out (INFO's fe), so the truth leaves it out."""
    sc = quiet("spindle")
    fe = sc.front_end
    m = VirtualMachine(sc, seed=1)
    no_filter = VirtualMachine(
        dataclasses.replace(sc, front_end=dataclasses.replace(fe, lowpass_a1_s=0.0, lowpass_a2_s2=0.0)), seed=1
    )
    assert m.expected_1x()[0] == pytest.approx(no_filter.expected_1x()[0], rel=1e-12)


def test_meter_front_end_matches_its_design_figures():
    # hardware/FRONTEND.md (generated table): -3 dB cut-off 872 Hz; 1x lag under 3.5 deg up to
    # 3,000 rpm.  A single RC section has lag atan(f/fc) (Horowitz and Hill, 3rd ed., 1.7).
    from runtrue.sim.frontend import METER_A1_S, METER_A2_S2, single_rc_a1

    f = np.linspace(600.0, 1200.0, 60001)
    gain = np.abs(lowpass_response(f, METER_A1_S, METER_A2_S2))
    assert f[np.argmin(np.abs(gain - 1 / math.sqrt(2)))] == pytest.approx(872.0, abs=1.0)
    assert -math.degrees(np.angle(lowpass_response(50.0, METER_A1_S, METER_A2_S2))) < 3.5
    assert -math.degrees(np.angle(lowpass_response(100.0, single_rc_a1(1000.0)))) == pytest.approx(
        math.degrees(math.atan(0.1))
    )


def test_edges_come_once_a_revolution_at_the_mark_and_its_trailing_edge():
    sc = quiet("fan", ref_angle_deg=0.0)
    sc = dataclasses.replace(sc, front_end=dataclasses.replace(sc.front_end, ref_delay_us=0.0))
    m = VirtualMachine(sc, seed=1)
    _, _, edges = record(m, 1.0, rate_hz=4000.0)
    rising = np.array([e.t_s for e in edges if e.rising])
    falling = np.array([e.t_s for e in edges if not e.rising])
    period = 60.0 / sc.speed_rpm
    assert np.diff(rising) == pytest.approx(np.full(len(rising) - 1, period), rel=1e-9)
    if falling[0] < rising[0]:
        falling = falling[1:]
    n = min(len(rising), len(falling))
    width_s = period * sc.mark_width_deg / 360.0
    assert falling[:n] - rising[:n] == pytest.approx(np.full(n, width_s), rel=1e-6)


def test_glitches_and_missed_pulses_happen_at_their_rates():
    sc = quiet("fan", glitch_per_rev=0.2, missed_per_rev=0.1)
    m = VirtualMachine(sc, seed=7)
    _, _, edges = record(m, 40.0, rate_hz=1000.0)  # ~980 revolutions
    revs = 40.0 * sc.speed_rpm / 60.0
    glitches = sum(1 for e in edges if e.glitch and e.rising)
    mark = sum(1 for e in edges if not e.glitch and e.rising)
    assert glitches == pytest.approx(0.2 * revs, rel=0.25)
    assert revs - mark == pytest.approx(0.1 * revs, rel=0.3)


@pytest.mark.slow
def test_speed_drifts_around_nominal_and_coasts_down_at_its_rate():
    sc = get_scenario("sander")
    m = VirtualMachine(sc, seed=3)
    speeds = []
    for _ in range(400):
        m.generate(200, 4000.0, [0])
        speeds.append(m.speed_rpm)
    speeds = np.array(speeds)
    assert speeds.mean() == pytest.approx(sc.speed_rpm, rel=0.01)
    assert 0.2 * sc.speed_drift_frac < speeds.std() / sc.speed_rpm < 3 * sc.speed_drift_frac
    m.coast_down()
    before = m.speed_rpm
    m.generate(20000, 4000.0, [0])  # 5 s
    assert (before - m.speed_rpm) / 5.0 == pytest.approx(sc.coast_down_rpm_per_s, rel=0.05)
    m.generate(40000 * 4, 4000.0, [0])
    assert m.speed_rpm == 0.0
    vals, _, edges = record(m, 0.2, rate_hz=4000.0)
    assert edges == [] and np.abs(vals).max() < 5 * sc.pickups[0].noise_g + abs(sc.pickups[0].dc_offset_g)


def test_adc_quantises_to_whole_codes_and_clips_at_the_end_stops():
    a = np.array([0.0, 1.0 / 409.6, 0.4 / 409.6, 0.6 / 409.6, 10.0, -10.0])
    codes = quantise(a, counts_per_g=409.6, zero_code=2048, adc_bits=12)
    assert codes.dtype == np.uint16
    assert codes.tolist() == [2048, 2049, 2048, 2049, 4095, 0]


def test_rp2040_rate_is_the_nearest_reachable_by_the_adc_divider():
    # RP2040 Datasheet 4.9.6 (DIV): period 1 + INT + FRAC/256 cycles of 48 MHz, at least 96.
    assert actual_rate_hz(4000, 1) == pytest.approx(4000.0)
    r3 = actual_rate_hz(7000, 3)
    assert r3 == pytest.approx(7000.0, rel=1e-5) and r3 != 7000.0
    assert actual_rate_hz(10**6, 1) == pytest.approx(500_000.0)


def test_same_seed_same_signals_different_seed_different_noise():
    def run(seed):
        m = VirtualMachine("sander", seed=seed)
        vals, _, edges = record(m, 0.5, rate_hz=4000.0)
        return vals, [e.t_s for e in edges]

    v1, e1 = run(11)
    v2, e2 = run(11)
    v3, _ = run(12)
    assert np.array_equal(v1, v2) and e1 == e2
    assert not np.array_equal(v1, v3)


def test_unknown_scenario_names_the_known_ones():
    with pytest.raises(ValueError, match="fan.*roller.*sander.*spindle"):
        VirtualMachine("mixer")


def test_rigid_rotor_bounce_and_rocking_frequencies_match_their_closed_forms():
    # Symmetric rigid rotor on two equal springs k at +-L/2 from the CG: bounce w^2 = 2k/m,
    # rocking w^2 = 2k (L/2)^2 / I_t (elementary two-degree-of-freedom rigid body; e.g. Vance,
    # Zeidan and Murphy, Machinery Vibration and Rotordynamics, 2010, ch. 2 (from memory)).
    from runtrue.sim.rotor import RigidRotor, Support

    k = 2.0e6
    rotor = RigidRotor(
        mass_kg=40.0, transverse_inertia_kgm2=5.0, cg_mm=500.0, bearing_a_mm=0.0, bearing_b_mm=1000.0,
        support_a=Support(k, k, 0.0, 0.0), support_b=Support(k, k, 0.0, 0.0),
    )
    mass, _, stiff = rotor.matrices("x")
    w2 = np.sort(np.linalg.eigvals(np.linalg.solve(mass, stiff)).real)
    assert w2 == pytest.approx(np.sort([2 * k / 40.0, 2 * k * 0.5**2 / 5.0]), rel=1e-12)
