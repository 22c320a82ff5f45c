"""The application's state between screens: the meter link, the store, the machine and the job.

Screens read and change this object; the App owns it.  Nothing here draws anything.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from runtrue.tui.live_state import LiveState

MANUAL_PORT = "manual"


@dataclass
class Session:
    port: str | None = None  # "sim:NAME", a serial device, "manual", or None (not chosen yet)
    seed: int | None = None
    realtime: bool = True
    revs_per_reading: int = 32
    store_path: str | None = None
    link: Any = None  # runtrue.tui.link.MeterLink while a meter is in use
    device_info: dict[str, Any] = field(default_factory=dict)
    self_test: dict[str, Any] | None = None
    meter_state: str = "no meter"  # shown on every screen: "connected", "LOST - reconnecting", ...
    live: LiveState = field(default_factory=LiveState)
    manual_unit: str = "g"  # unit of readings typed in from another instrument
    machine: Any = None  # runtrue.jobs.model.Machine
    job: Any = None  # runtrue.jobs.BalanceJob
    _store: Any = None

    @property
    def manual(self) -> bool:
        return self.port == MANUAL_PORT

    @property
    def simulated(self) -> bool:
        return bool(self.port and self.port.startswith("sim:"))

    @property
    def store(self) -> Any:
        """The job store (opened on first use, so start-up stays quick)."""
        if self._store is None:
            from runtrue.jobs.store import JobStore

            self._store = JobStore(self.store_path)
        return self._store

    def close(self) -> None:
        if self.link is not None:
            self.link.close()
            self.link = None
        if self._store is not None:
            self._store.close()
            self._store = None
