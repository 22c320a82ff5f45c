"""Is it unbalance, how severe, near a resonance? End to end through the simulator: the real
firmware behind SimTransport, the raw capture, the host's diagnosis."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from runtrue.device import open_meter
from runtrue.diagnosis.acquire import analyse_speed_run, record_speed_change, take_diagnosis
from runtrue.diagnosis.zones import ZONE_TABLES

ROOT = Path(__file__).resolve().parents[3]
SCEN = ROOT / "examples" / "scenarios"


def _client(port: str, seed: int = 1, mask: int | None = None):
    c = open_meter(port, seed=seed)
    info = c.identify()
    if mask is not None:
        c.set_channels(mask & ((1 << info.channels_max) - 1))
    return c


def test_an_unbalanced_fan_is_called_unbalance() -> None:
    with _client("sim:fan") as c:
        d = take_diagnosis(c, revs=30)
    assert d.verdict.unbalance, d.verdict.checks
    ch = d.channels[0]
    assert ch.content is not None and ch.content.one_x_share > 0.9
    assert ch.severity_from == "capture"


@pytest.mark.slow
def test_a_misaligned_pump_is_not_called_unbalance_and_alignment_is_named() -> None:
    with _client(f"sim:{SCEN / 'misaligned_pump.toml'}", mask=3) as c:
        d = take_diagnosis(c, revs=30)
    assert not d.verdict.unbalance
    assert any("alignment" in t for t in d.verdict.checks)
    assert "balance anyway" in d.to_dict()["go_on"]


@pytest.mark.slow
def test_a_loose_pedestal_names_looseness() -> None:
    with _client(f"sim:{SCEN / 'loose_pedestal.toml'}") as c:
        d = take_diagnosis(c, revs=30)
    assert not d.verdict.unbalance
    assert any("looseness" in t for t in d.verdict.checks)


@pytest.mark.slow
def test_two_pickups_on_one_bearing_very_unequal_point_at_a_resonance() -> None:
    with _client(f"sim:{SCEN / 'resonant_fan.toml'}", mask=3) as c:
        d = take_diagnosis(c, revs=30)
    assert d.pair == (0, 1)
    assert not d.verdict.unbalance
    assert any("resonance" in t for t in d.verdict.checks)


@pytest.mark.slow
def test_a_resonance_10_percent_above_the_running_speed_gets_the_warning() -> None:
    with _client(f"sim:{SCEN / 'resonant_fan.toml'}", mask=3) as c:
        run = record_speed_change(c, from_rpm=1900, to_rpm=1000, rate_rpm_per_s=150)
        running = c.transport.machine.scenario.speed_rpm
    a = analyse_speed_run(run, running)
    res = a.resonances[0]
    assert len(res) == 1
    # the frame's horizontal natural frequency is 27.1 Hz (1626 rpm), damping ratio 0.04
    assert res[0].speed_rpm == pytest.approx(1626, rel=0.02)
    assert res[0].damping_ratio == pytest.approx(0.04, abs=0.012)
    assert len(a.warnings) == 1 and "10 % above the balancing speed" in a.warnings[0]


@pytest.mark.slow
def test_the_fan_coasts_through_its_resonances_far_below_running_speed_without_a_warning() -> None:
    with _client("sim:fan") as c:
        run = record_speed_change(c, to_rpm=350, rate_rpm_per_s=250)
    a = analyse_speed_run(run, 1470)
    assert any(a.resonances.values())
    assert all(r.speed_rpm < 0.85 * 1470 for rs in a.resonances.values() for r in rs)
    assert a.warnings == []


@pytest.mark.slow
def test_severity_zone_falls_after_balancing_the_simulated_fan() -> None:
    with _client("sim:fan") as c:
        before = take_diagnosis(c, revs=20)
        m = c.transport.machine
        u = m.unbalance_gmm()[0]
        r = m.scenario.planes[0].radius_mm
        m.add_weight(0, 0.95 * abs(u) / r, math.degrees(np.angle(-u)), r)   # 95 % corrected
        c.discard_revolutions()
        after = take_diagnosis(c, revs=20)
    vb, va = before.channels[0].severity, after.channels[0].severity
    assert va.velocity_rms_mm_s < 0.3 * vb.velocity_rms_mm_s
    assert "ABCD".index(va.zone) < "ABCD".index(vb.zone)
    assert va.zone == ZONE_TABLES["class-I"].zone(va.velocity_rms_mm_s)


@pytest.mark.slow
def test_raw_capture_in_g_matches_the_meters_1x_and_its_edges_give_the_speed() -> None:
    with _client("sim:roller", mask=3) as c:
        c.start()
        revs = c.revolutions(20, usable_only=True)
        cap = c.capture(4000)
    assert cap.samples_g.shape == (2, 4000) and cap.channels == [0, 1]
    speed = float(np.mean([r.speed_rpm for r in revs]))
    assert cap.speed_rpm() == pytest.approx(speed, rel=0.01)
    for row in range(2):
        x = cap.samples_g[row]
        # least-squares 1x over whole revolutions between the first and last edges
        e = cap.edges_samples[(cap.edges_samples >= 0) & (cap.edges_samples < 4000)]
        i = np.arange(int(math.ceil(e[0])), int(e[-1]))
        phi = 2 * np.pi * np.interp(i, e, np.arange(len(e)))
        a = np.column_stack([np.cos(phi), np.sin(phi), np.ones_like(phi)])
        coef = np.linalg.lstsq(a, x[i], rcond=None)[0]
        one_cap = abs(complex(coef[0], coef[1]))
        one_rev = abs(np.mean([r.h1[row] for r in revs]))
        # the meter's 1x has the front end's gain divided out; the capture does not (< 1 % at 16 Hz)
        assert one_cap == pytest.approx(one_rev, rel=0.03)


@pytest.mark.slow
def test_a_linear_machine_passes_the_linearity_check_with_a_second_weight() -> None:
    import cmath

    from runtrue.diagnosis.verdict import predicted_after_weight

    def one_x(c) -> complex:
        c.discard_revolutions()
        return complex(np.mean([r.h1[0] for r in c.revolutions(40, usable_only=True)]))

    with _client("sim:fan", seed=3) as c:
        c.start()
        m = c.transport.machine
        r = m.scenario.planes[0].radius_mm
        ref = one_x(c)
        w1 = m.add_weight(0, 20.0, 90.0, r)
        t1 = one_x(c)
        m.remove_weight(w1)
        m.add_weight(0, 35.0, 200.0, r)
        measured = one_x(c)
        expected = predicted_after_weight(ref, t1, 20.0 * r * cmath.exp(1j * math.radians(90.0)),
                                          35.0 * r * cmath.exp(1j * math.radians(200.0)))
        d = take_diagnosis(c, revs=20, capture_frames=None, linearity=(ref, expected, measured))
    lin = next(f for f in d.verdict.findings if f.name == "linear response")
    assert lin.ok and lin.value < 0.1


@pytest.mark.slow
def test_ctrl_c_ends_a_recording_and_keeps_what_was_recorded() -> None:
    with _client("sim:fan") as c:
        seen: list[float] = []

        def progress(speed_rpm: float) -> None:
            seen.append(speed_rpm)
            if len(seen) == 40:
                raise KeyboardInterrupt

        run = record_speed_change(c, to_rpm=300, rate_rpm_per_s=200, on_rev=progress)
    assert run.interrupted and len(run.speed_rpm) == 40
    assert analyse_speed_run(run, 1470).to_dict()["interrupted"] is True
