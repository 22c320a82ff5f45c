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
#: The meter sends STATUS about once a second while streaming (PROTOCOL.md); a silence longer
#: than this while streaming means the meter itself went quiet.
STATUS_SILENCE_S = 2.5


def link_diagnosis(*, bytes_in: int, frames_ok: int, framing_errors: int, crc_errors: int,
                   version_errors: int, restarts: int, revolutions: int, streaming: bool,
                   waited_s: float = 0.0) -> str:
    """The likeliest cause of a silent or failing link, from what the host saw in the same time
    window (counts since the wait began), in words for the user.  The order is the order of
    evidence: a restart seen explains the silence after it; bytes that never form a frame point
    at the wrong device or noise, not at missing reference pulses.  Common practice."""
    if restarts:
        return ("the meter restarted (a power dip, a loose USB cable or a firmware reset) and stopped "
                "streaming; check the cable and the meter's supply, then measure again")
    if version_errors and not frames_ok:
        return ("the meter speaks another protocol version: install the firmware that matches this "
                "runtrue with `runtrue device install`")
    bad = framing_errors + crc_errors
    if bad and frames_ok == 0:
        return (f"bytes arrive but none forms a valid frame ({framing_errors} framing and {crc_errors} "
                "checksum errors): this port may be another device, the board may run other firmware, "
                "or the cable picks up electrical noise; check the port, try `runtrue device check`, and "
                "route the USB cable away from motor and drive wiring")
    if bad > frames_ok:
        return (f"most frames arrive damaged ({bad} bad, {frames_ok} good): electrical noise on the USB "
                "cable or a failing cable or hub; use a short shielded cable away from drive wiring")
    if bytes_in == 0 and streaming and waited_s >= STATUS_SILENCE_S:
        return ("nothing at all came from the meter, not even its once-a-second status: it stopped "
                "streaming or hung; unplug and re-plug it")
    if bytes_in == 0 and not streaming:
        return ("nothing at all came back: this port is not a runtrue meter, or the runtrue firmware is not "
                "running on it (`runtrue device check` tells which; `runtrue device install` puts it on)")
    if streaming and revolutions == 0:
        return ("the meter answers but sends no revolutions: are the reference pulses missing? Check the "
                "machine is running and the reference sensor sees its mark once per revolution (its gap, "
                "its LED, the edge setting)")
    return "the meter answers, but not in time: try again, or unplug and re-plug the meter"


def no_answer_text(port: str, cause: str) -> str:
    """Why the meter on ``port`` gave no answer, in one line."""
    return f"no answer from the meter on {port}: {cause}"


def flagged_advice(port: str, n_flagged: int, n_good: int, n_wanted: int, flagged: dict[str, int]) -> str:
    """What to check when too many revolutions came flagged while ``n_wanted`` usable ones were
    being collected (``flagged``: flag name -> how many)."""
    names = sorted(flagged, key=lambda k: -flagged[k])
    seen = ", ".join(f"{k} x{flagged[k]}" for k in names) or "unknown flags"
    advice = "; ".join(f"{k}: {FLAG_ADVICE[k]}" for k in names if k in FLAG_ADVICE) or "run `runtrue device check`"
    return (f"{n_flagged} revolutions from the meter on {port} were flagged and left out "
            f"({n_good} of {n_wanted} usable so far; {seen}): {advice}")
