"""Rigid rotor on flexible, damped bearing supports: the steady 1x response to unbalance.

Physics implemented (textbook rigid-rotor dynamics; see e.g. J. M. Vance, F. J. Zeidan,
B. Murphy, *Machinery Vibration and Rotordynamics*, Wiley 2010, ch. 2-3, "rigid rotor on
flexible supports" (from memory)):

* The shaft axis is z (mm).  Two bearings at ``bearing_a_mm`` and ``bearing_b_mm`` each sit on a
  support with its own stiffness and viscous damping in the two lab directions x and y, so the
  supports may be isotropic or (mildly) anisotropic.
* The rotor is rigid: in each lab direction it has two degrees of freedom, taken as the
  displacements of the two bearing journals ``q = [u_A, u_B]``; the displacement at any axial
  position z is ``u(z) = N(z) . q`` with ``N(z) = [(z_B - z)/L, (z - z_A)/L]``.
* Mass matrix from kinetic energy ``m*u_g'^2/2 + I_t*beta'^2/2`` (CG translation and tilt
  ``beta = (u_B - u_A)/L``); stiffness and damping are the supports at the journals.
* A point force F at z_p enters as the generalised force ``N(z_p) * F`` (virtual work).
* Gyroscopic coupling between the x and y tilts is neglected (it only matters for conical
  motion of discs with a large polar inertia near the conical critical speed).

Unbalance and the rotor's geometry (the conventions of the whole program): the rotor angle theta is measured
from the reference mark AGAINST the direction of rotation, so a point at theta passes a fixed
sensor theta/Omega seconds after the mark.  Lab angles (pickups, reference sensor) are measured
counter-clockwise looking at the rotor from the end the scenario names; rotation ``s = +1`` is
counter-clockwise, ``s = -1`` clockwise.  With the mark passing the reference sensor (lab angle
phi_ref) at rotor angle Theta(t) = 0 (mod 2 pi), an unbalance U = |U| e^{j theta} (g.mm) sits at
lab angle ``psi = phi_ref + s (Theta - theta)`` and pulls on the rotor with the force of a mass
point on a circle, ``|U| (Omega^2 - j s Omega') e^{j psi}`` (radial plus tangential part during
speed changes), as the complex lab vector F_x + j F_y.

Each lab direction then responds as a linear system driven at the rotation frequency.  This
module works with phasors relative to e^{j Theta}: a real signal ``Re(P e^{j Theta})``.  A pickup
at lab angle alpha and axial position z_s reads the acceleration along its axis,
``a = cos(alpha) a_x + sin(alpha) a_y`` (quasi-steady: ``a = -Omega^2 u``).

Nothing here imports the phase-lag convention that the meter reports; :mod:`runtrue.sim.machine`
converts ``Re(P e^{j Theta}) = |P| cos(Theta - lag)`` into ``amp e^{+j lag}``, i.e. ``conj(P)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

G0_M_PER_S2 = 9.80665  # standard gravity (CGPM 1901), m/s^2 per g
GMM_TO_KGM = 1e-6  # 1 g.mm = 1e-6 kg.m


@dataclass(frozen=True)
class Support:
    """One bearing's support: stiffness (N/m) and viscous damping (N.s/m) in lab x and y."""

    k_x_n_per_m: float
    k_y_n_per_m: float
    c_x_ns_per_m: float
    c_y_ns_per_m: float


def support_for(
    share_kg: float, natural_hz: float, damping_ratio: float, anisotropy: float = 0.0
) -> Support:
    """A support that, carrying ``share_kg`` of rotor mass alone, has the given natural frequency
    and damping ratio in x; y is ``(1 + anisotropy)`` times stiffer (k = m w^2, c = 2 zeta m w)."""
    w = 2.0 * np.pi * natural_hz
    k_x = share_kg * w * w
    k_y = k_x * (1.0 + anisotropy)
    c_x = 2.0 * damping_ratio * share_kg * w
    c_y = 2.0 * damping_ratio * np.sqrt(k_y * share_kg)
    return Support(float(k_x), float(k_y), float(c_x), float(c_y))


@dataclass(frozen=True)
class RigidRotor:
    """A rigid rotor on two flexible supports (axial positions in mm along the shaft)."""

    mass_kg: float
    transverse_inertia_kgm2: float  # about the centre of gravity, about a lab x or y axis
    cg_mm: float
    bearing_a_mm: float
    bearing_b_mm: float
    support_a: Support
    support_b: Support

    def __post_init__(self) -> None:
        if self.bearing_b_mm <= self.bearing_a_mm:
            raise ValueError("bearing B must lie further along the shaft than bearing A")
        if self.mass_kg <= 0 or self.transverse_inertia_kgm2 < 0:
            raise ValueError("rotor mass must be positive and its inertia not negative")

    @property
    def span_m(self) -> float:
        return (self.bearing_b_mm - self.bearing_a_mm) * 1e-3

    def shape(self, z_mm: float) -> np.ndarray:
        """N(z): displacement at z per unit journal displacement [u_A, u_B] (rigid body)."""
        span = self.bearing_b_mm - self.bearing_a_mm
        return np.array([(self.bearing_b_mm - z_mm) / span, (z_mm - self.bearing_a_mm) / span])

    def matrices(self, direction: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Mass, damping and stiffness matrices (SI) on q = [u_A, u_B] for lab direction x or y."""
        n_g = self.shape(self.cg_mm)
        d_beta = np.array([-1.0, 1.0]) / self.span_m
        mass = self.mass_kg * np.outer(n_g, n_g) + self.transverse_inertia_kgm2 * np.outer(d_beta, d_beta)
        a, b = self.support_a, self.support_b
        if direction == "x":
            stiff = np.diag([a.k_x_n_per_m, b.k_x_n_per_m])
            damp = np.diag([a.c_x_ns_per_m, b.c_x_ns_per_m])
        elif direction == "y":
            stiff = np.diag([a.k_y_n_per_m, b.k_y_n_per_m])
            damp = np.diag([a.c_y_ns_per_m, b.c_y_ns_per_m])
        else:
            raise ValueError(f"direction must be 'x' or 'y', not {direction!r}")
        return mass, damp, stiff

    def receptance(self, omega_rad_s: float, direction: str) -> np.ndarray:
        """Dynamic compliance (m/N) at frequency omega: inv(K - w^2 M + j w C)."""
        mass, damp, stiff = self.matrices(direction)
        dyn = stiff - omega_rad_s**2 * mass + 1j * omega_rad_s * damp
        return np.linalg.inv(dyn)


def pickup_acceleration_phasors(
    rotor: RigidRotor,
    omega_rad_s: float,
    omega_dot_rad_s2: float,
    rotation: int,
    ref_angle_deg: float,
    plane_axial_mm: list[float],
    unbalance_gmm: list[complex],
    pickup_axial_mm: list[float],
    pickup_angle_deg: list[float],
) -> np.ndarray:
    """Acceleration phasors P_i (m/s^2) at each pickup, relative to e^{j Theta}:
    pickup i reads ``Re(P_i e^{j Theta(t)})`` where Theta is the rotor angle since the mark
    passed the reference sensor.  ``unbalance_gmm[p]`` is |U| e^{j theta}, theta against rotation.
    """
    if rotation not in (1, -1):
        raise ValueError("rotation must be +1 (counter-clockwise) or -1 (clockwise)")
    phi_ref = np.deg2rad(ref_angle_deg)
    # Generalised force phasors per direction (N), relative to e^{j Theta}.
    q_force_x = np.zeros(2, dtype=complex)
    q_force_y = np.zeros(2, dtype=complex)
    drive = omega_rad_s**2 - 1j * rotation * omega_dot_rad_s2
    for z_mm, u_gmm in zip(plane_axial_mm, unbalance_gmm):
        u = complex(u_gmm)
        if u == 0:
            continue
        # Force as a lab complex vector: |U| drive e^{j(phi_ref - s theta)} e^{j s Theta}.
        u_dir = u.conjugate() if rotation == 1 else u  # |U| e^{-j s theta}
        f_lab = GMM_TO_KGM * drive * np.exp(1j * phi_ref) * u_dir
        if rotation == 1:  # f = F e^{j Theta}: x = Re(F e^{jT}), y = Im(F e^{jT}) = Re(-jF e^{jT})
            f_x, f_y = f_lab, -1j * f_lab
        else:  # f = F e^{-j Theta}: x = Re(conj(F) e^{jT}), y = -Im(conj(F) e^{jT}) = Re(j conj(F) e^{jT})
            f_x, f_y = np.conj(f_lab), 1j * np.conj(f_lab)
        n_p = rotor.shape(z_mm)
        q_force_x += n_p * f_x
        q_force_y += n_p * f_y
    q_x = rotor.receptance(omega_rad_s, "x") @ q_force_x
    q_y = rotor.receptance(omega_rad_s, "y") @ q_force_y
    out = np.empty(len(pickup_axial_mm), dtype=complex)
    for i, (z_mm, alpha_deg) in enumerate(zip(pickup_axial_mm, pickup_angle_deg)):
        n_s = rotor.shape(z_mm)
        alpha = np.deg2rad(alpha_deg)
        disp = np.cos(alpha) * (n_s @ q_x) + np.sin(alpha) * (n_s @ q_y)
        out[i] = -(omega_rad_s**2) * disp
    return out
