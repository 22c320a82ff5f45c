"""The application's state between screens: the meter link, the store, the machine and the job.

Screens read and change this object; the App owns it.  Nothing here draws anything.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from runtrue.jobs.store import JobStore
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
    # diagnoses (runtrue.diagnosis.Diagnosis) and the last run-up/coast-down (SpeedAnalysis) taken
    # on the diagnosis screen; each is kept with the open job as a job event (record_diagnoses)
    diagnoses: list[Any] = field(default_factory=list)
    speed_analysis: Any = None
    _recorded: dict[int, list[Any]] = field(default_factory=dict)  # job id -> the objects recorded
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
            self._store = JobStore(self.store_path)
        return self._store

    def record_diagnoses(self) -> int:
        """Keep every diagnosis and speed run of this session not yet kept with the open job as
        its job events ("diagnosis", "speed_run": the objects' JSON form with the spectrum), so
        the job's report shows them.  Diagnoses taken before the job started count as its
        "before".  Returns how many were written; nothing to do without a job."""
        job = self.job
        store, job_id = getattr(job, "store", None), getattr(job, "job_id", None)
        if store is None or job_id is None:
            return 0
        done = self._recorded.setdefault(int(job_id), [])
        written = 0
        items = [("diagnosis", d) for d in self.diagnoses]
        if self.speed_analysis is not None:
            items.append(("speed_run", self.speed_analysis))
        for kind, obj in items:
            if any(o is obj for o in done):
                continue
            data = obj.to_dict(spectrum=True) if kind == "diagnosis" else obj.to_dict()
            store.add_event(int(job_id), kind, data)
            done.append(obj)
            written += 1
        return written

    def close(self) -> None:
        if self.link is not None:
            self.link.close()
            self.link = None
        if self._store is not None:
            self._store.close()
            self._store = None
