"""``runtrue diagnose``: is it unbalance, and how severe is it?  Before weights go on.

Takes ``--revs`` usable revolutions and a raw capture (``--capture`` frames, 0 for none), and
prints the verdict with its reasons, and per pickup the 1x/2x/3x, the broadband velocity RMS
(mm/s r.m.s. over the band of ISO 20816-3) with its zone A-D for ``--class``.

``--json`` prints ONE JSON object (add keys only): ``rpm``, ``machine_class``, ``capture``
({frames, rate_hz, window}), ``pair``, ``verdict`` ({unbalance, headline, checks, findings}),
``go_on`` (text when the verdict says not unbalance: the user may balance anyway), ``severity``
(the worst pickup's {zone, velocity_rms_mm_s, meaning}), ``channels`` (per pickup: one_x,
two_x, three_x {amp_g, phase_deg}, overall_rms_g, phase_sd_deg, severity {velocity_rms_mm_s,
zone, meaning, class, table, source, from}, verdict, content {band_hz, total_mm_s_rms,
orders_mm_s_rms, sub_sync_mm_s_rms, non_sync_mm_s_rms, shares}), ``notes``, ``conventions``,
``port``; with ``--spectrum`` also per channel ``spectrum`` ({freq_hz, velocity_mm_s_pk} up to
1000 Hz); with ``--before FILE`` (an earlier ``diagnose --json``, e.g. before balancing) also
``before_after`` [{channel, before: {velocity_rms_mm_s, zone}, after: {...}}].  Exit status 0
whatever the verdict.
"""

from __future__ import annotations

import argparse
import json
from typing import Any

from runtrue import validation as v
from runtrue.cli import UsageError, checked
from runtrue.cli.measure import channels_mask
from runtrue.diagnosis.zones import ZONE_TABLES

CLASSES = tuple(ZONE_TABLES)  # the machine classes' keys, from the numpy-free zone tables


def _pair(text: str) -> tuple[int, int]:
    parts = text.split(",")
    if len(parts) != 2 or not all(p.strip().isdigit() and int(p) <= 2 for p in parts) or parts[0] == parts[1]:
        raise argparse.ArgumentTypeError(f"{text!r}: give two different channels 0-2, e.g. 0,1")
    return int(parts[0]), int(parts[1])


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "diagnose",
        help="is it unbalance? the verdict with its reasons, spectrum and vibration severity zone",
        description="Before adding weights: is the vibration unbalance (1x dominant and steady), or "
        "misalignment, looseness, bearings, a resonance? Prints the verdict with its reasons and the "
        "vibration severity zone (ISO 20816-3 / ISO 10816-1; zone values from memory, check them "
        "against the printed standard). CAUTION: rotating machinery can kill; keep clear of the plane "
        "of rotation, and follow the machine maker's instructions and local rules.",
    )
    p.add_argument("--port", help="serial port of the meter, or sim:NAME / sim:FILE for the simulator")
    p.add_argument("--revs", type=checked(_diag_revs), default=30,
                   help=f"usable revolutions, 3-{v.MAX_REVS} (default 30)")
    p.add_argument("--capture", type=checked(_capture_frames), default=4096, metavar="FRAMES",
                   help="raw capture length in sample frames, 64-4096 (0: none; default 4096)")
    p.add_argument("--class", dest="machine_class", default="class-I", choices=CLASSES,
                   help="machine class/group and support for the severity zones (default class-I: up to 15 kW)")
    p.add_argument("--channels", type=channels_mask, default=None, metavar="LIST",
                   help="channels, e.g. 0 or 0,1 or all")
    p.add_argument("--pair", type=_pair, default=None, metavar="A,B",
                   help="two channels on one bearing, 90 deg apart (the simulator finds them itself)")
    p.add_argument("--spectrum", action="store_true", help="with --json: include each spectrum")
    p.add_argument("--before", default=None, metavar="FILE",
                   help="an earlier `diagnose --json` output (before balancing): print the zones before and after")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--seed", type=checked(v.seed), default=None,
                   help=f"simulator only: make the run repeatable, 0-{v.MAX_SEED}")
    p.add_argument("--timeout", type=checked(v.timeout_s), default=5.0, metavar="S",
                   help=f"longest wait for a revolution, {v.MIN_TIMEOUT_S:g}-{v.MAX_TIMEOUT_S:g} s")


def _diag_revs(value: Any) -> int:
    return v.revs(value, lo=3)


def _capture_frames(value: Any) -> int:
    frames = v.whole(value, "--capture", 0, 4096)
    if 0 < frames < 64:
        raise v.ValidationError(f"--capture {frames}: give 64 to 4096 frames, or 0 for no capture")
    return frames


def run(args: Any) -> int:
    from runtrue.cli.measure import pick_port
    from runtrue.device import MeterError, open_meter
    from runtrue.diagnosis.acquire import take_diagnosis
    from runtrue.transport import PortError, TransportLost

    mask = args.channels
    before = _load_before(args.before) if args.before else None
    port = pick_port(args.port)
    try:
        client = open_meter(port, seed=args.seed)
    except PortError as exc:
        raise UsageError(str(exc)) from None
    try:
        info = client.identify()
        if mask is not None:
            client.set_channels((1 << max(1, info.channels_max)) - 1 if mask < 0 else mask)
        elif getattr(client.transport, "machine", None) is not None and args.pair is not None:
            client.set_channels((1 << max(args.pair) + 1) - 1)
        d = take_diagnosis(client, revs=args.revs, capture_frames=args.capture or None,
                           machine_class=args.machine_class, pair=args.pair, timeout_s=args.timeout)
        client.stop()
    except (MeterError, TransportLost, ValueError) as exc:
        raise UsageError(str(exc)) from None
    finally:
        client.close()
    pairs = _before_after(before, d) if before is not None else None
    if args.json:
        out = d.to_dict(spectrum=args.spectrum)
        out["port"] = port
        if pairs is not None:
            out["before_after"] = pairs
        print(json.dumps(out))
    else:
        print(f"{port}:")
        print("\n".join(d.lines()))
        print(f"severity zones: {d.worst_severity.table.title}, {d.worst_severity.table.source}")
        for p_ in pairs or []:
            b, a = p_["before"], p_["after"]
            print(f"ch{p_['channel']}: before {b['velocity_rms_mm_s']:.2f} mm/s zone {b['zone']}, "
                  f"now {a['velocity_rms_mm_s']:.2f} mm/s zone {a['zone']}")
    return 0


def _load_before(path: str) -> dict[str, Any]:
    from runtrue.cli.jsonio import load_json

    data = load_json(path)
    ok = isinstance(data, dict) and isinstance(data.get("channels"), list) and all(
        isinstance(c, dict) and isinstance(c.get("severity"), dict) and "channel" in c
        and isinstance(c["severity"].get("velocity_rms_mm_s"), (int, float)) for c in data["channels"])
    if not ok:
        raise UsageError(f"--before {path}: not the output of `runtrue diagnose --json`; give that file")
    return data


def _before_after(before: dict[str, Any], d: Any) -> list[dict[str, Any]]:
    """Per channel measured both times: velocity and zone before, and now (zones of today's class)."""
    from runtrue.diagnosis.severity import assess

    now = {c.channel: c for c in d.channels}
    out = []
    for c in before["channels"]:
        ch = int(c["channel"])
        if ch not in now:
            continue
        v = float(c["severity"]["velocity_rms_mm_s"])
        out.append({"channel": ch,
                    "before": {"velocity_rms_mm_s": round(v, 3), "zone": assess(v, d.machine_class).zone},
                    "after": {"velocity_rms_mm_s": round(now[ch].severity.velocity_rms_mm_s, 3),
                              "zone": now[ch].severity.zone}})
    return out

