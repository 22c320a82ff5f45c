"""Balance quality grades as people write them: ``G6.3``, ``G 6.3``, ``6.3``.

Source: ISO 21940-11:2016, *Mechanical vibration - Rotor balancing - Part 11: Procedures and
tolerances for rotors with rigid behaviour*, Table 1 writes the grades ``G 6,3``, ``G 2,5``, ...;
the number is the grade's ``e_per * Omega`` in mm/s.  Dropping the space and writing the decimal
point as a point is common practice in the trade.  The table itself is
``runtrue.balancing.tolerance.STANDARD_GRADES``.
"""

from __future__ import annotations

import re

_GRADE = re.compile(r"\s*[Gg]?\s*([0-9]+(?:\.[0-9]+)?)\s*")


def parse_grade(grade: str | float) -> float:
    """``"G6.3"`` / ``"G 6.3"`` / ``"6.3"`` / ``6.3`` -> 6.3 (mm/s); ValueError with advice otherwise."""
    if isinstance(grade, (int, float)):
        value = float(grade)
    else:
        m = _GRADE.fullmatch(grade)
        if not m:
            raise ValueError(f"balance quality grade {grade!r} not understood: write it like G6.3 or G2.5")
        value = float(m.group(1))
    if not value > 0:
        raise ValueError("balance quality grade must be positive, like G6.3")
    return value


def grade_label(grade: str) -> str:
    """The grade as typed, with the ``G`` the trade writes in front of it: ``"6.3"`` -> ``"G6.3"``."""
    text = grade.strip()
    return text if text.upper().startswith("G") else f"G{text}"
