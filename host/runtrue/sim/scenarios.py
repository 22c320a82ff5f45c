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

Conventions (see :mod:`runtrue.sim.rotor`): axial positions in mm along the shaft; lab angles of
pickups and of the reference sensor in degrees counter-clockwise, looking at the rotor from the
end named in ``viewed_from``; ``rotation`` is ``"ccw"`` or ``"cw"`` seen from that same end.
Unbalance and weight angles are measured from the reference mark against rotation; unbalance is
the complex ``g.mm`` value ``|U| e^{+j theta}``.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, field

from runtrue.sim.frontend import METER_A1_S, METER_A2_S2, METER_COUNTS_PER_G
from runtrue.sim.rotor import RigidRotor, support_for


@dataclass(frozen=True)
class Plane:
    """A correction plane: where it is, its radius and the positions available for weights."""

    name: str
    axial_mm: float
    radius_mm: float
    positions: int | None  # equally spaced fixing positions (holes); None = continuous (groove, rim)
    positions_note: str
    initial_unbalance_gmm: complex  # |U| e^{j theta}, theta from the mark against rotation
    first_position_deg: float = 0.0  # angle of position 0 from the mark, against rotation


@dataclass(frozen=True)
class Pickup:
    """An accelerometer on a bearing housing, with what it picks up besides the 1x."""

    name: str
    axial_mm: float
    angle_deg: float  # lab angle of the pickup's axis
    noise_g: float  # white noise at the ADC input, g RMS
    line_g: float  # electrical vibration at twice line frequency, g peak
    harmonics_g: tuple[tuple[int, complex], ...] = ()  # (order k, amp e^{+j lag_k}) g, per k-th cycle
    dc_offset_g: float = 0.0  # accelerometer zero-g offset (removed by the meter)
    line_hum_g: tuple[tuple[int, float], ...] = ()  # (multiple m of the line frequency, g peak), besides line_g


@dataclass(frozen=True)
class SpeedStep:
    """One step of a speed profile: ramp to ``to_rpm`` at ``rpm_per_s`` (0: at once), then hold."""

    to_rpm: float
    rpm_per_s: float = 0.0
    hold_s: float = 0.0


@dataclass(frozen=True)
class FrontEnd:
    """Accelerometer + analog front end + ADC (defaults: the meter's design, hardware/FRONTEND.md)."""

    counts_per_g: float = METER_COUNTS_PER_G  # ratiometric sensitivity at the ADC, counts per g
    zero_code: int = 2048  # ADC code at 0 g (half the reference for a ratiometric part)
    adc_bits: int = 12
    lowpass_a1_s: float = METER_A1_S  # anti-alias filter H = 1/(1 + s a1 + s^2 a2)
    lowpass_a2_s2: float = METER_A2_S2
    ref_delay_us: float = 3.0  # reference conditioning + edge-interrupt latency (a few us)


@dataclass(frozen=True)
class Scenario:
    """A virtual machine's full description."""

    name: str
    description: str  # one line
    rotor: RigidRotor
    speed_rpm: float  # running speed
    rotation: str  # "ccw" or "cw", seen from `viewed_from`
    viewed_from: str
    planes: tuple[Plane, ...]
    pickups: tuple[Pickup, ...]
    ref_angle_deg: float  # lab angle of the once-per-revolution sensor
    grade: float  # suggested balance quality grade G (mm/s), ISO 21940-11
    line_hz: float = 50.0  # mains frequency; electrical vibration is at twice this
    mark_width_deg: float = 15.0  # reflective mark: rising edge at its leading edge, falling at its end
    speed_drift_frac: float = 0.002  # RMS relative speed wander (Ornstein-Uhlenbeck)
    speed_drift_tau_s: float = 2.0  # correlation time of the wander
    coast_down_rpm_per_s: float = 100.0  # deceleration when switched off
    glitch_per_rev: float = 0.0  # expected spurious reference pulses per revolution
    missed_per_rev: float = 0.0  # probability that the mark is not seen on a revolution
    missed_marks: tuple[int, ...] = ()  # mark passages (0 = the first after the machine starts) never seen
    glitch_width_us: float = 30.0
    edge_jitter_us: float = 0.5  # RMS timing jitter of the reference edges
    front_end: FrontEnd = field(default_factory=FrontEnd)
    tolerance_note: str = ""
    start_rpm: float | None = None  # speed when the machine starts (None: at speed_rpm); the profile runs it up
    speed_profile: tuple[SpeedStep, ...] = ()  # steps followed from the start, in order
    profile_repeat: bool = False  # start the profile again after its last step
    source: str = ""  # the file a scenario was read from ("" for the built-ins)

    @property
    def rotor_mass_kg(self) -> float:
        return self.rotor.mass_kg

    @property
    def rotation_sign(self) -> int:
        """+1 counter-clockwise, -1 clockwise, in the lab frame of the angles."""
        if self.rotation == "ccw":
            return 1
        if self.rotation == "cw":
            return -1
        raise ValueError(f"rotation must be 'cw' or 'ccw', not {self.rotation!r}")


def _lumped(parts: list[tuple[float, float, float]]) -> tuple[float, float, float]:
    """(mass_kg, cg_mm, transverse inertia about the CG kg.m^2) of lumped parts
    (mass_kg, axial_mm, own transverse inertia kg.m^2), by the parallel-axis theorem."""
    mass = sum(p[0] for p in parts)
    cg = sum(p[0] * p[1] for p in parts) / mass
    inertia = sum(p[2] + p[0] * ((p[1] - cg) * 1e-3) ** 2 for p in parts)
    return mass, cg, inertia


def _gmm(amount: float, angle_deg: float) -> complex:
    return amount * cmath.exp(1j * math.radians(angle_deg))


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
        planes=(Plane("impeller", -120.0, 160.0, 8, "8 hub bolt holes, M8", _gmm(2400.0, 117.0)),),
        pickups=(Pickup("fan-end bearing, horizontal", 0.0, 0.0, noise_g=0.02, line_g=0.03,
                        harmonics_g=((2, _gmm(0.025, 40.0)), (3, _gmm(0.008, 200.0)))),),
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
                      _gmm(160.0, 305.0)),),
        pickups=(Pickup("outboard bearing, vertical", 180.0, 90.0, noise_g=0.25, line_g=0.12,
                        harmonics_g=((2, _gmm(0.06, 130.0)),), dc_offset_g=0.03),),
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
            Plane("drive-end disc", 80.0, 95.0, 6, "6 tapped holes M10", _gmm(3600.0, 40.0)),
            Plane("far-end disc", 1220.0, 95.0, 6, "6 tapped holes M10", _gmm(2800.0, 250.0), 30.0),
        ),
        pickups=(
            Pickup("drive-end pillow block, horizontal", 0.0, 0.0, noise_g=0.01, line_g=0.02,
                   harmonics_g=((2, _gmm(0.01, 75.0)),)),
            Pickup("far-end pillow block, horizontal", 1300.0, 0.0, noise_g=0.01, line_g=0.015,
                   harmonics_g=((2, _gmm(0.008, 300.0)),)),
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
        planes=(Plane("nose ring", -40.0, 22.0, 12, "12 tapped holes M3 for set screws", _gmm(2.5, 200.0)),),
        pickups=(Pickup("front housing, radial", 0.0, 45.0, noise_g=0.05, line_g=0.02,
                        harmonics_g=((2, _gmm(0.05, 10.0)),)),),
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
    from runtrue.sim.scenario_file import load_scenario_file, looks_like_file

    if looks_like_file(name):
        return load_scenario_file(name)
    known = ", ".join(sorted(SCENARIOS))
    raise ValueError(f"unknown simulator scenario {name!r}; choose one of: {known}, or give a scenario "
                     "file (NAME.toml or NAME.json, see DEVELOPERS.md)")
