"""The simulated meter reports a modelled CPU load (runtrue.sim.board: per-frame and per-revolution
costs estimated for the RP2040 by tests/bench/bench_meter_unix.py), and `runtrue device check`
shows it and fails above 60 %."""

from __future__ import annotations

import pytest

from runtrue.device import open_meter
from runtrue.sim import board as simboard

pytestmark = pytest.mark.slow


def _load(scenario: str, seconds: float = 2.5) -> int:
    client = open_meter(f"sim:{scenario}", seed=3)
    try:
        client.identify()
        client.start()
        client.revolutions(int(seconds * 20), timeout_s=5.0)
        client.transport.board.run_for(1.2)  # type: ignore[attr-defined]
        return client.status().cpu_load_permille
    finally:
        client.close()


def test_modelled_load_grows_with_channels_and_speed_and_stays_under_the_limit() -> None:
    fan = _load("fan")          # one pickup, 1,470 rpm
    roller = _load("roller")    # two pickups
    spindle = _load("spindle")  # one pickup, 9,000 rpm
    assert simboard.CPU_IDLE_PERMILLE < fan < roller
    assert fan < spindle
    assert max(fan, roller, spindle) < 600
    # the model itself: 3 channels at 4 kS/s and the envelope's top speed (10,000 rpm)
    top = (4000 * (simboard.CPU_US_PER_FRAME_BASE + 3 * simboard.CPU_US_PER_FRAME_CHANNEL)
           + 10_000 / 60 * simboard.CPU_US_PER_REV) / 1e3 + simboard.CPU_IDLE_PERMILLE
    assert top < 600
