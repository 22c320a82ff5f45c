"""Simulator tests: make sure the firmware package imports as a regular package.

A venv whose editable install was made before firmware/runtrue_fw/__init__.py existed maps
``runtrue_fw`` as a namespace package (then ``from runtrue_fw import FW_VERSION`` fails);
putting firmware/ first on sys.path gives the real package either way.
"""

from __future__ import annotations

import sys
from pathlib import Path

_FIRMWARE = str(Path(__file__).resolve().parents[3] / "firmware")
if _FIRMWARE not in sys.path:
    sys.path.insert(0, _FIRMWARE)
