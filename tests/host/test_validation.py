"""The shared limits: each refusal names the value, the range and what to do; values inside the
limits come back cleaned."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from runtrue import validation as v
from runtrue.jobs.demo_machine import machine_for_scenario
from runtrue.jobs.model import Weight
from runtrue.sim.scenarios import SCENARIOS


@pytest.mark.parametrize("value,fragment", [
    (1e30, "outside 0.01-100000 kg"), (0, "outside"), (-3, "outside"), ("nan", "finite"), ("heavy", "write a number"),
    (True, "must be a number"),
])
def test_an_implausible_rotor_mass_is_refused_with_the_range(value, fragment) -> None:
    with pytest.raises(v.ValidationError, match=fragment) as info:
        v.rotor_mass_kg(value)
    assert info.value.field == "mass" and "\n" not in str(info.value)


def test_a_rotor_mass_inside_the_limits_comes_back_as_a_number() -> None:
    assert v.rotor_mass_kg("14,5") == 14.5  # a decimal comma, as typed on many keyboards


@pytest.mark.parametrize("check,value", [(v.speed_rpm, 1e6), (v.speed_rpm, 10), (v.radius_mm, 0.5),
                                         (v.radius_mm, 1e9), (v.weight_g, 1e9), (v.weight_g, 0.0001)])
def test_speeds_radii_and_weights_outside_the_limits_are_refused(check, value) -> None:
    with pytest.raises(v.ValidationError, match="outside"):
        check(value)


def test_a_weight_heavier_than_30_percent_of_the_rotor_is_refused() -> None:
    assert v.weight_g(100, rotor_mass_kg=1.0) == 100
    with pytest.raises(v.ValidationError, match="30% of the rotor"):
        v.weight_g(400, rotor_mass_kg=1.0)


def test_whole_numbers_say_which_bound_was_crossed() -> None:
    with pytest.raises(v.ValidationError, match="at least 2"):
        v.revs("1")
    with pytest.raises(v.ValidationError, match=f"at most {v.MAX_REVS}"):
        v.revs("100000000000")
    with pytest.raises(v.ValidationError, match="whole number"):
        v.revs("2.5")
    with pytest.raises(v.ValidationError, match="job number"):
        v.job_id(str(2**64))


@pytest.mark.parametrize("name", sorted(SCENARIOS))
def test_every_demo_machine_is_inside_the_limits(name: str) -> None:
    v.check_machine(machine_for_scenario(name))


def test_a_machine_with_an_absurd_field_names_the_form_field() -> None:
    m = machine_for_scenario("fan")
    m.rotor_mass_kg = 1e30
    with pytest.raises(v.ValidationError) as info:
        v.check_machine(m)
    assert info.value.field == "mass"
    m = machine_for_scenario("fan")
    m.pickups[0].label = "x" * 200
    with pytest.raises(v.ValidationError, match="keep it to 40") as info:
        v.check_machine(m)
    assert info.value.field == "pickups"


def test_a_correction_far_beyond_the_trial_is_refused_as_a_trial_that_changed_nothing() -> None:
    v.check_correction_plausible(50 * 120, 10 * 120, plane=1)  # 5 x the trial: an ordinary job
    with pytest.raises(v.ValidationError, match="barely changed"):
        v.check_correction_plausible(2.1e17, 15 * 120, plane=1)


def test_a_weight_record_is_checked_field_by_field() -> None:
    v.check_weight(Weight(1, 12.0, 45.0, 120.0))
    with pytest.raises(v.ValidationError, match="plane"):
        v.check_weight(Weight(7, 12.0, 45.0, 120.0), n_planes=2)


@pytest.mark.slow
@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.one_of(st.floats(), st.integers(), st.text(max_size=12), st.booleans(), st.none()))
def test_any_value_is_either_a_finite_number_in_range_or_a_one_line_refusal(value) -> None:
    try:
        x = v.rotor_mass_kg(value)
    except v.ValidationError as exc:
        assert "\n" not in str(exc) and str(exc)
    else:
        assert math.isfinite(x) and v.ROTOR_MASS_MIN_KG <= x <= v.ROTOR_MASS_MAX_KG
