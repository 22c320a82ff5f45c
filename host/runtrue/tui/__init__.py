"""The runtrue terminal application (Textual).

``make_app(port=None, *, seed=None)`` is the one factory used by the command line
(``runtrue app``, ``runtrue demo``), the tests and the snapshot app.  ``port`` is a serial
device, ``"sim:NAME"`` for a simulated machine, ``"manual"`` for readings typed in from another
instrument, or None to use the first meter found (else the picker).

Screens, one module each under ``runtrue.tui.screens`` (every key is shown in the footer):

1. connect  - meters found, simulated machines, manual entry; device info and self-test (t)
2. machine  - saved machines and unfinished jobs; the machine form; grade table (F3); start (F2);
              F7: no reference mark, the amplitude-only (four-run) method, one plane only
3. live     - 1x per pickup, speed, steadiness, polar scatter; take a reading (space) or when
              steady (a); opened by the runs screen for each reading.  Four-run: amplitudes
              only, earlier runs' amplitudes as bars instead of the polar plot (phase not used)
4. runs     - the step now (reference, trial, correction, trim; four-run: trial 1-3) in plain
              instructions with the angle convention and cautions; reading (r), fitting (f),
              trial weight (w); for two planes the correction's static and couple parts
5. fitting  - the rotor dial (mark, rotation, positions, placements) and a tick-off list with the
              force each weight must hold
6. result   - before/after, residual against permissible, pass/fail; HTML report (h), CSV and
              JSON export (e)

Meter I/O runs in one thread (``runtrue.tui.link.MeterLink``) that only posts messages
(``runtrue.tui.messages``); the job itself is ``runtrue.jobs.BalanceJob``, saved as it goes.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from runtrue.tui.app import RuntrueApp


def make_app(port: str | None = None, *, seed: int | None = None, **options: Any) -> RuntrueApp:
    """Build the application.  Options (keyword only, for tests and the demo):
    ``realtime`` (simulator paced like a real machine, default True), ``store_path`` (job
    database file, default the user's data directory), ``revs_per_reading`` (default 32),
    ``opener`` (replaces ``runtrue.device.open_meter``), ``post_interval_s`` (how often
    revolutions are handed to the screen), ``max_revs_per_s`` (cap for a non-realtime simulator),
    ``auto_take`` (take each reading by itself once steady), ``report_dir`` (where reports go,
    default ./reports), ``plain`` (plots and the dial in plain characters instead of braille;
    default: on the Linux console, TERM=linux, or as RUNTRUE_PLAIN=1/0 says)."""
    from runtrue.tui.app import RuntrueApp

    return RuntrueApp(port, seed=seed, **options)
