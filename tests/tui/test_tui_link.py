"""The meter link's thread: it only posts messages, survives a pulled cable and reconnects."""

from __future__ import annotations

import time
from typing import Any

from tui_fakes import FakeMeter, FakeRotor

from runtrue.tui.link import MeterLink
from runtrue.tui.messages import MeterConnected, MeterLost, RevolutionsRead, SelfTestDone


def wait_for(pred: Any, timeout_s: float = 5.0) -> None:
    end = time.monotonic() + timeout_s
    while not pred():
        assert time.monotonic() < end, "timed out"
        time.sleep(0.01)


def test_link_streams_revolutions_in_batches_and_runs_the_self_test() -> None:
    posted: list[Any] = []
    link = MeterLink("sim:fake", posted.append, opener=lambda port, seed, realtime: FakeMeter(),
                     post_interval_s=0.05)
    link.start()
    try:
        wait_for(lambda: any(isinstance(m, MeterConnected) for m in posted))
        link.stream(True)
        wait_for(lambda: sum(len(m.revs) for m in posted if isinstance(m, RevolutionsRead)) >= 20)
        link.self_test()
        wait_for(lambda: any(isinstance(m, SelfTestDone) for m in posted))
    finally:
        link.close()
    batches = [m for m in posted if isinstance(m, RevolutionsRead)]
    assert len(batches) < sum(len(b.revs) for b in batches), "revolutions come in batches"


def test_pulled_cable_is_reported_and_the_link_reconnects() -> None:
    posted: list[Any] = []
    rotor = FakeRotor()
    meters: list[FakeMeter] = []

    def opener(port: str, seed: Any, realtime: bool) -> FakeMeter:
        m = FakeMeter(rotor)
        if not meters:
            m.fail_after = 5  # the first connection loses its cable after 5 revolutions
        meters.append(m)
        return m

    link = MeterLink("sim:fake", posted.append, opener=opener, post_interval_s=0.02, retry_s=0.05)
    link.start()
    try:
        link.stream(True)
        wait_for(lambda: any(isinstance(m, MeterLost) for m in posted))
        wait_for(lambda: sum(isinstance(m, MeterConnected) for m in posted) >= 2)
        wait_for(lambda: meters[-1].streaming and meters[-1].rev > 3)
    finally:
        link.close()
    lost = next(m for m in posted if isinstance(m, MeterLost))
    assert "cable" in lost.reason


def test_weights_change_bumps_the_epoch() -> None:
    posted: list[Any] = []
    rotor = FakeRotor()
    link = MeterLink("sim:fake", posted.append, opener=lambda port, seed, realtime: FakeMeter(rotor),
                     post_interval_s=0.02)
    link.start()
    try:
        link.stream(True)
        epoch = link.call(lambda client: client.transport.machine.add_weight(0, 10.0, 90.0, 160.0))
        wait_for(lambda: any(isinstance(m, RevolutionsRead) and m.epoch == epoch for m in posted))
    finally:
        link.close()
    assert len(rotor.weights) == 1


def test_a_refused_command_is_reported_and_the_link_carries_on() -> None:
    from runtrue.device import CommandRejected
    from runtrue.tui.messages import CommandFailed

    posted: list[Any] = []
    link = MeterLink("sim:fake", posted.append, opener=lambda port, seed, realtime: FakeMeter(),
                     post_interval_s=0.02)
    link.start()

    def set_channels(client: Any) -> None:
        raise CommandRejected("the meter refused SET_CHANNELS (bad argument)", 1)

    try:
        link.stream(True)
        link.call(set_channels)
        wait_for(lambda: any(isinstance(m, CommandFailed) for m in posted))
        n = sum(len(m.revs) for m in posted if isinstance(m, RevolutionsRead))
        wait_for(lambda: sum(len(m.revs) for m in posted if isinstance(m, RevolutionsRead)) > n + 5)
    finally:
        link.close()
    failed = next(m for m in posted if isinstance(m, CommandFailed))
    assert failed.what == "set_channels" and "refused" in failed.reason
    assert not any(isinstance(m, MeterLost) for m in posted)


def test_a_closed_link_posts_nothing_more() -> None:
    posted: list[Any] = []
    link = MeterLink("sim:fake", posted.append, opener=lambda port, seed, realtime: FakeMeter(),
                     post_interval_s=0.02)
    link.start()
    link.stream(True)
    wait_for(lambda: any(isinstance(m, RevolutionsRead) for m in posted))
    link.close()
    n = len(posted)
    time.sleep(0.2)
    assert len(posted) == n


def test_a_failure_inside_the_link_thread_is_reported_as_meter_lost_and_the_link_opens_again(tmp_path, monkeypatch) -> None:
    monkeypatch.setenv("RUNTRUE_DATA_DIR", str(tmp_path))
    posted: list[Any] = []
    meters: list[FakeMeter] = []

    class Broken(FakeMeter):
        def read_revolution(self, timeout_s: float) -> Any:
            if self.rev >= 3:
                raise TypeError("a message the client did not foresee")
            return super().read_revolution(timeout_s)

    def opener(port: str, seed: Any, realtime: bool) -> FakeMeter:
        m = Broken() if not meters else FakeMeter()
        meters.append(m)
        return m

    link = MeterLink("sim:fake", posted.append, opener=opener, post_interval_s=0.02, retry_s=0.05)
    link.start()
    try:
        link.stream(True)
        wait_for(lambda: any(isinstance(m, MeterLost) for m in posted))
        wait_for(lambda: sum(isinstance(m, MeterConnected) for m in posted) >= 2)
        wait_for(lambda: meters[-1].streaming and meters[-1].rev > 3)
    finally:
        link.close()
    lost = next(m for m in posted if isinstance(m, MeterLost))
    assert "unexpectedly" in lost.reason and "TypeError" in lost.reason
    assert (tmp_path / "runtrue-errors.log").read_text().count("TypeError: a message the client did not foresee") == 1
