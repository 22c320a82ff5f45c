"""Writes tests/vectors/frames.json from the firmware encoder: python tests/firmware/make_frame_vectors.py"""

from __future__ import annotations

import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
VECTORS = ROOT / "tests" / "vectors" / "frames.json"


def render() -> str:
    sys.path.insert(0, str(ROOT / "tests" / "micropython"))
    from rtlib.vectors import build

    return json.dumps(build(), indent=1) + "\n"


if __name__ == "__main__":
    VECTORS.parent.mkdir(exist_ok=True)
    VECTORS.write_text(render())
    print(f"wrote {VECTORS}")
