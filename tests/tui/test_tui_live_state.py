"""Taking a reading from the revolutions as they arrive: progress, time left, settling, and
never mixing revolutions from before the rotor changed."""

from __future__ import annotations

import cmath
import math

import pytest

from runtrue.protocol.messages import Revolution
from runtrue.tui.live_state import LiveState


def rev(n: int, h1: complex, speed_rpm: float = 1500.0, flags: int = 0) -> Revolution:
    return Revolution(rev=n, period_us=60e6 / speed_rpm, n_samples=160, flags=flags, channel_mask=1,
                      h1=[h1], h2=[0j], rms_g=[abs(h1)])


class Clock:
    def __init__(self) -> None:
        self.t = 0.0

    def __call__(self) -> float:
        return self.t


def test_reading_of_target_revolutions_with_progress_and_time_left() -> None:
    clock = Clock()
    live = LiveState(clock=clock)
    live.start_taking(10)
    for n in range(4):  # 25 rev/s
        clock.t = n * 0.04
        live.add([rev(n, 0.5 + 0.01j * (n % 2))])
    done, target, left = live.progress()
    assert (done, target) == (4, 10)
    assert left == pytest.approx(6 / 25, rel=0.01)
    for n in range(4, 12):
        clock.t = n * 0.04
        live.add([rev(n, 0.5 + 0.01j * (n % 2))])
    assert live.done is not None and not live.collecting
    assert live.done.n_revs == 10
    assert live.done.channels[0].amp_g == pytest.approx(abs(0.5 + 0.005j), rel=1e-6)


def test_flagged_revolutions_are_not_averaged() -> None:
    live = LiveState()
    live.start_taking(3)
    live.add([rev(0, 1.0), rev(1, 9.0, flags=1), rev(2, 1.0), rev(3, 1.0)])
    assert live.done is not None
    assert live.done.channels[0].amp_g == pytest.approx(1.0)
    assert live.unusable_revs == 1


def test_revolutions_from_before_the_rotor_changed_are_ignored() -> None:
    live = LiveState()
    live.reset(min_epoch=2)
    live.start_taking(2)
    live.add([rev(0, 5.0), rev(1, 5.0)], epoch=1)  # still in flight when the weights changed
    assert live.done is None and not live.recent
    live.add([rev(2, 1.0), rev(3, 1.0)], epoch=2)
    assert live.done is not None and live.done.channels[0].amp_g == pytest.approx(1.0)


def test_automatic_reading_waits_until_steady() -> None:
    live = LiveState()
    live.start_taking(8, when_steady=True)
    # running up: speed rising 3 % a revolution, not steady
    for n in range(12):
        live.add([rev(n, cmath.rect(0.5, 1.0), speed_rpm=1000 * 1.03**n)])
    assert live.waiting_for_steady and not live.collected
    # at speed: settles, then 8 revolutions are averaged
    for n in range(12, 40):
        live.add([rev(n, cmath.rect(0.5, 1.0) + 0.001 * (-1) ** n, speed_rpm=1500.0)])
    assert live.done is not None
    assert live.done.speed_rpm == pytest.approx(1500.0)
    assert math.degrees(cmath.phase(live.done.channels[0].mean)) == pytest.approx(math.degrees(1.0), abs=0.2)


def test_signal_check_counts_pulses_flags_and_the_rest_of_the_signal() -> None:
    from runtrue.tui.screens.connect import signal_check_text

    # 1x of 0.4 g peak, 2x of 0.1 g peak and an RMS of 0.3 g: the rest is
    # sqrt(0.09 - 0.16/2 - 0.01/2) = sqrt(0.005) = 0.0707 g RMS (Parseval).
    revs = [Revolution(n, 40_000.0, 160, 0, 1, [0.4 + 0j], [0.1j], [0.3]) for n in range(10)]
    revs.append(Revolution(10, 80_000.0, 320, 1, 1, [0.4 + 0j], [0j], [0.3]))  # a missed pulse
    text = signal_check_text(revs, ["fan end"])
    # 1 of 11 flagged (9 %): more than the 5 % a clean tape allows
    assert "Reference: NOT CLEAN - 9% of revolutions flagged" in text and "1500 rpm" in text
    assert "missing pulse 1: move the sensor closer" in text  # each flag with what to do
    assert "rest 0.0707 g rms" in text
    assert "fan end: usable" in text  # 1x 0.4 g pk against 0.07 g rms of everything else
    clean = signal_check_text(revs[:10])
    assert "Reference: tape seen cleanly, 1500 rpm (10/10 revs)" in clean
    noisy = [Revolution(n, 40_000.0, 160, 0, 1, [0.01 + 0j], [0j], [0.3]) for n in range(10)]
    assert "WEAK" in signal_check_text(noisy)
    assert "NO PULSES" in signal_check_text([])


def test_refused_revolutions_while_taking_are_counted() -> None:
    live = LiveState()
    live.add([rev(n, 1.0, flags=8) for n in range(5)])  # clipped, before anything was asked
    assert live.refused_while_taking == 0
    live.start_taking(4)
    live.add([rev(n, 1.0, flags=8) for n in range(60)])
    assert live.refused_while_taking == 60 and live.done is None
    assert [f.lower().replace("_", " ") for f in live.last_flags] == ["clipped"]
