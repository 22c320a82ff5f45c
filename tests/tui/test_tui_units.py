"""Display units: metric (default) or imperial, toggled on the machine screen (F8); the job and
the database stay metric.  Exact factors: 1 oz = 28.349523125 g, 1 in = 25.4 mm,
1 lbf = 4.4482216152605 N (NIST SP 811 (2008), Appendix B (from memory); exact by the 1959
international yard and pound agreement)."""

from __future__ import annotations

from types import SimpleNamespace

import pytest
from tui_helpers import FAN_FIELDS, fill, screen_text

from runtrue.balancing import g_to_oz, gmm_to_ozin, mm_to_in, ozin_to_gmm
from runtrue.tui import format as metric_format
from runtrue.tui import make_app
from runtrue.tui.units_text import (
    IMPERIAL,
    METRIC,
    force_text,
    mass_text,
    other_units,
    radius_text,
    unbalance_text,
)

SIZE = (80, 24)


def test_one_ounce_and_one_inch_show_as_their_gram_and_millimetre_values() -> None:
    # NIST SP 811 (2008), Appendix B (from memory): 1 oz = 28.349523125 g, 1 in = 25.4 mm
    assert mass_text(28.349523125, IMPERIAL) == "1.00 oz"
    assert radius_text(25.4, IMPERIAL) == "1.00 in"
    assert unbalance_text(28.349523125 * 25.4, IMPERIAL) == "1.00 oz·in"
    assert g_to_oz(28.349523125) == pytest.approx(1.0, rel=1e-15)
    assert gmm_to_ozin(720.077887375) == pytest.approx(1.0, rel=1e-12)


def test_imperial_text_uses_the_engine_conversions() -> None:
    for mass_g in (0.7, 12.0, 150.0, 3400.0):
        shown = float(mass_text(mass_g, IMPERIAL).removesuffix(" oz"))
        assert shown == pytest.approx(g_to_oz(mass_g), rel=5e-3)
    for radius_mm in (50.0, 160.0, 612.0):
        shown = float(radius_text(radius_mm, IMPERIAL).removesuffix(" in"))
        assert shown == pytest.approx(mm_to_in(radius_mm), abs=0.005)
    for u_gmm in (3.2, 87.0, 1880.0, 2.0e6):
        shown = float(unbalance_text(u_gmm, IMPERIAL).removesuffix(" oz·in"))
        assert ozin_to_gmm(shown) == pytest.approx(u_gmm, rel=5e-3)


def test_small_masses_keep_three_significant_figures_without_exponent() -> None:
    assert mass_text(1.0, IMPERIAL) == "0.0353 oz"  # 1 g = 0.035274 oz
    assert unbalance_text(45.0, IMPERIAL) == "0.0625 oz·in"  # 45 / 720.078 = 0.06249


def test_forces_stay_in_newtons_with_pounds_force_beside_them() -> None:
    assert force_text(850.0, METRIC) == "850 N"
    assert force_text(850.0, IMPERIAL) == "850 N (191 lbf)"  # 850 / 4.44822 = 191.1
    assert force_text(44_482.216152605, IMPERIAL) == "44.5 kN (10000 lbf)"


def test_metric_text_is_what_the_screens_showed_before() -> None:
    for mass_g in (0.7, 12.0, 150.0):
        assert mass_text(mass_g, METRIC) == metric_format.mass_text(mass_g)
    assert radius_text(160.0, METRIC) == "160 mm"
    assert unbalance_text(4.56, METRIC) == "4.56 g·mm"
    assert unbalance_text(1880.0, METRIC) == "1880 g·mm"
    assert unbalance_text(12_300.0, METRIC) == "12.3 kg·mm"


def test_toggle_alternates_and_unknown_units_are_refused() -> None:
    assert other_units(METRIC) == IMPERIAL and other_units(IMPERIAL) == METRIC
    with pytest.raises(ValueError, match="metric"):
        mass_text(1.0, "furlongs")


def test_result_lines_in_imperial_say_oz_in_and_lbf() -> None:
    from runtrue.tui.result_text import plane_lines, weights_lines

    weight = SimpleNamespace(plane=1, mass_g=28.349523125, angle_deg=45.0, radius_mm=254.0, label="")
    result = SimpleNamespace(
        method="", residual_unbalance_gmm=[72.0077887375], residual_uncertainty_gmm=None,
        permissible_unbalance_gmm=[144.015577475], weights_on=[weight], speed_rpm=1500.0,
    )
    assert plane_lines(result, IMPERIAL) == ["plane 1: 0.100 oz·in of 0.200 oz·in allowed (0.50x) ok"]
    (line,) = weights_lines(result, IMPERIAL)
    assert line.startswith("plane 1: 1.00 oz at 45.0\N{DEGREE SIGN}, r 10.00 in, ")
    assert line.endswith(" N (40 lbf)")  # 0.02835 kg x 0.254 m x (157.08 /s)^2 = 177.7 N


async def test_imperial_toggle_on_the_machine_screen_shows_oz_and_in_on_the_fitting_screen() -> None:
    app = make_app("manual")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        fill(app.screen, FAN_FIELDS)
        await pilot.pause()
        assert "g·mm" in screen_text(app) and app.units == METRIC
        await pilot.press("f8")
        await pilot.pause()
        app.clear_notifications()
        await pilot.pause()
        text = screen_text(app)
        assert app.units == IMPERIAL
        assert "oz·in" in text and "g·mm" not in text
        footer = text.splitlines()[-1]
        assert "f8 Units" in footer and "f1 Help" in footer and "^q Quit" in footer  # all keys within 80 columns
        await pilot.press("f2")
        await pilot.pause()
        job = app.session.job
        assert job is not None and job.machine.planes[0].radius_mm == 160.0  # the job stays metric
        await pilot.press("r")
        fill(app.screen, {"speed": "1470", "amp0": "0.412", "phase0": "208"}, prefix="#")
        await pilot.press("enter")
        await pilot.pause()
        trial = job.suggested_trial()
        # the runs screen repeats the job's (metric) instructions' weights in oz and in
        assert f"In oz and in, fit: plane 1 {mass_text(trial.mass_g, IMPERIAL)} at" in app.screen.todo_text
        await pilot.press("f")
        await pilot.pause()
        text = screen_text(app)
        shown = mass_text(trial.mass_g, IMPERIAL)
        assert f"FIT {shown}" in text
        assert float(shown.removesuffix(" oz")) == pytest.approx(g_to_oz(trial.mass_g), rel=5e-3)
        assert "r 6.30 in" in text  # 160 mm / 25.4
        assert "lbf" in text
        assert " g\n" not in text and " mm" not in text


def test_help_says_where_the_units_switch_is_and_that_the_job_stays_metric() -> None:
    from runtrue.tui.screens.help import help_text

    text = " ".join(help_text().split())
    assert "F8 on the machine screen" in text and "oz, in, oz·in" in text and "stay metric" in text


async def test_the_vibration_unit_chosen_is_kept_for_the_next_session(tmp_path) -> None:
    from tui_helpers import key, wait_until

    from runtrue.tui import make_app

    db = str(tmp_path / "jobs.sqlite")
    app = make_app("sim:fan", seed=1, realtime=False, post_interval_s=0.05, store_path=db)
    async with app.run_test(size=(80, 24)) as pilot:
        await wait_until(pilot, lambda: app.session.meter_state == "connected", what="connected")
        assert app.vib_unit == "mm/s rms"                       # the default
        await key(pilot, "l")
        await key(pilot, "u")
        await wait_until(pilot, lambda: app.vib_unit == "mm/s pk", what="unit changed")
    again = make_app("sim:fan", seed=1, realtime=False, store_path=db)
    assert again.vib_unit == "mm/s pk"                         # remembered beside the job database
    (tmp_path / "settings.json").write_text("{not json", encoding="utf-8")
    assert make_app("sim:fan", store_path=db).vib_unit == "mm/s rms"   # a spoilt file: the default
    assert make_app("sim:fan", store_path=":memory:").vib_unit == "mm/s rms"
