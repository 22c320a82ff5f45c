"""A reading never waits for ever on revolutions the meter flags: it stops with what was seen
and what to do (a clipping trial weight, a reference sensor seeing two marks)."""

from __future__ import annotations

import pytest

from runtrue.device import AllRevolutionsFlagged, NoRevolutions, open_meter


@pytest.mark.slow
def test_clipping_trial_weight_stops_with_advice_instead_of_waiting_for_ever() -> None:
    client = open_meter("sim:spindle", seed=1)
    try:
        client.identify()
        client.start()
        # A weight far too heavy for a small 9,000 rpm spindle drives the pickup past the ADC's
        # end stops on every revolution.
        client.transport.machine.add_weight(0, 100.0, 0.0, 30.0)  # type: ignore[attr-defined]
        client.discard_revolutions()
        with pytest.raises(AllRevolutionsFlagged) as caught:
            client.revolutions(10, usable_only=True)
    finally:
        client.close()
    err = caught.value
    assert isinstance(err, NoRevolutions), "callers that handle missing pulses handle this too"
    assert err.flags.get("clipped", 0) > 0
    assert "exceeds the sensor's range" in str(err) and "trial weight" in str(err)


@pytest.mark.slow
def test_usable_revolutions_are_still_collected_among_a_few_flagged_ones() -> None:
    client = open_meter("sim:fan", seed=2)  # the fan's reference sensor glitches now and then
    try:
        client.identify()
        client.start()
        revs = client.revolutions(60, usable_only=True)
    finally:
        client.close()
    assert len(revs) == 60 and all(r.usable for r in revs)


def test_self_test_result_split_into_parts_comes_back_whole() -> None:
    # The firmware splits a long self-test result into frames with "part"/"parts" (PROTOCOL.md);
    # the caller gets every check once, in order.
    client = open_meter("sim:roller", seed=1)
    try:
        client.identify()
        result = client.self_test()
    finally:
        client.close()
    names = [c["name"] for c in result["checks"]]
    assert "missing_parts" not in result
    assert len(names) == len(set(names)), "no check twice"
    for name in ("sample_rate", "reference", "ch0_signal", "ch1_signal"):
        assert name in names, (name, names)
    assert "part" not in result and "parts" not in result
