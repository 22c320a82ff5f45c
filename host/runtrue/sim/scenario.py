"""What a simulated machine is made of: its planes, pickups, speed profile, front end and the
whole :class:`Scenario` (the built-in machines are in :mod:`runtrue.sim.scenarios`, machines
described in files are read by :mod:`runtrue.sim.scenario_file`).

Conventions (see :mod:`runtrue.sim.rotor`): axial positions in mm along the shaft; lab angles of
pickups and of the reference sensor in degrees counter-clockwise, looking at the rotor from the
end named in ``viewed_from``; ``rotation`` is ``"ccw"`` or ``"cw"`` seen from that same end.
Unbalance and weight angles are measured from the reference mark against rotation; unbalance is
the complex ``g.mm`` value ``|U| e^{+j theta}``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from runtrue.sim.frontend import METER_A1_S, METER_A2_S2, METER_COUNTS_PER_G
from runtrue.sim.rotor import RigidRotor


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
