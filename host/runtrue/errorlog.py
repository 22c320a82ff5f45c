"""Where an unexpected error goes: a log file in the user's data directory, never the screen.

A user sees one line saying what happened and where the details are; the traceback goes to
``runtrue-errors.log`` beside the job database (``$RUNTRUE_DATA_DIR`` when set, else
``platformdirs.user_data_dir("runtrue")``), for a report.  The log keeps the newest
``MAX_LOG_BYTES`` or so: a program that fails on every start cannot fill the disk.
"""

from __future__ import annotations

import os
import traceback
from datetime import datetime, timezone
from pathlib import Path

LOG_FILENAME = "runtrue-errors.log"
MAX_LOG_BYTES = 1_000_000


def log_path() -> Path:
    env = os.environ.get("RUNTRUE_DATA_DIR")
    if env:
        return Path(env) / LOG_FILENAME
    import platformdirs  # where user data lives on each OS

    return Path(platformdirs.user_data_dir("runtrue")) / LOG_FILENAME


def log_exception(exc: BaseException, where: str) -> str:
    """Append ``exc`` with its traceback to the log; returns the log's path as text, or a short
    reason when the log itself cannot be written (the caller shows it either way)."""
    try:
        path = log_path()
        path.parent.mkdir(parents=True, exist_ok=True)
        if path.exists() and path.stat().st_size > MAX_LOG_BYTES:
            old = path.read_bytes()[-MAX_LOG_BYTES // 2 :]
            path.write_bytes(old)
        stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        body = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
        with path.open("a", encoding="utf-8") as f:
            f.write(f"--- {stamp} {where}\n{body}\n")
        return str(path)
    except Exception as log_exc:  # noqa: BLE001 - the log is best effort; the message still shows
        return f"(the error log could not be written: {type(log_exc).__name__})"


def one_line(exc: BaseException, limit: int = 160) -> str:
    """``Type: message`` on one line, cut to ``limit`` characters."""
    text = " ".join(str(exc).split()) or "no details"
    line = f"{type(exc).__name__}: {text}"
    return line if len(line) <= limit else line[: limit - 3] + "..."
