"""``runtrue measure``: the 1x vibration vector of each pickup, vector-averaged over N
revolutions.

``--json`` prints ONE JSON object (a contract other tools rely on; change it only by adding
keys)::

    {"rpm": 1473.2,
     "channels": [{"amp": 0.409, "phase": 207.6, "spread": 0.0005, ...}],
     "expected": [{"amp": 0.409, "phase": 207.6}]}        # sim:NAME ports only

* ``amp``: g, 1x peak; ``phase``: lag in degrees after the reference mark, 0-360;
  ``spread``: the standard deviation of the mean vector, g (see runtrue.readings.average).
* Added keys: ``rpm_sd``, ``revs``, ``rejected``, ``lost_frames``, ``port``, ``conventions``;
  per channel ``channel`` (physical number), ``confidence`` (95 % radius, g), ``velocity_mm_s_rms``;
  ``warnings`` (list of texts: what the fit could not separate, e.g. line hum near an order);
  ``front_end`` ({``lag_deg``, ``lag_tol_deg``, ``gain``, ``gain_tol``}: the anti-alias filter's
  lag taken out of the 1x phase and gain divided out of its amplitude, with their spread over
  the parts' tolerances; null when the meter did not give its front end); ``fit``: ``"joint"``
  when the 1x is the joint fit of all the revolutions' sums (line hum fitted across them,
  runtrue.readings.joint), ``"vector average"`` otherwise.
* ``expected`` (simulator only): each channel's noise-free 1x vector from the virtual machine
  (``transport.machine.expected_1x()``), sampled as each averaged revolution arrived and
  averaged like the measurement, so it is the truth for the same revolutions even while the
  speed wanders.  Same order as ``channels``.
"""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from runtrue import validation as v
from runtrue.cli import UsageError, checked

ALL_CHANNELS = -1  # --channels all: every channel the meter has
CONVENTIONS = "amp: g, 1x peak; phase: lag in degrees after the reference mark (0-360); spread: standard deviation of the mean vector, g"


def channels_mask(text: str) -> int:
    if text == "all":
        return ALL_CHANNELS
    mask = 0
    for part in text.split(","):
        part = part.strip()
        if not part.isdigit() or int(part) > 2:
            raise argparse.ArgumentTypeError(f"{text!r}: give channel numbers 0-2 separated by commas, e.g. 0,1")
        mask |= 1 << int(part)
    return mask


def _rate(text: str) -> int:
    return v.whole(text, "--rate", 500, 10_000)


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "measure",
        help="measure the 1x vibration vector (amplitude, phase lag) of each pickup",
        description="Measure the 1x vibration of each pickup, vector-averaged over N revolutions. "
        "Amplitude in g 1x peak, phase as a lag in degrees after the reference mark. "
        f"Limits: --revs 2-{v.MAX_REVS}, --timeout {v.MIN_TIMEOUT_S:g}-{v.MAX_TIMEOUT_S:g} s, --rate 500-10000 Hz, "
        f"--seed 0-{v.MAX_SEED}; the whole measurement stops after 10 x --revs + 20 revolutions. "
        "CAUTION: rotating machinery can kill; keep clear of the plane of rotation.",
    )
    p.add_argument("--port", help="serial port of the meter (e.g. /dev/ttyACM0), or sim:NAME for the "
                   "simulator (`runtrue scenarios`); default: the first meter found")
    p.add_argument("--revs", type=checked(v.revs), default=20,
                   help=f"usable revolutions to average, 2-{v.MAX_REVS} (default 20)")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.add_argument("--seed", type=checked(v.seed), default=None,
                   help=f"simulator only: make the run repeatable (0-{v.MAX_SEED})")
    p.add_argument("--rate", type=checked(_rate), default=None, metavar="HZ", help="sample rate per channel, 500-10000 Hz")
    p.add_argument("--edge", choices=("rising", "falling"), default=None, help="active edge of the reference pulse")
    p.add_argument("--channels", type=channels_mask, default=None, metavar="LIST",
                   help="channels to measure, e.g. 0 or 0,1 or all (default: as the meter is set)")
    p.add_argument("--spy", default=None, metavar="FILE", help="also write a hex dump of the link traffic to FILE")
    p.add_argument("--timeout", type=checked(v.timeout_s), default=5.0, metavar="S",
                   help=f"longest wait for one revolution, {v.MIN_TIMEOUT_S:g}-{v.MAX_TIMEOUT_S:g} s (default 5)")


def pick_port(port: str | None) -> str:
    if port:
        return port
    from runtrue.transport.serial import find_meter_ports

    candidates = find_meter_ports()
    if not candidates:
        raise UsageError(
            "no meter found: plug it in, or name the port with --port /dev/ttyACM0 "
            "(or --port sim:NAME for the simulator; `runtrue scenarios` lists them)"
        )
    return candidates[0].device


def _measure(args: Any, port: str) -> dict[str, Any]:
    from runtrue.device import MeterError, Revolution, open_meter
    from runtrue.protocol.admit import counts, why_left_out
    from runtrue.readings import amp_phase, vector_average
    from runtrue.readings.units import convert_1x
    from runtrue.transport import PortError, TransportLost

    try:
        client = open_meter(port, seed=args.seed, spy=args.spy)
    except PortError as exc:
        raise UsageError(str(exc)) from None
    machine = getattr(client.transport, "machine", None)
    try:
        info = client.identify()
        if args.rate is not None:
            client.set_rate(args.rate)
        if args.channels is not None:
            mask = (1 << max(1, info.channels_max)) - 1 if args.channels == ALL_CHANNELS else args.channels
            client.set_channels(mask)
        if args.edge is not None:
            client.set_edge(args.edge)
        client.start()
        usable: list[Revolution] = []
        seen = 0
        truth: list[list[complex]] = []
        flags_seen: set[str] = set()
        limit = 10 * args.revs + 20
        while len(usable) < args.revs:
            seen_before = client.counts()
            rev = client.read_revolution(args.timeout)
            if rev is None:
                cause = client.diagnose(seen_before, waited_s=args.timeout)
                raise UsageError(
                    f"no revolution from {port} within {args.timeout:g} s ({len(usable)} of {args.revs} so far): {cause}"
                )
            seen += 1
            if counts(rev):
                usable.append(rev)
                if machine is not None:
                    truth.append(list(machine.expected_1x()))
            else:
                flags_seen.update(why_left_out(rev))
            if seen >= limit:
                raise UsageError(
                    f"only {len(usable)} of {seen} revolutions were usable ({', '.join(sorted(flags_seen))}): "
                    "steady the speed, check the reference mark and the pickup's range, then measure again"
                )
        client.stop()
    except TransportLost as exc:
        raise UsageError(f"{exc}, then measure again") from None
    except MeterError as exc:
        raise UsageError(str(exc)) from None
    finally:
        try:
            client.close()
        except Exception:  # noqa: BLE001 - the port may already be gone; the message above says why
            pass
    reading = vector_average(usable, info=client.info)
    out: dict[str, Any] = {
        "rpm": reading.speed_rpm,
        "channels": [
            {
                "amp": ch.amp_g,
                "phase": ch.phase_deg,
                "spread": ch.spread_g,
                "channel": ch.channel,
                "confidence": ch.confidence_g if math.isfinite(ch.confidence_g) else None,
                "velocity_mm_s_rms": convert_1x(ch.amp_g, reading.speed_rpm, "mm/s", "rms"),
            }
            for ch in reading.channels
        ],
        "rpm_sd": reading.speed_sd_rpm,
        "revs": reading.n_revs,
        "rejected": seen - reading.n_revs,
        "lost_frames": client.lost_frames,
        "envelope_warning": client.envelope_warning,
        "port": port,
        "conventions": CONVENTIONS,
        "warnings": list(reading.warnings),
        "fit": reading.fit,
        "front_end": ({"lag_deg": reading.fe_lag_deg, "lag_tol_deg": reading.fe_lag_tol_deg,
                       "gain": reading.fe_gain, "gain_tol": reading.fe_gain_tol}
                      if reading.frontend_text else None),
    }
    if machine is not None and truth:
        expected = []
        for ch in reading.channels:
            samples = [t[ch.channel] if ch.channel < len(t) else complex("nan") for t in truth]
            amp, phase = amp_phase(sum(samples) / len(samples))
            expected.append({"amp": amp, "phase": phase})
        out["expected"] = expected
    return out


def _table(result: dict[str, Any]) -> str:
    lines = [
        f"{result['port']}: {result['revs']} revolutions averaged ({result['rejected']} rejected, "
        f"{result['lost_frames']} frames lost), {result['rpm']:.1f} rpm (sd {result['rpm_sd']:.1f})",
        "1x amplitude in g peak; phase = lag in degrees after the reference mark",
        f"{'ch':>3} {'amp g':>9} {'phase':>7} {'spread g':>9} {'95% g':>9} {'mm/s rms':>9}",
    ]
    expected = result.get("expected")
    for i, ch in enumerate(result["channels"]):
        conf = f"{ch['confidence']:9.4f}" if ch["confidence"] is not None else f"{'-':>9}"
        line = (f"{ch['channel']:>3} {ch['amp']:9.4f} {ch['phase']:7.1f} {ch['spread']:9.4f} {conf} "
                f"{ch['velocity_mm_s_rms']:9.2f}")
        if expected:
            line += f"   simulator truth {expected[i]['amp']:.4f} g at {expected[i]['phase']:.1f}"
        lines.append(line)
    fe = result.get("front_end")
    if fe:
        lines.append(f"front end corrected: lag {fe['lag_deg']:.2f} +-{fe['lag_tol_deg']:.2f} deg, "
                     f"gain {fe['gain']:.3f} +-{100 * fe['gain_tol']:.1f} %")
    for w in result.get("warnings", []):
        lines.append(f"WARNING: {w}")
    if result.get("envelope_warning"):
        lines.append(f"WARNING: {result['envelope_warning']}")
    return "\n".join(lines)


def run(args: Any) -> int:
    port = pick_port(args.port)
    result = _measure(args, port)
    if args.json:
        print(json.dumps(result))
    else:
        print(_table(result))
    return 0
