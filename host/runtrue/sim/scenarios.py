"""Demo scenarios for the simulator: virtual machines of our own invention.

Every number in this module is INVENTED for demonstration (masses, speeds, supports, noise,
unbalance); none is copied from a published example or a real machine's data.  They are chosen
to be plausible for the kind of machine named, so that a balancing job on them looks and feels
like one in the field:

* ``fan``      an extraction-fan impeller overhung on its motor: one plane, 8 bolt holes;
* ``sander``   a belt-sander drive drum: one plane, continuous groove, noisy, 60 Hz mains;
* ``roller``   a drive roll between two pillow blocks: two planes (end discs), two pickups;
* ``spindle``  a small machine spindle at 9,000 rpm (inside the meter's envelope,
  firmware/runtrue_fw/envelope.py): one plane, 12 tapped holes.

More machines can be described in files (:mod:`runtrue.sim.scenario_file`); ``get_scenario``
takes a built-in name or such a file's path.

The conventions for positions, angles and unbalance are those of :mod:`runtrue.sim.scenario`.
"""

from __future__ import annotations

from runtrue.readings.units import phasor
from runtrue.sim.rotor import RigidRotor, support_for
from runtrue.sim.scenario import FrontEnd, Pickup, Plane, Scenario, SpeedStep
from runtrue.sim.scenario_file import load_scenario_file, looks_like_file

__all__ = ["SCENARIOS", "FrontEnd", "Pickup", "Plane", "Scenario", "SpeedStep", "get_scenario"]


def _lumped(parts: list[tuple[float, float, float]]) -> tuple[float, float, float]:
    """(mass_kg, cg_mm, transverse inertia about the CG kg.m^2) of lumped parts
    (mass_kg, axial_mm, own transverse inertia kg.m^2), by the parallel-axis theorem."""
    mass = sum(p[0] for p in parts)
    cg = sum(p[0] * p[1] for p in parts) / mass
    inertia = sum(p[2] + p[0] * ((p[1] - cg) * 1e-3) ** 2 for p in parts)
    return mass, cg, inertia


def _fan() -> Scenario:
    # Impeller disc 8 kg overhung 120 mm outboard of the fan-end bearing; motor rotor 6 kg.
    mass, cg, inertia = _lumped([(8.0, -120.0, 8.0 * 0.18**2 / 4), (6.0, 125.0, 0.024)])
    rotor = RigidRotor(
        mass_kg=mass, transverse_inertia_kgm2=inertia, cg_mm=cg, bearing_a_mm=0.0, bearing_b_mm=250.0,
        support_a=support_for(8.0, 11.0, 0.06, anisotropy=0.2),
        support_b=support_for(6.0, 13.0, 0.06, anisotropy=0.2),
    )
    return Scenario(
        name="fan",
        description="extraction-fan impeller overhung on its motor, one plane, 8 bolt holes, 1470 rpm",
        rotor=rotor, speed_rpm=1470.0, rotation="cw", viewed_from="inlet",
        planes=(Plane("impeller", -120.0, 160.0, 8, "8 hub bolt holes, M8", phasor(2400.0, 117.0)),),
        pickups=(Pickup("fan-end bearing, horizontal", 0.0, 0.0, noise_g=0.02, line_g=0.03,
                        harmonics_g=((2, phasor(0.025, 40.0)), (3, phasor(0.008, 200.0)))),),
        ref_angle_deg=90.0, grade=6.3, line_hz=50.0,
        speed_drift_frac=0.002, speed_drift_tau_s=2.0, coast_down_rpm_per_s=60.0,
        glitch_per_rev=0.002, missed_per_rev=0.002,
        tolerance_note="fans: G 6.3 (ISO 21940-11 guidance table, from memory; check the maker's figure)",
    )


def _sander() -> Scenario:
    # Drive drum 2.2 kg between bearings 180 mm apart; the groove is mid-drum.
    mass, cg, inertia = _lumped([(1.6, 90.0, 1.6 * (3 * 0.05**2 + 0.16**2) / 12), (0.6, 90.0, 0.001)])
    rotor = RigidRotor(
        mass_kg=mass, transverse_inertia_kgm2=inertia, cg_mm=cg, bearing_a_mm=0.0, bearing_b_mm=180.0,
        support_a=support_for(1.1, 80.0, 0.05, anisotropy=0.1),
        support_b=support_for(1.1, 85.0, 0.05, anisotropy=0.1),
    )
    return Scenario(
        name="sander",
        description="belt-sander drive drum, one plane, continuous groove, noisy, 3450 rpm on 60 Hz",
        rotor=rotor, speed_rpm=3450.0, rotation="ccw", viewed_from="motor end",
        planes=(Plane("drum groove", 90.0, 48.0, None, "continuous groove for clip weights",
                      phasor(160.0, 305.0)),),
        pickups=(Pickup("outboard bearing, vertical", 180.0, 90.0, noise_g=0.25, line_g=0.12,
                        harmonics_g=((2, phasor(0.06, 130.0)),), dc_offset_g=0.03),),
        ref_angle_deg=0.0, grade=6.3, line_hz=60.0,
        speed_drift_frac=0.008, speed_drift_tau_s=0.5, coast_down_rpm_per_s=400.0,
        glitch_per_rev=0.01, missed_per_rev=0.003,
        tolerance_note="G 6.3 for general machinery drums (common practice)",
    )


def _roller() -> Scenario:
    # Steel roll 1200 mm long between pillow blocks at 0 and 1300 mm; end discs at 80 and 1220 mm.
    shell = (30.0, 650.0, 30.0 * (3 * 0.11**2 + 1.2**2) / 12)
    journals = (8.0, 650.0, 8.0 * 1.4**2 / 12)
    mass, cg, inertia = _lumped([shell, journals])
    rotor = RigidRotor(
        mass_kg=mass, transverse_inertia_kgm2=inertia, cg_mm=cg, bearing_a_mm=0.0, bearing_b_mm=1300.0,
        support_a=support_for(19.0, 21.0, 0.07, anisotropy=0.1),
        support_b=support_for(19.0, 24.0, 0.07, anisotropy=0.1),
    )
    return Scenario(
        name="roller",
        description="drive roll between two pillow blocks, two planes (end discs, 6 holes each), 980 rpm",
        rotor=rotor, speed_rpm=980.0, rotation="ccw", viewed_from="drive end",
        planes=(
            Plane("drive-end disc", 80.0, 95.0, 6, "6 tapped holes M10", phasor(3600.0, 40.0)),
            Plane("far-end disc", 1220.0, 95.0, 6, "6 tapped holes M10", phasor(2800.0, 250.0), 30.0),
        ),
        pickups=(
            Pickup("drive-end pillow block, horizontal", 0.0, 0.0, noise_g=0.01, line_g=0.02,
                   harmonics_g=((2, phasor(0.01, 75.0)),)),
            Pickup("far-end pillow block, horizontal", 1300.0, 0.0, noise_g=0.01, line_g=0.015,
                   harmonics_g=((2, phasor(0.008, 300.0)),)),
        ),
        ref_angle_deg=270.0, grade=6.3, line_hz=50.0,
        speed_drift_frac=0.003, speed_drift_tau_s=3.0, coast_down_rpm_per_s=50.0,
        glitch_per_rev=0.002, missed_per_rev=0.002,
        tolerance_note="rolls: G 6.3 (common practice; check the machine maker's figure)",
    )


def _spindle() -> Scenario:
    # Small spindle: 1.6 kg rotor, bearings 140 mm apart, tool nose 40 mm outboard.
    mass, cg, inertia = _lumped([(1.2, 70.0, 1.2 * (3 * 0.02**2 + 0.14**2) / 12), (0.4, -40.0, 0.0002)])
    rotor = RigidRotor(
        mass_kg=mass, transverse_inertia_kgm2=inertia, cg_mm=cg, bearing_a_mm=0.0, bearing_b_mm=140.0,
        support_a=support_for(0.9, 230.0, 0.04, anisotropy=0.05),
        support_b=support_for(0.7, 260.0, 0.04, anisotropy=0.05),
    )
    return Scenario(
        name="spindle",
        description="small machine spindle, one plane at the nose ring, 12 tapped holes, 9000 rpm",
        rotor=rotor, speed_rpm=9000.0, rotation="cw", viewed_from="tool end",
        planes=(Plane("nose ring", -40.0, 22.0, 12, "12 tapped holes M3 for set screws", phasor(2.5, 200.0)),),
        pickups=(Pickup("front housing, radial", 0.0, 45.0, noise_g=0.05, line_g=0.02,
                        harmonics_g=((2, phasor(0.05, 10.0)),)),),
        ref_angle_deg=180.0, grade=2.5, line_hz=50.0,
        speed_drift_frac=0.001, speed_drift_tau_s=1.0, coast_down_rpm_per_s=2000.0,
        glitch_per_rev=0.0005, missed_per_rev=0.0005, mark_width_deg=30.0,
        tolerance_note="spindles: G 2.5 or finer (ISO 21940-11 guidance table, from memory)",
    )


SCENARIOS: dict[str, Scenario] = {s.name: s for s in (_fan(), _sander(), _roller(), _spindle())}


def get_scenario(name: str) -> Scenario:
    """The built-in scenario called ``name``, or the scenario file ``name`` (a path ending in
    .toml or .json, :mod:`runtrue.sim.scenario_file`); ValueError saying what to do otherwise
    (``ScenarioFileError``, a ValueError, for a bad file)."""
    if name in SCENARIOS:
        return SCENARIOS[name]
    if looks_like_file(name):
        return load_scenario_file(name)
    known = ", ".join(sorted(SCENARIOS))
    raise ValueError(f"unknown simulator scenario {name!r}; choose one of: {known}, or give a scenario "
                     "file (NAME.toml or NAME.json, see DEVELOPERS.md)")
