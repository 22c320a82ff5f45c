"""Display text: forces, amounts, and the machine form's parsing."""

from __future__ import annotations

import math

import pytest

from runtrue.balancing.forces import force_at_speed_n as centrifugal_force_n
from runtrue.tui.format import amp_text, bar, force_text, time_left_text
from runtrue.tui.machine_form import FormError, fields_from_machine, machine_from_fields, parse_stock

FAN = {
    "name": "Boiler-house fan 2", "mass": "14", "speed": "1470", "rotation": "cw", "grade": "G6.3",
    "planes": "1", "p1_radius": "160", "p1_pos": "8", "p1_first": "0", "stock": "1x6 2x6 5x4",
    "pickups": "fan-end bearing",
}


def test_centrifugal_force_of_a_weight() -> None:
    # F = m r w^2 (Newton's second law, uniform circular motion): 10 g at 100 mm, 3000 rpm.
    omega = 2 * math.pi * 3000 / 60
    assert centrifugal_force_n(10, 100, 3000) == pytest.approx(0.010 * 0.100 * omega**2)
    assert centrifugal_force_n(10, 100, 3000) == pytest.approx(98.7, abs=0.05)
    assert force_text(98.7) == "99 N"
    assert force_text(25_000) == "25.0 kN"


def test_amplitudes_keep_three_significant_figures() -> None:
    assert amp_text(0.48213) == "0.482 g pk"  # never a bare "g", which reads as grams
    assert amp_text(0.0063) == "0.00630 g pk"
    assert amp_text(12.345) == "12.3 g pk"
    assert amp_text(math.nan) == "---"


def test_progress_bar_and_time_left() -> None:
    assert bar(0.5, 10).count("\N{FULL BLOCK}") == 5
    assert bar(2.0, 4).count("\N{FULL BLOCK}") == 4
    assert time_left_text(3.2) == "3 s"
    assert time_left_text(75) == "1 min 15 s"
    assert time_left_text(math.nan) == "--"


def test_machine_form_round_trip() -> None:
    m = machine_from_fields(FAN)
    assert m.rotor_mass_kg == 14 and m.speed_rpm == 1470 and m.rotation == "cw"
    assert m.planes[0].count == 8 and m.planes[0].radius_mm == 160
    assert [(s.mass_g, s.count) for s in m.stock] == [(1, 6), (2, 6), (5, 4)]
    again = machine_from_fields(fields_from_machine(m))
    assert again.to_dict() == m.to_dict()


def test_two_planes_groove_and_strip() -> None:
    values = dict(FAN, planes="2", p2_radius="95", p2_pos="any", p2_first="", stock="strip 0.8",
                  pickups="drive end; far end")
    m = machine_from_fields(values)
    assert m.n_planes == 2 and m.planes[1].continuous
    assert m.strip is not None and m.strip.grams_per_mm == 0.8
    assert [p.label for p in m.pickups] == ["drive end", "far end"]


@pytest.mark.parametrize(
    "field, value",
    [("mass", "heavy"), ("speed", "-5"), ("rotation", "left"), ("grade", "good"), ("p1_pos", "eight"),
     ("stock", "2 grams"), ("name", " ")],
)
def test_bad_field_is_named_with_advice(field: str, value: str) -> None:
    with pytest.raises(FormError) as err:
        machine_from_fields(dict(FAN, **{field: value}))
    assert err.value.field == field
    assert str(err.value)


def test_stock_syntax() -> None:
    assert parse_stock("") == ([], None)
    pieces, strip = parse_stock("0.5x10, 1x4")
    assert [(p.mass_g, p.count) for p in pieces] == [(0.5, 10), (1, 4)] and strip is None


def test_blocked_positions_and_stack_limit() -> None:
    m = machine_from_fields(dict(FAN, p1_blocked="3, 7", stack="3"))
    assert m.planes[0].excluded == [3, 7] and m.planes[0].max_pieces_per_position == 3
    assert machine_from_fields(fields_from_machine(m)).to_dict() == m.to_dict()
    with pytest.raises(FormError) as err:
        machine_from_fields(dict(FAN, p1_blocked="9"))
    assert err.value.field == "p1_blocked" and "1 to 8" in str(err.value)


def test_what_the_form_does_not_show_is_kept_from_the_machine() -> None:
    from runtrue.jobs.demo_machine import machine_for_scenario

    demo = machine_for_scenario("roller")
    again = machine_from_fields(fields_from_machine(demo), base=demo)
    assert again.to_dict() == demo.to_dict()


def test_static_couple_split_of_a_two_plane_correction() -> None:
    """U1 = S/2 + C, U2 = S/2 - C (ISO 21940-2 vocabulary; see runtrue.balancing.static_couple)."""
    from types import SimpleNamespace

    from runtrue.jobs import Weight
    from runtrue.tui.unbalance_split import static_couple_lines

    def plan(w1: Weight, w2: Weight) -> SimpleNamespace:
        return SimpleNamespace(planes=[SimpleNamespace(plane=1, correction=w1), SimpleNamespace(plane=2, correction=w2)])

    # equal weights at the same angle: purely static, 2 x 100 g·mm
    lines = static_couple_lines(plan(Weight(1, 1.0, 30.0, 100.0), Weight(2, 1.0, 30.0, 100.0)))
    assert lines[0] == "Correction: mostly static"
    assert lines[1] == "static 200 g·mm @ 30\N{DEGREE SIGN}"
    assert lines[2].startswith("couple \N{PLUS-MINUS SIGN}0")
    # equal and opposite: a pure couple of 150 g·mm, +C in plane 1 at 90 deg
    lines = static_couple_lines(plan(Weight(1, 1.5, 90.0, 100.0), Weight(2, 1.5, 270.0, 100.0)))
    assert lines[0] == "Correction: mostly couple"
    assert lines[2] == "couple \N{PLUS-MINUS SIGN}150 g·mm @ 90\N{DEGREE SIGN}"
    # different radii are taken as g·mm: 2 g at 50 mm and 1 g at 100 mm, same angle -> 200 g·mm static
    lines = static_couple_lines(plan(Weight(1, 2.0, 0.0, 50.0), Weight(2, 1.0, 0.0, 100.0)))
    assert lines[1] == "static 200 g·mm @ 0\N{DEGREE SIGN}"
    # one plane: nothing to split
    assert static_couple_lines(SimpleNamespace(planes=[SimpleNamespace(plane=1, correction=Weight(1, 1.0, 0.0, 100.0))])) == []
    # every line fits the runs screen's side pane
    assert all(len(line) <= 25 for line in lines)


def test_live_rows_of_an_amplitude_only_job_show_no_phase() -> None:
    from types import SimpleNamespace

    from runtrue.tui.screens.live import amplitude_lines, channel_rows

    ch = SimpleNamespace(amp_g=0.41, phase_deg=208.0, h2=0.02 + 0.01j, rms_g=0.3)
    reading = SimpleNamespace(speed_rpm=1470.0, channels=[ch])
    assert "208\N{DEGREE SIGN}" in channel_rows(reading)[2]
    assert "in mm/s rms" in channel_rows(reading)[0]  # the unit is named, mm/s rms by default
    row = channel_rows(reading, amplitude_only=True)[2]
    assert "208" not in row and "18.5" in row  # 0.41 g pk at 1470 rpm = 18.5 mm/s rms
    assert "0.410" in channel_rows(reading, amplitude_only=True, unit="g pk")[2]
    # earlier runs and the reading now on one scale: the largest gets the full bar
    lines = amplitude_lines([("R", [0.41]), ("T1", [0.205])], 0.82, 0, 1470.0, "g pk")
    assert "phase not used" in lines[1] and "g pk" in lines[1]
    assert lines[-1] == "now " + "\N{FULL BLOCK}" * 12 + " 0.820"
    assert lines[2] == "R   " + "\N{FULL BLOCK}" * 6 + "\N{LIGHT SHADE}" * 6 + " 0.410"


def test_a_noisy_reading_is_repeated_and_must_agree_within_its_scatter() -> None:
    from types import SimpleNamespace

    from runtrue.tui.screens.live import is_noisy, repeat_verdict

    def reading(z: complex, conf: float) -> SimpleNamespace:
        return SimpleNamespace(channels=[SimpleNamespace(mean=z, confidence_g=conf)])

    steady = reading(0.4 + 0j, 0.01)
    assert not is_noisy(steady)  # 95 % radius 2.5 % of the 1x
    first = reading(0.4 + 0j, 0.08)
    assert is_noisy(first)  # 20 %
    assert repeat_verdict(None, first) is None
    assert repeat_verdict(first, reading(0.45 + 0.02j, 0.08))[0] is True  # 0.054 apart, allowed 0.113
    ok, why = repeat_verdict(first, reading(0.2 + 0.2j, 0.08))
    assert not ok and "not repeating" in why


def test_the_grade_table_cites_the_standard_and_fits_the_picker() -> None:
    from runtrue.tui.grades import SOURCE, TYPICAL_GRADES

    assert "ISO 21940-11:2016, Table 1" in SOURCE and "memory" not in SOURCE
    grades = {g for g, _ in TYPICAL_GRADES}
    assert grades == {"G40", "G16", "G6.3", "G2.5", "G1", "G0.4"}
    assert any("fans" in text and g == "G6.3" for g, text in TYPICAL_GRADES)
    assert any("gas and steam turbines" in text and g == "G2.5" for g, text in TYPICAL_GRADES)
    assert all(len(f"{g:5} {text}") <= 70 for g, text in TYPICAL_GRADES)  # one line in the 76-wide picker


def test_every_machine_form_hint_fits_its_field_at_80_columns() -> None:
    from runtrue.tui.machine_form import FIELDS

    # 80 columns: 26 for the saved list, 21 for the label, padding: 29 characters are visible
    assert all(len(placeholder) <= 29 for _key, _label, placeholder in FIELDS)


def test_a_typed_unit_carries_its_detector() -> None:
    import math as m

    import pytest

    from runtrue.tui.screens.dialogs import parse_vib_unit

    assert parse_vib_unit("mm/s rms") == ("mm/s", pytest.approx(m.sqrt(2)))
    assert parse_vib_unit("g pk") == ("g", 1.0)
    assert parse_vib_unit("um pk-pk") == ("um", 0.5)
    assert parse_vib_unit("mm/s") == ("mm/s", 1.0)
    with pytest.raises(ValueError, match="mm/s rms"):
        parse_vib_unit("mm/s average")


def test_a_long_pickup_name_is_shown_whole_with_its_numbers_under_it() -> None:
    from types import SimpleNamespace

    from runtrue.tui.screens.live import channel_rows
    from runtrue.validation import MAX_LABEL_CHARS

    ch = SimpleNamespace(amp_g=0.41, phase_deg=208.0, h2=0.02 + 0.01j, rms_g=0.3)
    reading = SimpleNamespace(speed_rpm=1470.0, channels=[ch, ch])
    long_name = "fan-end bearing, horizontal, outboard"[:MAX_LABEL_CHARS]
    rows = channel_rows(reading, labels=[long_name, "motor DE"])
    assert rows[2] == long_name                      # whole, on a line of its own
    assert rows[3].split()[:2] == ["18.5", "208\N{DEGREE SIGN}"]  # its numbers under it
    assert rows[4].startswith("motor DE ") and "18.5" in rows[4]    # a short name keeps its column
    assert all(len(r) <= 46 for r in rows)           # the live screen's left pane at 80 columns
