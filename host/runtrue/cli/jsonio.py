"""Reading a JSON input file (or standard input) for the JSON-in/JSON-out sub-commands, with
one-line messages for every way it can be wrong, and rounding the numbers they print.  Limits:
at most ``runtrue.validation.MAX_JSON_BYTES`` bytes, nested at most ``MAX_JSON_DEPTH`` deep,
finite numbers only.

Rounding for output (two meanings, both part of the commands' JSON contracts):
:func:`round_sig` keeps significant figures (``solve``, ``tolerance``: values of any size),
:func:`round_places` keeps decimal places (``allocate``: masses, angles and lengths a fitter
reads off a scale or a protractor)."""

from __future__ import annotations

import json
import sys
from typing import Any

from runtrue.cli import UsageError
from runtrue.validation import MAX_JSON_BYTES, MAX_JSON_DEPTH

LIMITS_HELP = (f"Input limits: at most {MAX_JSON_BYTES // 1000} kB, nested at most {MAX_JSON_DEPTH} deep, "
               "finite numbers only.")


def round_sig(x: float, figures: int = 6) -> float:
    """``x`` to ``figures`` significant figures: ``round_sig(1234.5678, 3) == 1230.0``."""
    return float(f"{x:.{figures}g}")


def round_sig_angle_deg(angle_deg: float, figures: int = 6) -> float:
    """An angle to ``figures`` significant figures, then into 0-360 degrees (359.9999999 prints
    as 0.0, not 360.0)."""
    return round_sig(angle_deg, figures) % 360.0


def round_places(x: float, places: int = 6) -> float:
    """``x`` to ``places`` decimal places: ``round_places(2.3456789, 4) == 2.3457``."""
    return float(round(x, places))


def _reject_constant(name: str) -> float:
    raise UsageError(f"{name} is not a number; give finite numbers only")


def _too_large(x: str) -> float:
    v = float(x)
    if v in (float("inf"), float("-inf")):
        raise UsageError(f"the number {x[:20]} is too large; give finite numbers only")
    return v


def _big_int(x: str) -> int:
    if len(x.lstrip("-")) > 30:
        raise UsageError(f"the number {x[:20]}... has {len(x)} digits; give a plausible value")
    return int(x)


def _depth(obj: Any) -> int:
    """Nesting depth of parsed JSON, without recursion."""
    deepest = 0
    stack: list[tuple[Any, int]] = [(obj, 1)]
    while stack:
        node, d = stack.pop()
        if isinstance(node, dict):
            deepest = max(deepest, d)
            stack.extend((v, d + 1) for v in node.values())
        elif isinstance(node, list):
            deepest = max(deepest, d)
            stack.extend((v, d + 1) for v in node)
    return deepest


def _read(path: str) -> bytes:
    if path == "-":
        stream = getattr(sys.stdin, "buffer", None)
        if stream is None:  # a text stream (tests): encode it back
            return sys.stdin.read(MAX_JSON_BYTES + 1).encode("utf-8", "surrogateescape")
        return stream.read(MAX_JSON_BYTES + 1)
    with open(path, "rb") as f:
        return f.read(MAX_JSON_BYTES + 1)


def load_json(path: str) -> Any:
    """The parsed JSON of ``path`` (``-`` for standard input); NaN and Infinity are refused."""
    try:
        raw = _read(path)
    except IsADirectoryError:
        raise UsageError(f"{path} is a folder; give a JSON file") from None
    except OSError as exc:
        raise UsageError(f"cannot read {path}: {exc.strerror or exc}") from None
    if len(raw) > MAX_JSON_BYTES:
        raise UsageError(f"{path} is larger than {MAX_JSON_BYTES // 1000} kB; a job description is far smaller, "
                         "check it is the right file")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise UsageError(f"{path} is not UTF-8 text; give a JSON file") from None
    try:
        data = json.loads(text, parse_constant=_reject_constant, parse_float=_too_large, parse_int=_big_int)
    except RecursionError:
        raise UsageError(f"{path} is nested too deeply (more than {MAX_JSON_DEPTH} levels); check it is the right file") from None
    except json.JSONDecodeError as exc:
        raise UsageError(f"{path} is not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}") from None
    if _depth(data) > MAX_JSON_DEPTH:
        raise UsageError(f"{path} is nested more than {MAX_JSON_DEPTH} levels deep; check it is the right file")
    return data
