"""What to do about each revolution flag (PROTOCOL.md, REV flags), in the words shown to the user
by the device client, `runtrue device check` and the application.  Common practice."""

from __future__ import annotations

#: Flagged revolutions tolerated while collecting usable ones, before saying what to check (our choice).
FLAGGED_LIMIT = 50

#: Flag name (as in ``runtrue.protocol.messages.FLAG_NAMES``) -> what to check or do.
FLAG_ADVICE = {
    "clipped": "the vibration exceeds the sensor's range at this speed: remove or reduce any trial "
    "weight, or check the pickup is fixed firmly",
    "missing pulse": "move the sensor closer, enlarge or clean the mark, or try the other edge",
    "extra pulse": "something else reflects (bolt heads, shiny paint): mask it or narrow the mark",
    "speed jump": "the speed is not steady: let the machine settle, check belts and the drive",
    "dropped samples": "the meter is losing samples: close other programs on the link, or lower the sample rate",
    "first": "the first revolution after starting, or after the reference stopped, is never averaged "
    "(its period cannot be checked); nothing to do unless it keeps happening: then check the reference sensor",
    "no fit": "the revolutions are too long or too short for the sample rate: check the speed and --rate",
}


def envelope_warning(speed_rpm: float, min_rpm: float, max_rpm: float) -> str | None:
    """A warning when the machine turns outside the meter's envelope (INFO ``min_rpm``/``max_rpm``,
    firmware/runtrue_fw/envelope.py), or None inside it (or when the meter does not say)."""
    if max_rpm > 0 and speed_rpm > max_rpm * 1.02:
        return (f"the machine turns at {speed_rpm:,.0f} rpm, above the meter's {max_rpm:,.0f} rpm limit at "
                "this sample rate: revolutions are too short to fit or too many for the meter to keep up; "
                "readings are not trustworthy (firmware/README.md, envelope)")
    if min_rpm > 0 and 0 < speed_rpm < min_rpm * 0.98:
        return (f"the machine turns at {speed_rpm:,.0f} rpm, below the meter's {min_rpm:,.0f} rpm limit at "
                "this sample rate: revolutions are longer than the meter holds; lower the sample rate (--rate)")
    return None
