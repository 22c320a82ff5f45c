"""Which revolutions count in an average: ONE predicate, used by every path that averages.

``runtrue measure``, the application's live screen and reading, the balancing jobs (through
``MeterClient.revolutions(usable_only=True)``), the steadiness judge and
:func:`runtrue.readings.vector_average` all ask :func:`counts`, so they agree on which
revolutions make a reading.  It lives with the messages because it reads nothing but a
revolution's flags, so every layer above the protocol can use it.

A revolution counts when the meter flagged nothing that disqualifies it (``Revolution.usable``:
no missing or extra pulse, speed jump, clipping, dropped samples or failed fit) AND it is not
the FIRST revolution after START (or after the reference stopped).  The meter cannot check a
first revolution against a previous period, so one that spans a missed pulse (two turns long)
or starts on a glitch carries only the FIRST flag; averaged, one such revolution in twenty
moved a reading's 1x by about 5 % and its speed by 2.5 % (measured on the simulator).  The
revolution after it is checked against it and is normally flagged SPEED_JUMP when it was wrong.
"""

from __future__ import annotations

from typing import Any

from runtrue.protocol.messages import FLAG_FIRST


def counts(rev: Any) -> bool:
    """True when ``rev`` may enter an average (see the module doc)."""
    return bool(getattr(rev, "usable", True)) and not int(getattr(rev, "flags", 0)) & FLAG_FIRST


def why_left_out(rev: Any) -> list[str]:
    """The flag names that keep ``rev`` out of an average (empty when it counts)."""
    if counts(rev):
        return []
    names = [n for n in getattr(rev, "flag_names", []) if not n.startswith("clip ch")]
    return names or ["first"]
