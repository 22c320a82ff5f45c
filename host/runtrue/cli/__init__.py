"""The ``runtrue`` command line: a thin dispatcher over one module per sub-command.

Each sub-command lives in its own module under ``runtrue.cli`` and exposes two functions:

``register(subparsers)``
    adds its parser (``subparsers.add_parser(NAME, help=...)``) and its options; it must import
    nothing heavy (numpy, textual, serial) so that ``runtrue --help`` stays fast on a Pi.
``run(args) -> int``
    does the work and returns the exit status.  Bad input is reported by raising
    :class:`UsageError`; the dispatcher prints it as one line on standard error and exits 2.

JSON outputs of ``measure``, ``solve``, ``tolerance``, ``allocate`` and ``demo --auto`` are
contracts other tools rely on: change them only by adding keys.
"""

from __future__ import annotations

import argparse
import importlib
import sys

# Sub-command name -> module.  Order is the order shown in --help.
COMMANDS: dict[str, str] = {
    "demo": "runtrue.cli.demo",
    "app": "runtrue.cli.app",
    "measure": "runtrue.cli.measure",
    "scenarios": "runtrue.cli.scenarios",
    "solve": "runtrue.cli.solve",
    "tolerance": "runtrue.cli.tolerance",
    "allocate": "runtrue.cli.allocate",
    "device": "runtrue.cli.device",
    "jobs": "runtrue.cli.jobs",
    "diagnose": "runtrue.cli.diagnose",
    "coastdown": "runtrue.cli.coastdown",
}


class UsageError(Exception):
    """Bad input from the user: printed as one line on standard error, exit status 2."""


def build_parser() -> tuple[argparse.ArgumentParser, dict[str, object]]:
    parser = argparse.ArgumentParser(
        prog="runtrue",
        description="Balance rotors in place: measure 1x vibration, compute and fit corrections, "
        "check the result against an ISO 21940-11 balance quality grade.",
    )
    from runtrue import __version__

    parser.add_argument("--version", action="version", version=f"runtrue {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    modules: dict[str, object] = {}
    for name, module_name in COMMANDS.items():
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            if exc.name == module_name:
                continue  # sub-command not built yet
            raise
        module.register(sub)  # type: ignore[attr-defined]
        modules[name] = module
    return parser, modules


def main(argv: list[str] | None = None) -> int:
    parser, modules = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 0
    module = modules[args.command]
    try:
        return int(module.run(args) or 0)  # type: ignore[attr-defined]
    except UsageError as exc:
        print(f"runtrue {args.command}: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"runtrue {args.command}: interrupted", file=sys.stderr)
        return 130
