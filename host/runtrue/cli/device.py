"""``runtrue device``: put the firmware on a meter (``install``) and check a meter (``check``).

Both take ``--port`` (a serial device, or ``sim:NAME`` for the simulator); without it the one
USB board that looks like a meter is used.  See hardware/BRINGUP.md.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any

from runtrue import validation as v
from runtrue.cli import UsageError, checked

#: Lines of the install and check routines that say why they failed: they go to standard error.
_FAILURE_PREFIXES = ("check failed: ", "install failed: ", "the simulator did not answer",
                     "the simulator reports firmware", "if the board runs MicroPython but not the meter")


#: Revolutions streamed by `device check`: about 40 s at 1,500 rpm at most.
MAX_CHECK_REVS = 1_000


def _check_revs(text: str) -> int:
    return v.whole(text, "--revs", 0, MAX_CHECK_REVS)


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "device",
        help="install the firmware on a meter, or check a meter",
        description="Put the meter firmware on a board running MicroPython, or run the meter's self-test.",
    )
    sub = parser.add_subparsers(dest="device_command", metavar="ACTION")
    inst = sub.add_parser("install", help="copy the firmware to the board (mpremote) and verify it answers")
    inst.add_argument("--port", help="serial port of the board (default: the one USB board found), or sim:NAME")
    chk = sub.add_parser("check", help="run the meter's self-test and explain each result")
    chk.add_argument("--port", help="serial port of the meter (default: the one USB board found), or sim:NAME")
    chk.add_argument("--revs", type=checked(_check_revs), default=20, metavar="N",
                     help=f"revolutions to stream for the reference-pulse check, 0-{MAX_CHECK_REVS} "
                     "(0: skip, e.g. machine stopped)")
    chk.add_argument("--seed", type=checked(v.seed), default=None, help=argparse.SUPPRESS)
    parser.set_defaults(device_parser=parser)


def resolve_port(port: str | None) -> str:
    """The port to use: the one given, or the single USB board that looks like a meter."""
    if port:
        return port
    from runtrue.transport.serial import find_meter_ports

    try:
        candidates = find_meter_ports()
    except Exception as exc:  # noqa: BLE001 - listing ports depends on the OS; say so instead of a traceback
        raise UsageError(f"cannot list serial ports ({exc}); name the board with --port") from None
    likely = [c for c in candidates if c.score > 10]
    if len(likely) == 1:
        return likely[0].device
    if not likely:
        others = ", ".join(c.device for c in candidates)
        seen = f" (serial ports seen: {others})" if others else ""
        raise UsageError(f"no USB board that looks like a meter is plugged in{seen}: plug it in, or name it "
                         "with --port (e.g. --port /dev/ttyACM0, --port COM3, or --port sim:fan)")
    names = ", ".join(f"{c.device} ({c.reason})" for c in likely)
    raise UsageError(f"several boards found: {names}; choose one with --port")


def _check_port_name(port: str) -> None:
    if port.startswith("sim:"):
        from runtrue.transport import scenario_names

        names = scenario_names()
        if port[4:] not in names:
            raise UsageError(f"unknown simulator scenario {port[4:]!r}: choose one of "
                             f"{', '.join(names) or 'none'} (`runtrue scenarios` lists them)")


def run(args: argparse.Namespace) -> int:
    """Progress and the check report go to standard output; a failure ends in one line on
    standard error and exit status 2 (the top-level handler in ``runtrue.cli``)."""
    action = getattr(args, "device_command", None)
    if action is None:
        args.device_parser.print_help()
        return 0
    port = resolve_port(args.port)
    _check_port_name(port)
    failures: list[str] = []

    def out(line: str) -> None:
        if line.startswith(_FAILURE_PREFIXES):
            failures.append(line)
        else:
            print(line, flush=True)

    if action == "install":
        from runtrue.deploy import install

        code = install(port, out=out)
    elif action == "check":
        from runtrue.deploy import check

        code = check(port, stream_revs=args.revs, seed=args.seed, out=out)
    else:
        raise UsageError(f"unknown device action {action!r}: use install or check")
    if code != 0 or failures:
        text = "; ".join(failures) or "some checks failed: see the advice above (hardware/BRINGUP.md)"
        sys.stdout.flush()
        raise UsageError(text)
    return 0
