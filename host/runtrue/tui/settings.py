"""Application settings kept between sessions: a small JSON file beside the job database
(``settings.json`` in the data directory).  Only display choices live here (the vibration unit);
jobs and machines stay in the database.  A missing or unreadable file means the defaults: a
setting never stops the application from starting."""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from runtrue.jobs.store import default_db_path
from runtrue.readings.numbers import DEFAULT_VIB_UNIT, check_vib_unit

SETTINGS_FILE = "settings.json"


def settings_path(store_path: str | None) -> Path | None:
    """Beside the job database (``store_path``, else the default one); None for a database in
    memory (tests, a throw-away session): nothing is kept then."""
    if store_path == ":memory:":
        return None
    if store_path:
        return Path(store_path).expanduser().parent / SETTINGS_FILE

    return default_db_path().parent / SETTINGS_FILE


def load_settings(path: Path | None) -> dict[str, Any]:
    """The saved settings, or {} when there are none or the file cannot be used."""
    if path is None:
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def save_setting(path: Path | None, key: str, value: Any) -> str:
    """Keep ``key`` = ``value`` (written whole to a temporary file, then renamed over the old
    one); returns "" or what went wrong, in words."""
    if path is None:
        return ""
    data = load_settings(path)
    data[key] = value
    tmp = path.with_name(path.name + ".tmp")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp.write_text(json.dumps(data, indent=1) + "\n", encoding="utf-8")
        os.replace(tmp, path)
    except OSError as exc:
        return f"could not write {path}: {exc.strerror or exc}"
    return ""


def saved_vib_unit(path: Path | None) -> str:
    """The vibration unit chosen last time, or the default (mm/s rms) if none or not known."""
    value = load_settings(path).get("vib_unit")
    try:
        return check_vib_unit(str(value)) if isinstance(value, str) else DEFAULT_VIB_UNIT
    except ValueError:
        return DEFAULT_VIB_UNIT
