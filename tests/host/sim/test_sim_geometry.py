"""The virtual machine's geometry: weights, phase lag, rotation direction, sensor angles.

The rule under test is runtrue's phase convention: a weight at theta (from the mark, against
rotation) adds theta to the phase lag of its effect, whatever the rotation direction and the
pickup and reference-sensor angles.  The simulator is built from the physical geometry; these
tests check that the convention comes out of it, from the sampled signals themselves.
"""

from __future__ import annotations

import cmath
import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sim_testkit import fit_1x, quiet, record

from runtrue.sim.frontend import lowpass_response
from runtrue.sim.machine import VirtualMachine
from runtrue.sim.rotor import support_for


def _lag_deg(z: complex) -> float:
    return math.degrees(cmath.phase(z)) % 360.0


def _angle_diff_deg(a: float, b: float) -> float:
    return (a - b + 180.0) % 360.0 - 180.0


def _effect_from_signals(sc, plane: int, angle_deg: float) -> complex:
    """Effect of a 20 g weight at radius 100 mm, from recorded signals (no meter involved)."""
    m = VirtualMachine(sc, seed=3)
    vals, t, edges = record(m, 0.25)
    rising = np.array([e.t_s for e in edges if e.rising])
    before = fit_1x(vals[:, 0], t, rising)
    m.add_weight(plane, 20.0, angle_deg, 100.0)
    vals, t, edges = record(m, 0.25)
    rising = np.array([e.t_s for e in edges if e.rising])
    return fit_1x(vals[:, 0], t, rising) - before


@pytest.mark.parametrize("rotation", ["cw", "ccw"])
@pytest.mark.parametrize("pickup_deg,ref_deg", [(0.0, 90.0), (45.0, 0.0), (200.0, 300.0)])
@pytest.mark.parametrize("theta_deg", [30.0, 135.0, 270.0])
def test_weight_at_theta_lags_a_weight_at_the_mark_by_theta(rotation, pickup_deg, ref_deg, theta_deg):
    base = quiet("fan", rotation=rotation, ref_angle_deg=ref_deg)
    sc = dataclasses.replace(base, pickups=(dataclasses.replace(base.pickups[0], angle_deg=pickup_deg),))
    at_mark = _effect_from_signals(sc, 0, 0.0)
    at_theta = _effect_from_signals(sc, 0, theta_deg)
    assert abs(at_theta) == pytest.approx(abs(at_mark), rel=1e-3)
    shift = (_lag_deg(at_theta) - _lag_deg(at_mark)) % 360.0
    assert _angle_diff_deg(shift, theta_deg) == pytest.approx(0.0, abs=0.2)


def _isotropic_static_rotor(natural_hz: float):
    """Symmetric rotor, isotropic lightly damped supports, one plane through the CG."""
    sc = quiet("roller")
    sup = support_for(19.0, natural_hz, 0.001)
    rotor = dataclasses.replace(sc.rotor, support_a=sup, support_b=sup, cg_mm=650.0)
    plane = dataclasses.replace(sc.planes[0], axial_mm=650.0, initial_unbalance_gmm=0j)
    fe = dataclasses.replace(sc.front_end, lowpass_a1_s=0.0, lowpass_a2_s2=0.0, ref_delay_us=0.0)
    return dataclasses.replace(sc, rotor=rotor, planes=(plane,), front_end=fe)


@pytest.mark.parametrize("rotation", ["cw", "ccw"])
@pytest.mark.parametrize("pickup_deg,ref_deg", [(0.0, 90.0), (120.0, 10.0)])
def test_below_resonance_the_peak_comes_when_the_heavy_spot_points_away_from_the_pickup(
    rotation, pickup_deg, ref_deg
):
    # Stiffness-controlled (support natural frequency 10x running speed): displacement follows
    # the force, acceleration = -Omega^2 x displacement, so the acceleration along the pickup's
    # axis peaks when the heavy spot points directly away from the pickup.  The heavy spot at
    # rotor angle theta sits at lab angle ref + s(Theta - theta); it points away from the pickup
    # (lab angle pickup + 180) at Theta = theta + s(pickup + 180 - ref).  (Elementary rigid-body
    # kinematics; the ~0.1 deg from the damping is inside the tolerance.)
    sc = _isotropic_static_rotor(natural_hz=163.0)
    sc = dataclasses.replace(sc, rotation=rotation, ref_angle_deg=ref_deg,
                             pickups=(dataclasses.replace(sc.pickups[0], angle_deg=pickup_deg),))
    theta = 70.0
    m = VirtualMachine(sc, seed=1)
    m.add_weight(0, 10.0, theta, 95.0)
    vals, t, edges = record(m, 0.4)
    lag = _lag_deg(fit_1x(vals[:, 0], t, np.array([e.t_s for e in edges if e.rising])))
    s = 1 if rotation == "ccw" else -1
    predicted = (theta + s * (pickup_deg + 180.0 - ref_deg)) % 360.0
    assert _angle_diff_deg(lag, predicted) == pytest.approx(0.0, abs=0.5)


@pytest.mark.parametrize("rotation", ["cw", "ccw"])
def test_far_above_resonance_the_peak_comes_when_the_heavy_spot_points_at_the_pickup(rotation):
    # Mass-controlled (support natural frequency a tenth of running speed): the rotor moves
    # against the force, so its acceleration is along the force: peak when the heavy spot
    # points at the pickup, Theta = theta + s(pickup - ref).
    sc = _isotropic_static_rotor(natural_hz=1.6)
    sc = dataclasses.replace(sc, rotation=rotation, ref_angle_deg=250.0,
                             pickups=(dataclasses.replace(sc.pickups[0], angle_deg=30.0),))
    m = VirtualMachine(sc, seed=1)
    m.add_weight(0, 10.0, 200.0, 95.0)
    vals, t, edges = record(m, 0.4)
    lag = _lag_deg(fit_1x(vals[:, 0], t, np.array([e.t_s for e in edges if e.rising])))
    s = 1 if rotation == "ccw" else -1
    assert _angle_diff_deg(lag, (200.0 + s * (30.0 - 250.0)) % 360.0) == pytest.approx(0.0, abs=0.5)
    # and the free-rotor amplitude is U Omega^2 / M (rigid body, no support force)
    omega = 2 * math.pi * sc.speed_rpm / 60
    free_g = 10.0 * 95.0 * 1e-6 * omega**2 / sc.rotor.mass_kg / 9.80665
    assert abs(m.expected_1x()[0]) == pytest.approx(free_g, rel=0.02)


def test_a_weight_opposite_the_heavy_spot_with_the_right_size_cancels_the_vibration():
    sc = quiet("fan")
    m = VirtualMachine(sc, seed=5)
    u0 = sc.planes[0].initial_unbalance_gmm
    radius = sc.planes[0].radius_mm
    before = abs(m.expected_1x()[0])
    m.add_weight(0, abs(u0) / radius, math.degrees(cmath.phase(u0)) + 180.0, radius)
    assert m.true_residual_unbalance_gmm()[0] == pytest.approx(0.0, abs=1e-9)
    vals, t, edges = record(m, 0.5)
    after = abs(fit_1x(vals[:, 0], t, np.array([e.t_s for e in edges if e.rising])))
    assert before > 0.1
    assert after < 1e-6 * before


def test_the_heavy_spot_is_found_from_the_phase_as_a_technician_would():
    # Field procedure: the effect of a weight at 0 deg gives the influence coefficient; the
    # heavy spot's angle is then lag(reading) - lag(coefficient).  (Single-plane balancing,
    # common practice.)
    sc = quiet("sander")
    m = VirtualMachine(sc, seed=2)
    reading = m.expected_1x()[0]
    wid = m.add_weight(0, 5.0, 0.0, sc.planes[0].radius_mm)
    coeff = (m.expected_1x()[0] - reading) / (5.0 * sc.planes[0].radius_mm)
    m.remove_weight(wid)
    heavy = reading / coeff
    u0 = sc.planes[0].initial_unbalance_gmm
    assert abs(heavy - u0) < 1e-6 * abs(u0)


def test_falling_edge_reference_moves_every_lag_back_by_the_mark_width():
    sc = quiet("fan")
    m = VirtualMachine(sc, seed=4)
    rising = m.expected_1x()[0]
    m.set_active_edge(True)
    falling = m.expected_1x()[0]
    assert _angle_diff_deg(_lag_deg(rising), _lag_deg(falling)) == pytest.approx(sc.mark_width_deg, abs=1e-6)
    vals, t, edges = record(m, 0.5)
    measured = fit_1x(vals[:, 0], t, np.array([e.t_s for e in edges if not e.rising]))
    fe = sc.front_end  # the signal went through the filter; the truth has it taken out
    filtered = falling * np.conj(lowpass_response(sc.speed_rpm / 60.0, fe.lowpass_a1_s, fe.lowpass_a2_s2))
    assert abs(measured - filtered) < 1e-4 * abs(falling)


def test_weights_can_be_removed_and_unknown_ids_are_refused():
    m = VirtualMachine("fan", seed=1)
    before = m.expected_1x()[0]
    wid = m.add_weight(0, 10.0, 45.0, 160.0)
    assert m.expected_1x()[0] != before
    m.remove_weight(wid)
    assert m.expected_1x()[0] == before
    with pytest.raises(ValueError, match="no weight with id"):
        m.remove_weight(wid)
    with pytest.raises(ValueError, match="plane must be 0..0"):
        m.add_weight(1, 10.0, 0.0, 100.0)
    with pytest.raises(ValueError, match="mass_g"):
        m.add_weight(0, -1.0, 0.0, 100.0)


@pytest.mark.slow
@settings(max_examples=60, deadline=None)
@given(
    rotation=st.sampled_from(["cw", "ccw"]),
    pickup_deg=st.floats(0.0, 360.0),
    ref_deg=st.floats(0.0, 360.0),
    theta_deg=st.floats(0.0, 360.0),
    anisotropy=st.floats(0.0, 0.5),
    speed_factor=st.floats(0.3, 3.0),
    plane=st.integers(0, 1),
)
def test_any_geometry_weight_angle_adds_to_lag_on_every_pickup(
    rotation, pickup_deg, ref_deg, theta_deg, anisotropy, speed_factor, plane
):
    # Property form of the convention, over the two-plane roller with arbitrary sensor angles,
    # anisotropic supports and speed (noise-free expected_1x, which the signal tests above tie
    # to the sampled signals).
    sc = quiet("roller", rotation=rotation, ref_angle_deg=ref_deg)
    rotor = dataclasses.replace(
        sc.rotor,
        support_a=support_for(19.0, 21.0, 0.07, anisotropy=anisotropy),
        support_b=support_for(19.0, 24.0, 0.07, anisotropy=anisotropy),
    )
    pickups = (dataclasses.replace(sc.pickups[0], angle_deg=pickup_deg),
               dataclasses.replace(sc.pickups[1], angle_deg=(pickup_deg + 90.0) % 360.0))
    m = VirtualMachine(dataclasses.replace(sc, rotor=rotor, pickups=pickups), seed=1)
    m.set_speed_rpm(sc.speed_rpm * speed_factor)
    base = np.array(m.expected_1x())
    w = m.add_weight(plane, 10.0, 0.0, 95.0)
    at_mark = np.array(m.expected_1x()) - base
    m.remove_weight(w)
    m.add_weight(plane, 10.0, theta_deg, 95.0)
    at_theta = np.array(m.expected_1x()) - base
    assert np.allclose(at_theta, at_mark * np.exp(1j * math.radians(theta_deg)), rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("rotation,shift_deg", [("ccw", 90.0), ("cw", -90.0)])
def test_on_isotropic_supports_a_pickup_90_deg_further_round_reads_90_deg_apart(rotation, shift_deg):
    # Field check (common practice): on round (isotropic) supports the vertical reading lags the
    # horizontal one by 90 deg when the rotor turns from horizontal towards vertical, and leads
    # it by 90 deg when it turns the other way.
    sc = _isotropic_static_rotor(natural_hz=10.0)
    pk = sc.pickups[0]
    sc = dataclasses.replace(sc, rotation=rotation,
                             pickups=(dataclasses.replace(pk, angle_deg=0.0), dataclasses.replace(pk, angle_deg=90.0)))
    m = VirtualMachine(sc, seed=1)
    m.add_weight(0, 10.0, 0.0, 95.0)
    horizontal, vertical = m.expected_1x()
    assert abs(vertical) == pytest.approx(abs(horizontal), rel=1e-9)
    assert _angle_diff_deg(_lag_deg(vertical), _lag_deg(horizontal)) == pytest.approx(shift_deg, abs=1e-6)
