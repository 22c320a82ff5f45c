"""Taking what a diagnosis needs from the meter: revolutions, a raw capture, a run-up or coast-down.

The one module of :mod:`runtrue.diagnosis` that talks to a :class:`runtrue.device.MeterClient`
(the rest are pure functions).  With the simulator (``client.transport.machine``) a speed change
is made to happen; with a real machine the user switches the drive off (coast-down) or runs it
up, and the recording follows the speed until it is below ``to_rpm`` or the revolutions stop.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from runtrue.device.errors import NoRevolutions
from runtrue.diagnosis.diagnose import Diagnosis, diagnose
from runtrue.diagnosis.resonance import (
    Resonance,
    SpeedCurve,
    find_resonances,
    near_resonance,
    speed_curve,
    warning_text,
)
from runtrue.protocol.admit import counts
from runtrue.readings.units import angle_between_deg

CAPTURE_FRAMES = 4096


def same_bearing_pairs(machine: Any, channels: list[int]) -> tuple[int, int] | None:
    """Simulator only: two pickups at one axial position, 60-120 deg apart (a radial pair)."""
    if machine is None:
        return None
    pk = machine.scenario.pickups
    for i in channels:
        for j in channels:
            if i < j < len(pk) and abs(pk[i].axial_mm - pk[j].axial_mm) < 1.0:
                d = angle_between_deg(pk[i].angle_deg, pk[j].angle_deg)
                if 60.0 <= d <= 120.0:
                    return (i, j)
    return None


def pickup_names(machine: Any) -> dict[int, str]:
    if machine is None:
        return {}
    return {i: p.name for i, p in enumerate(machine.scenario.pickups)}


def take_diagnosis(client: Any, *, revs: int = 30, capture_frames: int | None = CAPTURE_FRAMES,
                   machine_class: str = "class-I", pair: tuple[int, int] | None = None,
                   linearity: tuple[complex, complex, complex] | None = None,
                   timeout_s: float = 5.0) -> Diagnosis:
    """Revolutions and (unless ``capture_frames`` is None) a raw capture, diagnosed.  The
    client is started if it is not streaming, and left streaming."""
    if not client.streaming:
        client.start()
    got = client.revolutions(revs, timeout_s=timeout_s, usable_only=True)
    cap = client.capture(capture_frames) if capture_frames else None
    machine = getattr(client.transport, "machine", None)
    chans = list(got[0].channels)
    if pair is None:
        pair = same_bearing_pairs(machine, chans)
    line_hz = float(getattr(client.info, "line_hz", 0) or 0) if client.info is not None else 0.0
    return diagnose(got, cap, machine_class, pair=pair, names=pickup_names(machine), linearity=linearity,
                    line_hz=line_hz)


@dataclass
class SpeedRun:
    """1x of every channel against speed, revolution by revolution, while the speed changed."""

    channels: list[int]
    speed_rpm: list[float] = field(default_factory=list)
    one_x_g: list[list[complex]] = field(default_factory=list)    # per revolution, per channel
    kind: str = "coast-down"
    left_out: int = 0
    interrupted: bool = False       # ended by the user (Ctrl-C): what was recorded is kept

    def curve(self, row: int) -> SpeedCurve:
        return speed_curve(self.speed_rpm, [z[row] for z in self.one_x_g])


def record_speed_change(client: Any, *, from_rpm: float | None = None, to_rpm: float | None = None,
                        rate_rpm_per_s: float | None = None, max_s: float = 600.0, timeout_s: float = 5.0,
                        on_rev: Callable[[float], None] | None = None, settle_revs: int = 10) -> SpeedRun:
    """Record revolutions while the speed changes.

    Simulator: the machine is brought to ``from_rpm`` (default: where it is), left ``settle_revs``
    revolutions, then coasts down (or runs to ``to_rpm`` if that is above) at ``rate_rpm_per_s``
    (default: the scenario's coast-down).  Real meter: the recording waits for the user to change
    the speed, and ends at ``to_rpm`` or when revolutions stop coming for ``timeout_s``.
    ``on_rev(speed_rpm)`` is called for each revolution (progress)."""
    machine = getattr(client.transport, "machine", None)
    if not client.streaming:
        client.start()
    if machine is not None:
        if from_rpm is not None:
            machine.set_speed_rpm(from_rpm)
        client.discard_revolutions()
        client.revolutions(settle_revs, timeout_s=timeout_s)
    start = client.read_revolution(timeout_s)
    if start is None:
        raise NoRevolutions("no revolution from the meter: is the machine running and the reference mark seen?")
    start_rpm = start.speed_rpm
    up = to_rpm is not None and to_rpm > start_rpm
    floor = to_rpm if to_rpm is not None else 0.2 * start_rpm
    ceiling = to_rpm if to_rpm is not None else math.inf  # reached only when running up
    if machine is not None:
        if up:
            machine.set_speed_rpm(ceiling, rate_rpm_per_s or machine.scenario.coast_down_rpm_per_s)
        elif rate_rpm_per_s is not None or to_rpm is not None:
            machine.set_speed_rpm(float(to_rpm or 0.0), rate_rpm_per_s or machine.scenario.coast_down_rpm_per_s)
        else:
            machine.coast_down()
    run = SpeedRun(list(start.channels), kind="run-up" if up else "coast-down")
    t0 = time.monotonic()
    try:
        while time.monotonic() - t0 < max_s:
            rev = client.read_revolution(timeout_s)
            if rev is None:
                break                                   # stopped turning (or the mark is lost)
            if not counts(rev):
                run.left_out += 1
                continue
            s = rev.speed_rpm
            run.speed_rpm.append(s)
            run.one_x_g.append(list(rev.h1))
            if on_rev is not None:
                on_rev(s)
            if (up and s >= ceiling) or (not up and s <= floor):
                break
    except KeyboardInterrupt:
        run.interrupted = True          # the user ended the recording: keep what is recorded
    if machine is not None:
        machine.set_speed_rpm(machine.scenario.speed_rpm)   # back to running speed for what follows
    return run


@dataclass
class SpeedAnalysis:
    run: SpeedRun
    curves: dict[int, SpeedCurve]
    resonances: dict[int, list[Resonance]]
    balancing_rpm: float
    warnings: list[str]

    def to_dict(self) -> dict[str, Any]:
        chans = []
        for ch, cv in self.curves.items():
            chans.append({
                "channel": ch,
                "curve": [{"rpm": round(float(s), 2), "amp_g": round(float(a), 6), "phase_deg": round(float(p), 2),
                           "revs": int(n)} for s, a, p, n in zip(cv.speed_rpm, cv.amp_g, cv.phase_deg, cv.n_per_bin)],
                "resonances": [{"speed_rpm": round(r.speed_rpm, 1), "one_x_g": round(r.one_x_g, 5),
                                "phase_swing_deg": round(r.phase_swing_deg, 1),
                                "q": round(r.q, 2) if math.isfinite(r.q) else None,
                                "damping_ratio": round(r.damping_ratio, 4)} for r in self.resonances[ch]],
            })
        return {"kind": self.run.kind, "revs": len(self.run.speed_rpm), "left_out": self.run.left_out,
                "interrupted": self.run.interrupted,
                "rpm_range": [round(min(self.run.speed_rpm), 1), round(max(self.run.speed_rpm), 1)]
                if self.run.speed_rpm else None,
                "balancing_rpm": round(self.balancing_rpm, 1), "warnings": self.warnings, "channels": chans,
                "conventions": "amp_g: 1x g peak; phase_deg: lag after the reference mark; curve binned by 1 % of "
                               "the top speed (vector average)"}


def analyse_speed_run(run: SpeedRun, balancing_rpm: float) -> SpeedAnalysis:
    """Curves, resonances and the near-resonance warnings of a recorded run."""
    if len(run.speed_rpm) < 10:
        raise ValueError(f"only {len(run.speed_rpm)} usable revolutions while the speed changed: "
                         "record a longer run-up or coast-down")
    curves: dict[int, SpeedCurve] = {}
    res: dict[int, list[Resonance]] = {}
    warnings: list[str] = []
    for row, ch in enumerate(run.channels):
        cv = run.curve(row)
        curves[ch] = cv
        res[ch] = find_resonances(cv)
        near = near_resonance(res[ch], balancing_rpm)
        if near is not None:
            text = f"channel {ch}: " + warning_text(near, balancing_rpm)
            warnings.append(text)
    lo, hi = min(run.speed_rpm), max(run.speed_rpm)
    if not lo <= balancing_rpm * 1.15 <= hi and not any(res.values()):
        warnings.append(f"the run covered {lo:.0f}-{hi:.0f} rpm only: a resonance just above the balancing "
                        f"speed ({balancing_rpm:.0f} rpm) would not show; start higher if the machine allows")
    return SpeedAnalysis(run, curves, res, float(balancing_rpm), warnings)


def mean_speed(run: SpeedRun) -> float:
    return float(np.mean(run.speed_rpm)) if run.speed_rpm else float("nan")
