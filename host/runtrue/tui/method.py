"""Which balancing method a job uses, and the words the screens show for the amplitude-only one.

The influence-coefficient method needs the reference mark (phase); the amplitude-only method is
the four-run method (``runtrue.jobs.method_four_run``): a chalk mark for angles, one plane, and only
the 1x amplitude of each run.  Pure text, no Textual.
"""

from __future__ import annotations

from typing import Any

FOUR_RUN = "four-run"

PHASE_NOT_USED_NOTE = "phase not used: amplitude-only (four-run) method, only the 1x amplitude counts"
CHALK_ANGLE_NOTE = "weight angles from the chalk mark (0\N{DEGREE SIGN}), against rotation"

TWO_PLANES_REFUSED = (
    "The amplitude-only (four-run) method corrects one plane only, and this machine has 2 correction "
    "planes. Use a reference mark (influence-coefficient method), or describe the machine with 1 plane."
)


def is_four_run(job: Any) -> bool:
    """True for a job by the amplitude-only (four-run) method."""
    return job is not None and getattr(job.state, "method", "") == FOUR_RUN


def method_hint(amplitude_only: bool) -> str:
    """The machine screen's line about the method chosen with F7."""
    if amplitude_only:
        return "Method: NO reference mark - amplitude-only (four-run), 1 plane (F7)."
    return "Method: reference mark and phase - influence coefficients (F7)."
