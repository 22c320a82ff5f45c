"""The virtual machine: a rotor with unbalance, spinning, seen by accelerometers and a mark sensor.

Physics in :mod:`runtrue.sim.rotor` (rigid rotor on flexible, damped supports), front end and
ADC in :mod:`runtrue.sim.frontend`.  This module adds time: the speed (nominal, a slow random
wander as an Ornstein-Uhlenbeck process (G. E. Uhlenbeck and L. S. Ornstein, Phys. Rev. 36,
1930), ramps and coast-down), the rotor angle, the pickups' signals and the reference edges.

Geometry (the physical convention of :mod:`runtrue.sim.rotor`, not the meter's convention): the rotor
angle ``Theta(t)`` is zero when the mark's leading edge passes the reference sensor; a point at
rotor angle theta (from the mark, against rotation) passes a fixed sensor theta/Omega later.  The
unbalance is a force rotating with the rotor; each pickup reads ``Re(P e^{j Theta})`` with P from
the support dynamics at the current speed.  The optical sensor gives a rising edge when the
mark's leading edge arrives and a falling edge ``mark_width_deg`` later, both delayed by the
reference conditioning (``ref_delay_us``).

Signals change slowly with speed; within one block the response is interpolated linearly between
its values at the block's start and end speeds (quasi-steady response: transients of the support
dynamics during fast speed changes are not modelled).

Convention of :meth:`VirtualMachine.expected_1x`: the meter's (PROTOCOL.md): ``amp e^{+j lag}``
with ``lag`` the phase lag after the ACTIVE reference edge as the host reports it: the vibration
itself (the host divides the anti-alias filter's response out, from the meter's INFO ``fe``),
including the reference conditioning delay; the sampling offset of a channel within
the ADC's round-robin is included only if the meter does not correct it (it does when the
board's ``info()`` says ``round_robin``, as SimBoard's does).
"""

from __future__ import annotations

import cmath
import math
import operator
import threading
from dataclasses import dataclass

import numpy as np

from runtrue.readings.units import phasor
from runtrue.sim.frontend import lowpass_response
from runtrue.sim.rotor import G0_M_PER_S2, pickup_acceleration_phasors
from runtrue.sim.scenarios import Scenario, get_scenario

TWO_PI = 2.0 * math.pi


@dataclass(frozen=True)
class Weight:
    """A weight fitted to the virtual rotor."""

    plane: int
    mass_g: float
    angle_deg: float  # from the mark, against rotation
    radius_mm: float

    @property
    def unbalance_gmm(self) -> complex:
        return phasor(self.mass_g * self.radius_mm, self.angle_deg)


@dataclass
class Edge:
    """A reference-sensor edge as the board's edge input sees it (absolute machine time)."""

    t_s: float
    rising: bool
    glitch: bool = False


class VirtualMachine:
    """A running rotor.  Thread-safe: weights may change while another thread samples it."""

    def __init__(self, scenario: Scenario | str, seed: int | None = None) -> None:
        self.scenario: Scenario = get_scenario(scenario) if isinstance(scenario, str) else scenario
        sc = self.scenario
        self._s = sc.rotation_sign
        self._rng = np.random.default_rng(seed)
        self._lock = threading.RLock()
        self._weights: dict[int, Weight] = {}
        self._next_id = 1
        self.t_s = 0.0
        self._theta = float(self._rng.uniform(0.0, TWO_PI))  # rotor angle since a mark passage
        self._nominal_rpm = sc.speed_rpm if sc.start_rpm is None else sc.start_rpm
        self._target_rpm = self._nominal_rpm
        self._ramp_rpm_per_s = 0.0
        self._profile = sc.speed_profile  # followed until set_speed_rpm takes over
        self._profile_i = 0
        self._hold_left_s = 0.0
        self._drift = 0.0  # relative speed wander (OU state)
        self._omega = self._omega_now()
        self._omega_dot = 0.0
        self._falling = False
        self._channel_delay_s = [0.0] * len(sc.pickups)
        self._skew_corrected = True
        self._line_phase = self._rng.uniform(0.0, TWO_PI, size=len(sc.pickups))
        self._missed_next = False
        self._passages = 0  # mark passages so far (for the scenario's missed_marks)

    # ---- weights and unbalance -----------------------------------------------------------
    def add_weight(self, plane: int, mass_g: float, angle_deg: float, radius_mm: float) -> int:
        """Fit a weight (angle from the mark, against rotation); returns its id."""
        n_planes = len(self.scenario.planes)
        try:
            plane_i = operator.index(plane)
        except TypeError:
            plane_i = -1
        if not 0 <= plane_i < n_planes:
            raise ValueError(f"plane must be 0..{n_planes - 1} for scenario {self.scenario.name!r}, not {plane!r}")
        if not (math.isfinite(mass_g) and mass_g >= 0.0):
            raise ValueError(
                f"mass_g must be a finite mass of 0 g or more, not {mass_g!r} "
                "(to model material drilled out, add the same mass 180 deg away)"
            )
        if not (math.isfinite(radius_mm) and radius_mm > 0.0):
            raise ValueError(f"radius_mm must be a positive radius, not {radius_mm!r}")
        if not math.isfinite(angle_deg):
            raise ValueError(f"angle_deg must be a finite angle, not {angle_deg!r}")
        with self._lock:
            wid = self._next_id
            self._next_id += 1
            self._weights[wid] = Weight(plane_i, float(mass_g), float(angle_deg), float(radius_mm))
            return wid

    def remove_weight(self, weight_id: int) -> None:
        with self._lock:
            if weight_id not in self._weights:
                fitted = ", ".join(str(k) for k in sorted(self._weights)) or "none"
                raise ValueError(f"no weight with id {weight_id!r} on the rotor (fitted: {fitted})")
            del self._weights[weight_id]

    def weights(self) -> dict[int, Weight]:
        with self._lock:
            return dict(self._weights)

    def unbalance_gmm(self) -> list[complex]:
        """Total unbalance per plane (initial + fitted weights), |U| e^{j theta} in g.mm."""
        with self._lock:
            total = [complex(p.initial_unbalance_gmm) for p in self.scenario.planes]
            for w in self._weights.values():
                total[w.plane] += w.unbalance_gmm
            return total

    def true_residual_unbalance_gmm(self) -> list[float]:
        return [abs(u) for u in self.unbalance_gmm()]

    # ---- speed ------------------------------------------------------------------------------
    @property
    def speed_rpm(self) -> float:
        return self._omega * 60.0 / TWO_PI

    def set_speed_rpm(self, speed_rpm: float, ramp_rpm_per_s: float | None = None) -> None:
        """Run to a new speed: at once (None) or ramping at ``ramp_rpm_per_s``."""
        if not (math.isfinite(speed_rpm) and speed_rpm >= 0.0):
            raise ValueError(f"speed must be 0 rpm or more, not {speed_rpm!r}")
        with self._lock:
            self._profile = ()
            self._target_rpm = float(speed_rpm)
            if ramp_rpm_per_s is None:
                self._nominal_rpm = float(speed_rpm)
                self._ramp_rpm_per_s = 0.0
                self._omega = self._omega_now()
            else:
                self._ramp_rpm_per_s = abs(float(ramp_rpm_per_s))

    def coast_down(self, rpm_per_s: float | None = None) -> None:
        """Switch the drive off: decelerate to standstill (scenario's rate unless given)."""
        self.set_speed_rpm(0.0, self.scenario.coast_down_rpm_per_s if rpm_per_s is None else rpm_per_s)

    def set_active_edge(self, falling: bool) -> None:
        self._falling = bool(falling)

    def set_channel_delays(self, delays_s: list[float], corrected_by_meter: bool = True) -> None:
        """Sampling instant of each physical channel after its frame's nominal time (ADC
        round-robin).  ``corrected_by_meter``: the meter rotates each channel's phasor back by
        this known delay, so :meth:`expected_1x` leaves it out."""
        with self._lock:
            self._skew_corrected = bool(corrected_by_meter)
            self._channel_delay_s = [float(d) for d in delays_s[: len(self.scenario.pickups)]]
            self._channel_delay_s += [0.0] * (len(self.scenario.pickups) - len(self._channel_delay_s))

    def _omega_now(self) -> float:
        return TWO_PI / 60.0 * self._nominal_rpm * (1.0 + self._drift)

    def _profile_tick(self, dt_s: float) -> None:
        """Follow the scenario's speed profile: next step once the ramp is done and the hold over."""
        if not self._profile or self._ramp_rpm_per_s > 0.0:
            return
        if self._hold_left_s > 0.0:
            self._hold_left_s -= dt_s
            return
        if self._profile_i >= len(self._profile):
            if not self.scenario.profile_repeat:
                self._profile = ()
                return
            self._profile_i = 0
        step = self._profile[self._profile_i]
        self._profile_i += 1
        self._target_rpm = float(step.to_rpm)
        self._hold_left_s = float(step.hold_s)
        if step.rpm_per_s > 0.0:
            self._ramp_rpm_per_s = float(step.rpm_per_s)
        else:
            self._nominal_rpm = float(step.to_rpm)

    def _step_speed(self, dt_s: float) -> float:
        """Advance nominal speed and wander by dt; return the new angular speed (rad/s)."""
        sc = self.scenario
        self._profile_tick(dt_s)
        if self._ramp_rpm_per_s > 0.0:
            step = self._ramp_rpm_per_s * dt_s
            if abs(self._target_rpm - self._nominal_rpm) <= step:
                self._nominal_rpm = self._target_rpm
                self._ramp_rpm_per_s = 0.0
            else:
                self._nominal_rpm += math.copysign(step, self._target_rpm - self._nominal_rpm)
        if sc.speed_drift_frac > 0.0:
            decay = math.exp(-dt_s / sc.speed_drift_tau_s)
            self._drift = self._drift * decay + sc.speed_drift_frac * math.sqrt(1.0 - decay * decay) * float(
                self._rng.standard_normal()
            )
        return self._omega_now()

    # ---- responses ----------------------------------------------------------------------------
    def _pickup_phasors_g(self, omega: float, omega_dot: float, unbalance: list[complex],
                          with_filter: bool = True) -> np.ndarray:
        """P_i (g): pickup i's 1x is Re(P_i e^{j Theta}), after the anti-alias filter (unless not
        ``with_filter``: the vibration itself)."""
        sc = self.scenario
        if omega <= 0.0:
            return np.zeros(len(sc.pickups), dtype=complex)
        p = pickup_acceleration_phasors(
            sc.rotor, omega, omega_dot, self._s, sc.ref_angle_deg,
            [pl.axial_mm for pl in sc.planes], unbalance,
            [pk.axial_mm for pk in sc.pickups], [pk.angle_deg for pk in sc.pickups],
        )
        fe = sc.front_end
        if not with_filter:
            return p / G0_M_PER_S2
        return p / G0_M_PER_S2 * lowpass_response(omega / TWO_PI, fe.lowpass_a1_s, fe.lowpass_a2_s2)

    def expected_1x(self) -> list[complex]:
        """Noise-free 1x of each physical channel (pickup) in g, ``amp e^{+j lag}``, lag after the
        active edge as the meter detects it, at the current unbalance and speed (see module doc)."""
        with self._lock:
            return self._expected_at(self._omega)

    def expected_1x_at(self, speed_rpm: float, speed_change_rpm_per_s: float = 0.0) -> list[complex]:
        """As :meth:`expected_1x`, at the current unbalance but at ``speed_rpm``, steady or
        changing at ``speed_change_rpm_per_s`` (the tangential part of the unbalance force)."""
        with self._lock:
            return self._expected_at(TWO_PI * speed_rpm / 60.0, TWO_PI * speed_change_rpm_per_s / 60.0)

    def _expected_at(self, omega: float, omega_dot: float = 0.0) -> list[complex]:
        # the host divides the front end's response out (INFO's fe, runtrue.device.revfit)
        p = self._pickup_phasors_g(omega, omega_dot, self.unbalance_gmm(), with_filter=False)
        shift = omega * self.scenario.front_end.ref_delay_us * 1e-6
        if self._falling:
            shift += math.radians(self.scenario.mark_width_deg)
        delays = [0.0] * len(p) if self._skew_corrected else self._channel_delay_s
        return [complex(np.conj(p_i)) * cmath.exp(-1j * (shift + omega * d)) for p_i, d in zip(p, delays)]

    def influence_coefficients(self) -> np.ndarray:
        """True influence coefficients at the current speed: change of expected_1x (g) per g.mm
        at 0 deg in each plane, shape (pickups, planes)."""
        with self._lock:
            saved = self._weights
            base = np.array(self.expected_1x())
            cols = []
            for p in range(len(self.scenario.planes)):
                self._weights = {0: Weight(p, 1.0, 0.0, 1.0)}
                cols.append(np.array(self.expected_1x()) - base)
                self._weights = saved
            return np.array(cols).T

    # ---- time ---------------------------------------------------------------------------------
    def advance(self, dt_s: float) -> None:
        """Let time pass without sampling (board idle)."""
        with self._lock:
            w0 = self._omega
            w1 = self._step_speed(dt_s)
            self._theta = (self._theta + 0.5 * (w0 + w1) * dt_s) % TWO_PI
            self._omega_dot = (w1 - w0) / dt_s if dt_s > 0 else 0.0
            self._omega = w1
            self.t_s += dt_s

    def generate(
        self, n_frames: int, rate_hz: float, channels: list[int]
    ) -> tuple[np.ndarray, list[Edge]]:
        """Sample ``n_frames`` frames at ``rate_hz`` starting now; frame n is nominally at
        ``t_s + n/rate_hz``, channel c sampled its channel delay later.  Returns the analog
        inputs in g, shape (n_frames, len(channels)), and the reference edges in the interval
        (all of them, both polarities, glitches included, in time order).  Advances time."""
        with self._lock:
            return self._generate(n_frames, rate_hz, channels)

    def _generate(self, n_frames: int, rate_hz: float, channels: list[int]) -> tuple[np.ndarray, list[Edge]]:
        sc = self.scenario
        fe = sc.front_end
        span_s = n_frames / rate_hz
        w0 = self._omega
        w1 = self._step_speed(span_s)
        accel = (w1 - w0) / span_s
        self._omega_dot = accel
        theta0 = self._theta
        unbalance = self.unbalance_gmm()
        p0 = self._pickup_phasors_g(w0, accel, unbalance)
        p1 = self._pickup_phasors_g(w1, accel, unbalance)
        w_mid = 0.5 * (w0 + w1)
        nominal_w = TWO_PI * sc.speed_rpm / 60.0
        harm_scale = (w_mid / nominal_w) ** 2 if nominal_w > 0 else 0.0
        f_line = 2.0 * sc.line_hz
        h_line = complex(lowpass_response(f_line, fe.lowpass_a1_s, fe.lowpass_a2_s2))
        base_tau = np.arange(n_frames) / rate_hz
        out = np.empty((n_frames, len(channels)))
        for col, ch in enumerate(channels):
            if ch >= len(sc.pickups):  # input with no pickup: only a little electrical noise
                out[:, col] = self._rng.normal(0.0, 0.002, n_frames)
                continue
            pk = sc.pickups[ch]
            tau = base_tau + self._channel_delay_s[ch]
            theta = theta0 + w0 * tau + 0.5 * accel * tau * tau
            e1 = np.exp(1j * theta)
            phasor = p0[ch] + (p1[ch] - p0[ch]) * (tau / span_s)
            sig = (phasor * e1).real
            for order, h in pk.harmonics_g:
                if harm_scale > 0.0:
                    g = complex(lowpass_response(order * w_mid / TWO_PI, fe.lowpass_a1_s, fe.lowpass_a2_s2))
                    sig += harm_scale * (np.conj(h) * g * e1**order).real
            if pk.line_g and self._target_rpm > 0.0:  # electrical: gone once the drive is switched off
                t_abs = self.t_s + tau
                sig += pk.line_g * abs(h_line) * np.cos(
                    TWO_PI * f_line * t_abs + self._line_phase[ch] + cmath.phase(h_line)
                )
            if pk.line_hum_g and self._target_rpm > 0.0:  # mains hum at multiples of the line frequency
                t_abs = self.t_s + tau
                for mult, amp in pk.line_hum_g:
                    h = complex(lowpass_response(mult * sc.line_hz, fe.lowpass_a1_s, fe.lowpass_a2_s2))
                    sig += amp * abs(h) * np.cos(TWO_PI * mult * sc.line_hz * t_abs
                                                 + 0.5 * mult * self._line_phase[ch] + cmath.phase(h))
            if pk.noise_g:
                sig += self._rng.normal(0.0, pk.noise_g, n_frames)
            out[:, col] = sig + pk.dc_offset_g
        edges = self._edges(theta0, w0, accel, span_s)
        self._theta = (theta0 + w0 * span_s + 0.5 * accel * span_s * span_s) % TWO_PI
        self._omega = w1
        self.t_s += span_s
        return out, edges

    def _edges(self, theta0: float, w0: float, accel: float, span_s: float) -> list[Edge]:
        """Edges in (t_s, t_s + span]: mark (leading = rising, trailing = falling), glitches."""
        sc = self.scenario
        delay_s = sc.front_end.ref_delay_us * 1e-6
        width = math.radians(sc.mark_width_deg)
        theta_end = theta0 + w0 * span_s + 0.5 * accel * span_s * span_s
        edges: list[Edge] = []
        # Rotor angles (unwrapped, relative to theta0's revolution) at which edges occur.
        targets: list[tuple[float, bool]] = []
        k = 0
        while True:
            base = TWO_PI * k
            if base + width <= theta0 and base <= theta0:
                k += 1
                continue
            if base > theta_end:
                break
            if base > theta0:  # a new passage of the mark: maybe missed as a whole
                self._missed_next = bool(self._rng.random() < sc.missed_per_rev)
                if self._passages in sc.missed_marks:
                    self._missed_next = True
                self._passages += 1
            if not self._missed_next:
                if theta0 < base <= theta_end:
                    targets.append((base, True))
                if theta0 < base + width <= theta_end:
                    targets.append((base + width, False))
            k += 1
        for target, rising in targets:
            d_theta = target - theta0
            tau = 2.0 * d_theta / (w0 + math.sqrt(max(w0 * w0 + 2.0 * accel * d_theta, 0.0)))
            jitter = float(self._rng.normal(0.0, sc.edge_jitter_us * 1e-6)) if sc.edge_jitter_us else 0.0
            edges.append(Edge(self.t_s + tau + delay_s + jitter, rising))
        revs = (theta_end - theta0) / TWO_PI
        n_glitch = int(self._rng.poisson(sc.glitch_per_rev * revs)) if sc.glitch_per_rev > 0 else 0
        for _ in range(n_glitch):
            t_g = self.t_s + float(self._rng.uniform(0.0, span_s))
            edges.append(Edge(t_g, True, glitch=True))
            edges.append(Edge(t_g + sc.glitch_width_us * 1e-6, False, glitch=True))
        edges.sort(key=lambda e: e.t_s)
        return edges
