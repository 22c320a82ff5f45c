"""``runtrue app [--port PORT] [--seed N]``: open the terminal application.

Without ``--port`` the application uses the first meter found; with none plugged in it opens
on the picker (meters, simulated machines, manual entry).  ``PORT`` is a serial device,
``sim:NAME`` for a simulated machine (``runtrue scenarios`` lists them) or ``manual`` for
readings typed in from another instrument.  ``--plain`` draws plots without braille.
Imports nothing heavy until it runs.
"""

from __future__ import annotations

import argparse
from typing import Any

from runtrue import validation as v
from runtrue.cli import checked


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "app",
        help="open the terminal application (meter, simulator or manual entry)",
        description="Open the balancing application. Without --port: the first meter found, "
        "else the picker.",
    )
    p.add_argument("--port", default=None, metavar="PORT",
                   help="serial device, sim:NAME (a simulated machine) or manual (type readings in)")
    p.add_argument("--seed", type=checked(v.seed), default=None, metavar="N",
                   help=f"random seed of a simulated machine, 0-{v.MAX_SEED} (the same seed gives the same machine)")
    p.add_argument("--plain", action="store_true", default=None,
                   help="draw plots and the fitting dial with plain characters, for terminals without braille "
                   "(automatic on the Linux console, TERM=linux; or set RUNTRUE_PLAIN=1)")


def _check_port(port: str) -> None:
    from runtrue.cli import UsageError

    if not port.strip():
        raise UsageError("--port is empty: give a serial device, sim:NAME or manual")
    if port.startswith("sim:"):
        from runtrue.transport import scenario_names

        names = scenario_names()
        if port[4:] not in names:
            raise UsageError(
                f"unknown simulated machine {port[4:]!r}; choose one of: {', '.join(names) or 'none installed'}"
            )


def check_job_database() -> None:
    """Open the job database once before the application starts, so a file that cannot be used
    is named in one line here rather than failing inside a screen."""
    from runtrue.cli.jobs import open_store

    open_store(None, create=True).close()


def run(args: argparse.Namespace) -> int:
    if args.port is not None:
        _check_port(args.port)
    check_job_database()
    from runtrue.tui import make_app  # the Textual application, only when asked for

    app = make_app(args.port, seed=args.seed, plain=args.plain)
    app.run()
    return 2 if getattr(app, "failure", "") or getattr(app, "return_code", 0) else 0
