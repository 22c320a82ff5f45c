"""Firmware tests under CPython: make the shared CPython/MicroPython helpers importable."""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))  # make_frame_vectors
_HELPERS = Path(__file__).resolve().parents[1] / "micropython"
if str(_HELPERS) not in sys.path:
    sys.path.insert(0, str(_HELPERS))
