"""The runtrue terminal application (Textual).

``make_app(port=None, *, seed=None)`` is the one factory used by the command line
(``runtrue app``, ``runtrue demo``), the tests and the snapshot app.  ``port`` is a serial
device, ``"sim:NAME"`` for a simulated machine, ``"manual"`` for readings typed in from another
instrument, or None to use the first meter found (else the picker).
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
    default ./reports)."""
    from runtrue.tui.app import RuntrueApp

    return RuntrueApp(port, seed=seed, **options)
