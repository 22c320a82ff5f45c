"""One rule for which revolutions count, used by measure, the live screen, the jobs' client calls
and the average: a first revolution that spans a missed pulse never gets in."""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from readings_revs import make_revs

from runtrue.cli import main
from runtrue.device import MeterClient
from runtrue.protocol.admit import counts, why_left_out
from runtrue.protocol.messages import FLAG_CLIPPED, FLAG_FIRST, FLAG_MISSING_PULSE, FLAG_SPEED_JUMP
from runtrue.readings import phasor, vector_average
from runtrue.sim import scenarios
from runtrue.sim.transport import SimTransport
from runtrue.tui.live_state import LiveState


def test_first_revolution_never_counts_even_with_no_other_flag() -> None:
    rng = np.random.default_rng(3)
    revs = make_revs([phasor(0.2, 40.0)], 6, 0.0, rng, flags=[FLAG_FIRST, FLAG_SPEED_JUMP, 0, 0, 0, FLAG_CLIPPED])
    assert [counts(r) for r in revs] == [False, False, True, True, True, False]
    assert why_left_out(revs[0]) == ["first"]
    assert why_left_out(revs[1]) == ["speed jump"]
    assert why_left_out(revs[2]) == []
    assert not counts(dataclasses.replace(revs[2], flags=FLAG_MISSING_PULSE | FLAG_FIRST))


def test_vector_average_leaves_the_first_revolution_out() -> None:
    rng = np.random.default_rng(4)
    revs = make_revs([phasor(0.2, 40.0)], 5, 0.0, rng, flags=[FLAG_FIRST, 0, 0, 0, 0])
    revs[0] = dataclasses.replace(revs[0], h1=[phasor(5.0, 200.0)], period_us=2 * revs[0].period_us)
    reading = vector_average(revs)
    assert reading.n_revs == 4 and reading.n_rejected == 1
    assert reading.channels[0].amp_g == pytest.approx(0.2)
    assert reading.speed_rpm == pytest.approx(3000.0)


def _fan_missing_its_second_mark() -> scenarios.Scenario:
    """The fan with a clean reference except the second mark passage after switching on: the
    meter's first revolution spans two turns and can only be flagged FIRST."""
    return dataclasses.replace(scenarios.SCENARIOS["fan"], glitch_per_rev=0.0, missed_per_rev=0.0, missed_marks=(1,))


@pytest.mark.slow
def test_simulated_first_revolution_spans_the_missed_pulse_and_jobs_skip_it() -> None:
    transport = SimTransport(_fan_missing_its_second_mark(), seed=2)
    client = MeterClient(transport, transport.name)
    client.identify()
    client.start()
    first = client.read_revolution(5.0)
    assert first is not None and first.flags & FLAG_FIRST and first.usable  # the meter cannot tell
    assert first.speed_rpm == pytest.approx(1470 / 2, rel=0.02)  # two turns long
    assert not counts(first)
    client.discard_revolutions()
    client.stop()
    # the jobs' path: MeterClient.revolutions(usable_only=True) right after START
    client.start()
    revs = client.revolutions(10, usable_only=True)
    assert all(counts(r) for r in revs) and not any(r.flags & FLAG_FIRST for r in revs)


def test_live_screen_refuses_the_first_revolution() -> None:
    transport = SimTransport(_fan_missing_its_second_mark(), seed=2)
    client = MeterClient(transport, transport.name)
    client.identify()
    client.start()
    revs = [client.read_revolution(5.0) for _ in range(12)]
    state = LiveState()
    state.start_taking(8)
    state.add(revs)
    assert state.done is not None
    assert all(not r.flags & FLAG_FIRST for r in state.collected)
    assert state.done.speed_rpm == pytest.approx(1470, rel=0.01)
    assert state.unusable_revs >= 1


def test_measure_does_not_average_a_first_revolution_spanning_a_missed_pulse(
        capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(scenarios.SCENARIOS, "fan", _fan_missing_its_second_mark())
    code = main(["measure", "--port", "sim:fan", "--revs", "20", "--json", "--seed", "2"])
    out, err = capsys.readouterr()
    assert code == 0, err
    result = json.loads(out)
    assert result["rpm"] == pytest.approx(1470, rel=0.005)
    ch, truth = result["channels"][0], result["expected"][0]
    assert ch["amp"] == pytest.approx(truth["amp"], rel=0.02)
    assert abs((ch["phase"] - truth["phase"] + 180) % 360 - 180) < 2.0
    assert result["rejected"] >= 1 and result["revs"] == 20
    assert math.isfinite(ch["spread"])
