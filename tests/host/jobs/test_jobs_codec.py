"""The one record codec: records written by the earlier hand-written converters read back as the
same objects and are written again byte for byte; every record survives a round trip; a record
from an older version takes the defaults of the fields added since; a damaged one says which
field is missing."""

from __future__ import annotations

import dataclasses
import json
import math
import re
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from runtrue import validation
from runtrue.jobs import model
from runtrue.jobs.codec import decode, encode
from runtrue.jobs.model import (
    ChannelValue,
    Machine,
    Pickup,
    PlaneSpec,
    RunReading,
    RunRecord,
    StockPiece,
    StoredInfluence,
    StripSpec,
    Weight,
)
from runtrue.readings.confidence import confidence_radius

FIXTURES = Path(__file__).resolve().parents[2] / "fixtures"
SAMPLES = json.loads((FIXTURES / "records_v1.json").read_text(encoding="utf-8"))


def _with_stored_id(obj: Any, text: str) -> Any:
    """``obj`` with the row id the sample had (ids live in the store's columns, not in the JSON)."""
    if not hasattr(obj, "id"):
        return obj
    ids = re.findall(r"\bid=(\d+|None)", text)
    return dataclasses.replace(obj, id=None if ids[-1] == "None" else int(ids[-1]))


def test_the_samples_cover_every_record_type() -> None:
    assert {s["type"] for s in SAMPLES} == {"PlaneSpec", "StockPiece", "StripSpec", "Pickup", "StoredInfluence",
                                           "Machine", "Weight", "ChannelValue", "RunReading", "RunRecord"}


@pytest.mark.parametrize("sample", SAMPLES, ids=lambda s: s["type"])
def test_a_record_written_by_the_earlier_converters_reads_back_as_the_same_object(sample: dict[str, Any]) -> None:
    cls = getattr(model, sample["type"])
    obj = _with_stored_id(cls.from_dict(sample["json"]), sample["repr"])
    assert repr(obj) == sample["repr"]
    assert json.dumps(encode(obj)) == json.dumps(sample["json"])  # same keys, same order, same numbers


def test_a_machine_saved_before_rated_speed_method_pickups_and_view_sides_takes_their_defaults() -> None:
    old = {"name": "Fan 2", "rotor_mass_kg": 20, "speed_rpm": 1470, "planes": [{"radius_mm": 160, "count": 8}]}
    m = Machine.from_dict(old, id=7)
    assert (m.id, m.rated_speed_rpm, m.method, m.rotation, m.grade) == (7, None, "mark", "cw", "G6.3")
    assert m.pickups == [Pickup("1")] and m.stock == [] and m.strip is None and m.influence is None
    assert m.planes[0].view_side == "drive" and m.planes[0].position_angles_deg()[1] == 45.0
    assert isinstance(m.rotor_mass_kg, float) and isinstance(m.planes[0].radius_mm, float)


def test_a_reading_without_front_end_note_or_warnings_is_stored_without_those_keys() -> None:
    r = RunReading(1470.0, (ChannelValue(0.1 + 0.2j),))
    assert "frontend_note" not in r.to_dict() and "warnings" not in r.to_dict()
    assert RunReading.from_dict(r.to_dict()) == r
    noted = dataclasses.replace(r, frontend_note="+2.0° band-pass", warnings=("hum near 2x",))
    assert noted.to_dict()["warnings"] == ["hum near 2x"] and RunReading.from_dict(noted.to_dict()) == noted


def test_an_empty_strip_or_influence_object_means_none() -> None:
    old = {"name": "Roll", "rotor_mass_kg": 9, "speed_rpm": 900, "planes": [{"radius_mm": 50}], "strip": {},
           "influence": None}
    m = Machine.from_dict(old)
    assert m.strip is None and m.influence is None and m.planes[0].continuous


def test_a_missing_field_is_named_and_a_wrong_shape_is_a_type_error() -> None:
    with pytest.raises(KeyError, match="speed_rpm"):
        Machine.from_dict({"name": "x", "rotor_mass_kg": 1.0, "planes": []})
    with pytest.raises(TypeError):
        Weight.from_dict([1, 2.0, 0.0, 10.0])  # type: ignore[arg-type]
    with pytest.raises(TypeError):
        ChannelValue.from_dict({"mean": "0.1"})
    with pytest.raises(ValueError, match="view side"):
        PlaneSpec.from_dict({"radius_mm": 10.0, "view_side": "top"})


def test_complex_numbers_are_stored_as_re_im_pairs() -> None:
    inf = StoredInfluence([[complex(1e-4, -2e-5)]], 980.0)
    assert inf.to_dict()["coefficients"] == [[[1e-4, -2e-5]]]
    assert ChannelValue(complex(0.3, -0.0), h2=0.01j).to_dict()["h2"] == [0.0, 0.01]


# -- round trip of generated records ---------------------------------------------------------------

def _floats(lo: float, hi: float) -> st.SearchStrategy[float]:
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False, allow_subnormal=False)


names = st.text(st.characters(blacklist_categories=("Cs",)), max_size=validation.MAX_LABEL_CHARS)
angles = _floats(-720.0, 720.0) | st.sampled_from([0.0, -0.0, 359.999999, 1e-300, 5e-324])
masses = _floats(validation.WEIGHT_MIN_G, validation.WEIGHT_MAX_G)
radii = _floats(validation.RADIUS_MIN_MM, validation.RADIUS_MAX_MM)
speeds = _floats(validation.SPEED_MIN_RPM, validation.SPEED_MAX_RPM)
amps = _floats(0.0, validation.AMPLITUDE_MAX)
complexes = st.builds(complex, _floats(-validation.AMPLITUDE_MAX, validation.AMPLITUDE_MAX),
                      _floats(-validation.AMPLITUDE_MAX, validation.AMPLITUDE_MAX))


@st.composite
def planes(draw: st.DrawFn) -> PlaneSpec:
    kind = draw(st.sampled_from(["count", "angles", "continuous", "unsaid"]))
    return PlaneSpec(
        draw(radii), name=draw(names),
        count=draw(st.integers(1, validation.MAX_POSITIONS)) if kind == "count" else None,
        first_angle_deg=draw(angles),
        angles_deg=draw(st.lists(angles, min_size=1, max_size=12)) if kind == "angles" else None,
        continuous=kind == "continuous",
        excluded=draw(st.lists(st.integers(1, 12), max_size=3, unique=True)),
        max_pieces_per_position=draw(st.none() | st.integers(1, validation.MAX_PIECES_PER_POSITION)),
        max_mass_per_position_g=draw(st.none() | masses),
        view_side=draw(st.sampled_from(model.VIEW_SIDES)),
    )


weights = st.builds(Weight, st.integers(1, validation.MAX_PLANES), masses | st.just(0.0), angles, radii, names,
                    st.lists(masses, max_size=4).map(tuple))
channels = st.builds(ChannelValue, complexes, amps, amps | st.just(math.inf), st.none() | complexes, st.none() | amps)
readings = st.builds(RunReading, speeds, st.lists(channels, min_size=1, max_size=validation.MAX_PICKUPS).map(tuple),
                     _floats(0.0, 1000.0), st.integers(0, validation.MAX_REVS), names, names,
                     st.lists(names, max_size=3).map(tuple))
influences = st.builds(StoredInfluence, st.lists(st.lists(complexes, min_size=1, max_size=2), min_size=1, max_size=3),
                       speeds, names, st.none() | st.integers(1, validation.MAX_JOB_ID))


@st.composite
def machines(draw: st.DrawFn) -> Machine:
    speed = draw(speeds)
    return Machine(
        draw(names.filter(str.strip)), draw(_floats(validation.ROTOR_MASS_MIN_KG, validation.ROTOR_MASS_MAX_KG)),
        speed, draw(st.lists(planes(), min_size=1, max_size=2)), rotation=draw(st.sampled_from(["cw", "ccw"])),
        grade=draw(st.sampled_from(["G0.4", "G2.5", "G6.3", "G40"])),
        pickups=draw(st.lists(st.builds(Pickup, names, angles), min_size=1, max_size=validation.MAX_PICKUPS)),
        stock=draw(st.lists(st.builds(StockPiece, masses, st.integers(0, validation.MAX_STOCK_COUNT)), max_size=4)),
        strip=draw(st.none() | st.builds(StripSpec, _floats(1e-3, 10.0), _floats(1.0, 50.0), _floats(0.1, 5.0))),
        influence=draw(st.none() | influences), notes=draw(st.text(max_size=200)),
        rated_speed_rpm=draw(st.none() | _floats(speed, validation.CALC_SPEED_MAX_RPM)),
        method=draw(st.sampled_from(model.METHODS)),
    )


runs = st.builds(RunRecord, st.integers(1, validation.MAX_JOB_ID), st.integers(1, validation.MAX_RUNS),
                 st.sampled_from(model.RUN_KINDS), st.just("2026-12-02T08:15:00Z"), readings,
                 st.lists(weights, max_size=4).map(tuple), names)


@given(st.one_of(planes(), weights, channels, readings, influences, machines(), runs,
                 st.builds(StripSpec, _floats(1e-3, 10.0)), st.builds(Pickup, names)))
def test_every_record_survives_the_json_round_trip(record: Any) -> None:
    text = json.dumps(encode(record))  # as the store writes it
    again = decode(type(record), json.loads(text))
    assert again == record
    assert json.dumps(encode(again)) == text


# -- a reading typed in by hand -----------------------------------------------------------------

@pytest.mark.parametrize("n_revs", [2, 5, 32, 400])
def test_a_typed_in_spread_has_the_readings_layers_confidence_radius(n_revs: int) -> None:
    r = RunReading.manual([0.41, 0.2], [207.0, 15.0], 1470.0, [0.002, 0.01], n_revs=n_revs)
    assert [c.confidence_g for c in r.channels] == [confidence_radius(0.002, n_revs), confidence_radius(0.01, n_revs)]
    assert r.n_revs == n_revs


def test_a_typed_in_spread_without_its_count_is_taken_over_many_revolutions() -> None:
    r = RunReading.manual([0.41], [207.0], 1470.0, [0.002])
    assert r.channels[0].confidence_g == pytest.approx(1.7308 * 0.002, rel=1e-4)
    assert r.channels[0].confidence_g == pytest.approx(confidence_radius(0.002, 10**9), rel=1e-5)
    assert RunReading.manual([0.41], [207.0], 1470.0).channels[0].confidence_g == 0.0
    with pytest.raises(ValueError, match="2 revolutions"):
        RunReading.manual([0.41], [207.0], 1470.0, [0.002], n_revs=1)
