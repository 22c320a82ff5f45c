"""Benchmark: how fast the simulator runs (virtual machine + SimBoard + real firmware Meter).

Run:  .venv/bin/python tests/bench/bench_sim_speed.py

Prints, per scenario, the CPU time to measure 50 revolutions through the whole link
(SimTransport with realtime=False -> MeterClient), and how many times faster than real time
that is.  Target: well under a few seconds of CPU for 50 revolutions of any scenario.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "firmware"))  # see tests/host/sim/conftest.py

from runtrue.device.client import MeterClient  # noqa: E402
from runtrue.sim.scenarios import SCENARIOS  # noqa: E402
from runtrue.sim.transport import SimTransport  # noqa: E402


def main() -> int:
    print(f"{'scenario':10} {'rpm':>7} {'ch':>3} {'sim s':>7} {'cpu s':>7} {'x realtime':>10} {'cpu ms/rev':>10}")
    for name, sc in SCENARIOS.items():
        t = SimTransport(name, seed=1)
        client = MeterClient(t, port=t.name)
        client.identify()
        client.start()
        client.revolutions(2)
        sim0 = t.machine.t_s
        cpu0 = time.process_time()
        client.revolutions(50)
        cpu = time.process_time() - cpu0
        sim = t.machine.t_s - sim0
        client.stop()
        print(f"{name:10} {sc.speed_rpm:7.0f} {len(sc.pickups):3d} {sim:7.2f} {cpu:7.3f} {sim / cpu:10.1f} "
              f"{1000 * cpu / 50:10.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
