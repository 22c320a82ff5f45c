"""INFO and SELFTEST replies of the meter as JSON payloads of at most 240 bytes each.

Implements the INFO and SELFTEST payloads of firmware/PROTOCOL.md: UTF-8 JSON objects, split into
parts ("part", "parts") when one frame cannot hold them; the host joins the parts.  Answers to
commands only: these allocate, nothing on the revolution path calls them.
"""

import json

from runtrue_fw.frames import MAX_PAYLOAD


def sig(v: float, digits: int) -> float:
    """`v` rounded to `digits` significant digits."""
    return float("%.*g" % (digits, v))


def dumps(obj) -> str:
    """Compact JSON."""
    try:
        return json.dumps(obj, separators=(",", ":"))
    except TypeError:   # a MicroPython without the separators argument
        return json.dumps(obj)


def info_payloads(items: list) -> list:
    """INFO as UTF-8 JSON objects of at most 240 bytes each from (key, value) pairs: the fields in
    order, as many per frame as fit, each frame with "part" and "parts" (PROTOCOL.md)."""
    groups = []
    cur = {"part": 99, "parts": 99}
    for k, v in items:
        cur[k] = v
        if len(dumps(cur).encode()) > MAX_PAYLOAD:
            del cur[k]
            groups.append(cur)
            cur = {"part": 99, "parts": 99}
            cur[k] = v
    groups.append(cur)
    out = []
    for i in range(len(groups)):
        g = groups[i]
        g["part"] = i
        g["parts"] = len(groups)
        out.append(dumps(g).encode()[:MAX_PAYLOAD])
    return out


def selftest_frames(result: dict) -> list:
    """SELFTEST payloads, each at most 240 bytes (PROTOCOL.md: split into parts if needed).

    Each part is {"pass": overall, "checks": [...some...], "part": i, "parts": n}; the host
    joins the checks of parts 0..n-1.
    """
    checks = result["checks"]
    groups: list = []
    cur: list = []
    for c in checks:
        trial = cur + [c]
        probe = {"pass": result["pass"], "checks": trial, "part": 99, "parts": 99}
        if cur and len(dumps(probe).encode()) > MAX_PAYLOAD:
            groups.append(cur)
            cur = [c]
        else:
            cur = trial
    groups.append(cur)
    out = []
    for i in range(len(groups)):
        body = {"pass": result["pass"], "checks": groups[i], "part": i, "parts": len(groups)}
        out.append(dumps(body).encode()[:MAX_PAYLOAD])
    return out
