"""The simulator's scenarios as machines a job can run on, with a demo shop stock for each.

A scenario is found through the transport layer's source registry (``sim:NAME``), where the
simulator registers itself; this module does not name the simulator.

The stock below is INVENTED for the demo scenarios (like the scenarios themselves): plausible
washers, clip weights and set screws for each kind of machine, nothing from a real catalogue.
"""

from __future__ import annotations

from typing import Any

from runtrue.jobs.model import Machine, Pickup, PlaneSpec, StockPiece
from runtrue.transport import SIM_SCHEME
from runtrue.transport.registry import describe_source

# Demo stock per scenario: (pieces [(mass_g, count)], max pieces per position).  Invented.
DEMO_STOCK: dict[str, tuple[list[tuple[float, int]], int]] = {
    "fan": ([(1.0, 12), (2.0, 12), (5.0, 8), (10.0, 4)], 3),  # steel washers on the hub bolts
    "sander": ([(0.5, 10), (1.0, 10), (2.0, 6)], 3),  # clip weights in the groove
    "roller": ([(2.0, 12), (5.0, 12), (10.0, 8), (20.0, 6)], 4),  # washers under M10 bolts
    "spindle": ([(0.01, 6), (0.02, 6), (0.05, 6), (0.1, 6), (0.2, 4)], 2),  # set screws of several lengths
}


def _drive_end_rotation(rotation: str, viewed_from: str) -> str:
    """Scenario rotation is seen from ``viewed_from``; a Machine's is seen from the drive end."""
    v = viewed_from.lower()
    if "drive" in v or "motor" in v:
        return rotation
    return "ccw" if rotation == "cw" else "cw"


def machine_for_scenario(scenario: Any, *, stock: bool = True) -> Machine:
    """A :class:`Machine` describing simulator scenario ``scenario`` (a Scenario or its name)."""
    if isinstance(scenario, str):
        scenario = describe_source(SIM_SCHEME, scenario)
    planes = []
    pieces, max_pieces = DEMO_STOCK.get(scenario.name, ([], 3))
    for p in scenario.planes:
        if p.positions is None:
            planes.append(PlaneSpec(radius_mm=p.radius_mm, name=p.name, continuous=True,
                                    max_pieces_per_position=max_pieces))
        else:
            planes.append(PlaneSpec(radius_mm=p.radius_mm, name=p.name, count=int(p.positions),
                                    first_angle_deg=float(getattr(p, "first_position_deg", 0.0)),
                                    max_pieces_per_position=max_pieces))
    return Machine(
        name=f"demo: {scenario.name}",
        rotor_mass_kg=float(scenario.rotor_mass_kg),
        speed_rpm=float(scenario.speed_rpm),
        rotation=_drive_end_rotation(scenario.rotation, scenario.viewed_from),  # type: ignore[arg-type]
        grade=f"G{scenario.grade:g}",
        planes=planes,
        pickups=[Pickup(label=pk.name, angle_deg=float(pk.angle_deg)) for pk in scenario.pickups],
        stock=[StockPiece(m, c) for m, c in pieces] if stock else [],
        notes=f"Simulator scenario {scenario.name!r}: {scenario.description}",
    )
