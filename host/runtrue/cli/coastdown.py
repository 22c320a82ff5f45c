"""``runtrue coastdown``: 1x amplitude and phase against speed while the machine coasts down (or
runs up), the resonances found, and a warning when the balancing speed is within 15 % of one.

With a real meter: start the command at running speed, then switch the drive off; recording
ends at ``--to-rpm`` (default a fifth of the starting speed) or when the revolutions stop.  With
the simulator the machine is brought to ``--from-rpm`` and coasts down by itself (or runs up to
``--to-rpm`` if that is higher).

``--json`` prints ONE JSON object (add keys only): ``kind`` ("coast-down"/"run-up"), ``revs``,
``interrupted`` (Ctrl-C ended the recording; what was recorded is analysed),
``left_out``, ``rpm_range``, ``balancing_rpm``, ``warnings`` (texts), ``channels`` (per channel:
``curve`` [{rpm, amp_g, phase_deg, revs}], ``resonances`` [{speed_rpm, one_x_g, phase_swing_deg,
q, damping_ratio}]), ``conventions``, ``port``.  Without ``--json``: the plots (amplitude and
phase against rpm, the polar locus) at 80 columns and the warnings.
"""

from __future__ import annotations

import json
import math
import sys
from typing import Any

from runtrue import validation as v
from runtrue.cli import UsageError, checked
from runtrue.cli.measure import channels_mask


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "coastdown",
        help="1x against speed during a coast-down or run-up: resonances and the near-resonance warning",
        description="Record the 1x amplitude and phase against speed while the machine coasts down "
        "(switch the drive off after starting this) or runs up, find resonances (peak with a phase "
        "swing), and warn when the balancing speed is within 15 % of one. CAUTION: keep clear of "
        "the machine while it runs; follow the machine maker's instructions for stopping and starting.",
    )
    p.add_argument("--port", help="serial port of the meter, or sim:NAME / sim:FILE for the simulator")
    p.add_argument("--balancing-rpm", type=checked(_rpm("--balancing-rpm")), default=None, metavar="RPM",
                   help="the speed balancing is done at (default: the machine's running speed in the "
                   "simulator, else the speed when recording starts)")
    p.add_argument("--from-rpm", type=checked(_rpm("--from-rpm")), default=None, metavar="RPM", help="simulator: start speed")
    p.add_argument("--to-rpm", type=checked(_rpm("--to-rpm")), default=None, metavar="RPM",
                   help="stop recording at this speed (above the start: a run-up in the simulator)")
    p.add_argument("--rate", type=checked(_rate), default=None, metavar="RPM_PER_S",
                   help="simulator: deceleration or run-up rate (default: the scenario's coast-down)")
    p.add_argument("--channels", type=channels_mask, default=None, metavar="LIST",
                   help="channels, e.g. 0 or 0,1 or all")
    p.add_argument("--max-s", type=checked(_max_s), default=600.0, metavar="S",
                   help=f"longest recording, 1-{MAX_RECORDING_S:g} s")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--seed", type=checked(v.seed), default=None,
                   help=f"simulator only: make the run repeatable, 0-{v.MAX_SEED}")
    p.add_argument("--timeout", type=checked(v.timeout_s), default=5.0, metavar="S",
                   help="the recording ends when no revolution comes for this long")


MAX_RECORDING_S = 3600.0  # one hour: a large machine's coast-down is minutes, not hours
MAX_RATE_RPM_PER_S = 100_000.0


def _rpm(option: str) -> Any:
    def check(value: Any) -> float:
        return v.in_range(value, option, 1.0, v.SPEED_MAX_RPM, "rpm", "give a positive speed")
    return check


def _rate(value: Any) -> float:
    return v.in_range(value, "--rate", 0.01, MAX_RATE_RPM_PER_S, "rpm/s", "give a positive rate")


def _max_s(value: Any) -> float:
    return v.in_range(value, "--max-s", 1.0, MAX_RECORDING_S, "s", "give a positive number of seconds")


def run(args: Any) -> int:
    from runtrue.cli.measure import pick_port
    from runtrue.device import MeterError, open_meter
    from runtrue.diagnosis.acquire import analyse_speed_run, record_speed_change
    from runtrue.transport import PortError, TransportLost

    mask = args.channels
    port = pick_port(args.port)
    try:
        client = open_meter(port, seed=args.seed)
    except PortError as exc:
        raise UsageError(str(exc)) from None
    machine = getattr(client.transport, "machine", None)
    try:
        info = client.identify()
        if mask is not None:
            client.set_channels((1 << max(1, info.channels_max)) - 1 if mask < 0 else mask)
        elif machine is not None:
            client.set_channels((1 << min(len(machine.scenario.pickups), info.channels_max)) - 1)
        if machine is None and not args.json:
            print("recording: switch the drive off now (or run the machine up); Ctrl-C ends it", file=sys.stderr)
        run_ = record_speed_change(client, from_rpm=args.from_rpm, to_rpm=args.to_rpm, rate_rpm_per_s=args.rate,
                                   max_s=args.max_s, timeout_s=args.timeout)
        client.stop()
    except (MeterError, TransportLost, ValueError) as exc:
        raise UsageError(str(exc)) from None
    finally:
        client.close()
    if not run_.speed_rpm:
        raise UsageError("no usable revolution was recorded: is the machine turning and the reference mark seen?")
    balancing = args.balancing_rpm or (machine.scenario.speed_rpm if machine is not None else run_.speed_rpm[0])
    try:
        analysis = analyse_speed_run(run_, balancing)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    if args.json:
        out = analysis.to_dict()
        out["port"] = port
        print(json.dumps(out))
        return 0
    from runtrue.tui.widgets.speedplot import speed_plot_text

    print(f"{port}: {analysis.run.kind}, {len(run_.speed_rpm)} revolutions, "
          f"{min(run_.speed_rpm):.0f}-{max(run_.speed_rpm):.0f} rpm")
    ch = max(analysis.curves, key=lambda c: float(analysis.curves[c].amp_g.max()))
    print("\n".join(speed_plot_text(analysis.curves[ch], analysis.resonances[ch], balancing, width=80)))
    for r_ch, rs in analysis.resonances.items():
        for r in rs:
            q = f"Q {r.q:.1f}" if math.isfinite(r.q) else "Q not resolved"
            print(f"channel {r_ch}: resonance at {r.speed_rpm:.0f} rpm, 1x {r.one_x_g:.3f} g, phase swing "
                  f"{r.phase_swing_deg:.0f} deg, {q}")
    for w in analysis.warnings:
        print(f"WARNING: {w}")
    if not any(analysis.resonances.values()):
        print("no resonance found in the recorded speed range")
    return 0
