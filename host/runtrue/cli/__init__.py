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
import os
import sys
from collections.abc import Callable
from typing import Any, NoReturn

from runtrue import plugins

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


#: Exit status of every refusal and every failure: bad input, a device that failed, a bug.
EXIT_FAILURE = 2


class _Parser(argparse.ArgumentParser):
    """argparse with its errors turned into one line (instead of usage plus a line) and exit 2."""

    def error(self, message: str) -> NoReturn:
        raise UsageError(f"{message}; see `{self.prog} --help`")


def checked(check: Callable[[Any], Any]) -> Callable[[str], Any]:
    """An argparse ``type=`` from a :mod:`runtrue.validation` check: the option's text goes
    through the shared limits, and a refusal becomes argparse's one-line error."""

    def convert(text: str) -> Any:
        from runtrue.validation import ValidationError

        try:
            return check(text)
        except ValidationError as exc:
            message = str(exc)
            if message.startswith("--"):  # argparse names the option already
                message = message.split(" ", 1)[-1]
            raise argparse.ArgumentTypeError(message) from None

    convert.__name__ = getattr(check, "__name__", "value")
    return convert


def int_text(text: str) -> int:
    """A whole number typed on the command line (``12``, ``-1``, ``1e3`` refused as not whole)."""
    try:
        return int(text.strip())
    except ValueError:
        raise ValueError(f"write a whole number (got {text[:40]!r})") from None


def build_parser() -> tuple[argparse.ArgumentParser, dict[str, object]]:
    parser = _Parser(
        prog="runtrue",
        description="Balance rotors in place: measure 1x vibration, compute and fit corrections, "
        "check the result against an ISO 21940-11 balance quality grade. Every refusal is one line "
        "on standard error with exit status 2.",
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
        module.register(sub)
        modules[name] = module
    return parser, modules


def _quiet_stdout() -> None:
    """The reader of standard output went away (``| head``): send the rest nowhere, so Python
    does not complain about the pipe when it flushes at exit."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):
        pass


def _say(command: str | None, text: str) -> None:
    """One line on standard error (control characters and newlines from input made visible)."""
    line = " ".join(text.split())
    line = "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in line)
    try:
        print(f"runtrue {command}: {line}" if command else f"runtrue: {line}", file=sys.stderr)
    except (OSError, ValueError):
        pass


def main(argv: list[str] | None = None) -> int:
    """Run one command.  Whatever the argv and the input, the outcome is the command's output
    and exit 0, or one line on standard error and exit 2 (130 when interrupted); never a
    traceback.  An unexpected error is logged with its traceback (``runtrue.errorlog``)."""
    command: str | None = None
    try:
        plugins.load()
        parser, modules = build_parser()
        args = parser.parse_args(argv)
        command = args.command
        if command is None:
            parser.print_help()
            return 0
        module = modules[command]
        return int(module.run(args) or 0)  # type: ignore[attr-defined]
    except UsageError as exc:
        if command is None and argv is None:
            command = next((a for a in sys.argv[1:] if a in COMMANDS), None)
        elif command is None:
            command = next((a for a in argv or [] if a in COMMANDS), None)
        _say(command, str(exc))
        return EXIT_FAILURE
    except BrokenPipeError:
        _quiet_stdout()
        return 0
    except KeyboardInterrupt:
        _say(command, "interrupted")
        return 130
    except RecursionError:
        _say(command, "the input is nested too deeply to read; simplify it")
        return EXIT_FAILURE
    except MemoryError:
        _say(command, "the input is too large to handle in memory; give a smaller one")
        return EXIT_FAILURE
    except Exception as exc:  # noqa: BLE001 - a bug must still end in one line, never a traceback
        from runtrue.errorlog import log_exception, one_line

        where = log_exception(exc, f"runtrue {command or ''}".strip())
        _say(command, f"unexpected error ({one_line(exc, 100)}); details in {where}; "
                      "please report it with the output of `runtrue --version`")
        return EXIT_FAILURE
