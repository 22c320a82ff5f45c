"""The evaluation zones A-D of broadband vibration severity and their boundaries per machine
class, without numpy (the command line offers the class keys before it loads anything heavy).

Sources (boundary values quoted from memory and to be checked against the printed standards
before they are relied on; the tests pin the values below, not the standards): ISO 20816-1:2016,
clause 6.2 (the meaning of zones A to D); ISO 20816-3:2022, Annex A, Tables A.1 (machine group 1,
above 300 kW) and A.2 (group 2, 15 kW to 300 kW), rigid and flexible supports; and for small
machines up to 15 kW, which ISO 20816-3 does not cover, ISO 10816-1:1995, Annex B, Table B.1
(classes I to IV).  :mod:`runtrue.diagnosis.severity` measures the velocity judged here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

ZONES = ("A", "B", "C", "D")

ZONE_MEANING = {
    "A": "newly commissioned condition",
    "B": "acceptable for unrestricted long-term operation",
    "C": "unsatisfactory for long-term continuous operation: plan a remedy",
    "D": "severe enough to cause damage: act now",
}


@dataclass(frozen=True)
class ZoneTable:
    """Boundaries A/B, B/C, C/D in mm/s r.m.s. for one machine class, and where they come from."""

    key: str
    title: str
    ab_mm_s: float
    bc_mm_s: float
    cd_mm_s: float
    source: str

    def zone(self, velocity_rms_mm_s: float) -> str:
        """Zone of a broadband velocity RMS; a value on a boundary belongs to the upper zone."""
        v = float(velocity_rms_mm_s)
        if not math.isfinite(v) or v < 0.0:
            raise ValueError(f"velocity must be a finite, non-negative mm/s r.m.s. value, not {velocity_rms_mm_s!r}")
        if v < self.ab_mm_s:
            return "A"
        if v < self.bc_mm_s:
            return "B"
        if v < self.cd_mm_s:
            return "C"
        return "D"


_ISO10816_1 = "ISO 10816-1:1995, Annex B, Table B.1 (values from memory)"
_ISO20816_3_G1 = "ISO 20816-3:2022, Annex A, Table A.1, group 1 (values from memory)"
_ISO20816_3_G2 = "ISO 20816-3:2022, Annex A, Table A.2, group 2 (values from memory)"

ZONE_TABLES: dict[str, ZoneTable] = {
    t.key: t
    for t in (
        ZoneTable("class-I", "small machine up to 15 kW (class I)", 0.71, 1.8, 4.5, _ISO10816_1),
        ZoneTable("class-II", "medium machine 15-75 kW (class II)", 1.12, 2.8, 7.1, _ISO10816_1),
        ZoneTable("class-III", "large machine, rigid foundation (class III)", 1.8, 4.5, 11.2, _ISO10816_1),
        ZoneTable("class-IV", "large machine, soft foundation (class IV)", 2.8, 7.1, 18.0, _ISO10816_1),
        ZoneTable("group2-rigid", "15-300 kW, rigid support (group 2)", 1.4, 2.8, 4.5, _ISO20816_3_G2),
        ZoneTable("group2-flexible", "15-300 kW, flexible support (group 2)", 2.3, 4.5, 7.1, _ISO20816_3_G2),
        ZoneTable("group1-rigid", "over 300 kW, rigid support (group 1)", 2.3, 4.5, 7.1, _ISO20816_3_G1),
        ZoneTable("group1-flexible", "over 300 kW, flexible support (group 1)", 3.5, 7.1, 11.0, _ISO20816_3_G1),
    )
}


def zone_table(key: str) -> ZoneTable:
    """The zone table for a machine class key (see ``ZONE_TABLES``), with a clear error."""
    try:
        return ZONE_TABLES[key]
    except KeyError:
        raise ValueError(f"unknown machine class {key!r}: use one of {', '.join(ZONE_TABLES)}") from None
