"""A short table of typical balance quality grades by rotor type, for choosing a grade.

Source: ISO 21940-11:2016, "Mechanical vibration - Rotor balancing - Part 11: Procedures and
tolerances for rotors with rigid behaviour", first edition (2016-11-15), Table 1 "Guidance for
balance quality grades for rotors with rigid behaviour".  The grades and rotor types below were
checked against a published reproduction of that table (the rows are shortened; the table itself
adds crankshaft drives from G 4000 to G 16, which are not balanced in the field).  Not verified:
the reproduction prints "up to 950 r/min" in both the G 6.3 and the G 2.5 row for electric motors
and generators of at least 80 mm shaft height; the G 2.5 row is read here as "above 950 r/min",
the sense of the table (from memory).  The standard's note applies: the next higher or lower grade
may be used depending on the application.  The grade G is the product e_per x omega in mm/s.
"""

from __future__ import annotations

SOURCE = "ISO 21940-11:2016, Table 1 (shortened). The maker's or customer's figure comes first"

TYPICAL_GRADES: tuple[tuple[str, str], ...] = (
    ("G40", "car wheels, wheel rims and wheel sets, drive shafts"),
    ("G16", "agricultural machinery, crushers, cardan and propeller shafts"),
    ("G6.3", "fans, pumps, centrifuges, gears, machine tools, paper machines"),
    ("G6.3", "process-plant machines, machinery in general, turbochargers"),
    ("G6.3", "water turbines, aircraft gas turbines"),
    ("G6.3", "motors, generators >= 80 mm shaft height, up to 950 rpm"),
    ("G6.3", "electric motors below 80 mm shaft height"),
    ("G2.5", "motors, generators >= 80 mm shaft height, above 950 rpm"),
    ("G2.5", "compressors, gas and steam turbines, machine-tool drives"),
    ("G2.5", "textile machines, computer drives"),
    ("G1", "grinding-machine drives, audio and video drives"),
    ("G0.4", "gyroscopes, spindles and drives of high-precision systems"),
)
