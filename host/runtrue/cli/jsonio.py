"""Reading a JSON input file (or standard input) for the JSON-in/JSON-out sub-commands, with
one-line messages for every way it can be wrong."""

from __future__ import annotations

import json
import sys
from typing import Any

from runtrue.cli import UsageError


def _reject_constant(name: str) -> float:
    raise UsageError(f"{name} is not a number; give finite numbers only")


def load_json(path: str) -> Any:
    """The parsed JSON of ``path`` (``-`` for standard input); NaN and Infinity are refused."""
    try:
        if path == "-":
            text = sys.stdin.read()
        else:
            with open(path, encoding="utf-8") as f:
                text = f.read()
    except OSError as exc:
        raise UsageError(f"cannot read {path}: {exc.strerror or exc}") from None
    except UnicodeDecodeError:
        raise UsageError(f"{path} is not UTF-8 text; give a JSON file") from None
    try:
        return json.loads(text, parse_constant=_reject_constant)
    except json.JSONDecodeError as exc:
        raise UsageError(f"{path} is not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}") from None
