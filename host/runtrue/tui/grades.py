"""A short table of typical balance quality grades by rotor type, for choosing a grade.

Source: ISO 21940-11:2016, "Mechanical vibration - Rotor balancing - Part 11: Procedures and
tolerances for rotors with rigid behaviour", Table 1 (guidance balance quality grades for rigid
rotors).  The rows below are quoted FROM MEMORY, shortened, and not checked against the
standard's text: confirm against the standard, the machine maker's figure or your customer's
specification before relying on them.  The grade G is the product e*omega in mm/s.
"""

from __future__ import annotations

SOURCE = "ISO 21940-11:2016, Table 1 (from memory; check the standard)"

TYPICAL_GRADES: tuple[tuple[str, str], ...] = (
    ("G40", "car wheels and rims, drive shafts"),
    ("G16", "agricultural machinery parts, crushing machines, drive shafts with special requirements"),
    ("G6.3", "fans, pumps, centrifuges, flywheels, process-plant machinery, general machinery parts"),
    ("G6.3", "electric motors (shaft height >= 80 mm) up to about 950 rpm"),
    ("G2.5", "electric motors above about 950 rpm, gas and steam turbines, turbo-compressors, machine-tool drives"),
    ("G1", "grinding-machine drives, small motors with special requirements"),
    ("G0.4", "spindles and discs of precision grinders, gyroscopes"),
)
