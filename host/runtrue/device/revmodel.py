"""One revolution's fit from the meter's exact integer sums, with the disturbances modelled.

Published sources (each used as stated; "from memory" where the exact place was not checked):

* Linear least squares and the instrumental-variable (IV) estimator: for data y = Theta x + e
  and any matrix of instruments Z with Z^T Theta invertible, x_IV = (Z^T Theta)^-1 Z^T y is
  unbiased when E[e] = 0 and Z is not random; its covariance for white e of variance sigma^2 is
  sigma^2 (Z^T Theta)^-1 Z^T Z (Theta^T Z)^-1 (T. Söderström and P. Stoica, *System
  Identification*, Prentice Hall 1989, chapter 8, "Instrumental variable methods", the basic
  IV estimate and its covariance -- from memory).  Here the instruments are the meter's own
  basis Phi, because the meter only sends Z^T y = Phi^T y (its sums).
* Cramér-Rao bound of a linear Gaussian model: J = Theta^T Theta / sigma^2, cov >= J^-1, reached
  by least squares on the true basis (S. M. Kay, *Fundamentals of Statistical Signal Processing:
  Estimation Theory*, Prentice Hall 1993, chapter 3 (section 3.8, vector parameter) and
  theorem 4.1 of chapter 4, the linear model -- from memory).
* Efficiency loss of IV against least squares when Z and Theta differ by a small d: the loss is
  of second order in d (cov_IV - cov_LS = sigma^2 O(d^2)), because the first-order terms of
  the sandwich cancel; this module's tests measure it instead of quoting it.
* Front-end response H(s) = 1 / (1 + a1 s + a2 s^2): two loaded RC sections by nodal analysis
  (P. Horowitz and W. Hill, *The Art of Electronics*, 3rd ed. 2015, chapter 1 -- from memory).

What the meter sends and what is modelled
-----------------------------------------
The meter (``runtrue_fw.basis``, the specification) sums each channel's samples y (ADC codes
minus mid-scale) against a basis Phi built on a rotor angle *uniform in time* between the
revolution's two edges, and a line-frequency angle psi: columns 1, cos/sin(k phi) for k = 1..4,
cos/sin(m psi) for m = 1, 2 (Q14 table values).  This module rebuilds Phi bit for bit
(:func:`meter_basis`), so b = Phi^T y is known exactly from the sums.

The true rotor angle is not uniform when the speed changes.  Model (:func:`model_basis`): the
angle is quadratic in time through the two edges (constant angular acceleration alpha over the
revolution), with alpha from the neighbouring revolutions' periods (:func:`accel_from_periods`:
the mean speed of a revolution is the speed at its mid-time when alpha is constant), and every
running-speed order's amplitude scales with the square of the instantaneous speed (the
unbalance force m e w^2; the supports' own response is taken as steady over one revolution).
Theta is the basis at the modelled angle and amplitude; x = (Phi^T Theta)^-1 b is then unbiased
for this model, and the coefficients are the orders' vectors at the revolution's mean speed.
With alpha = 0 Theta = Phi (to the Q14 table's rounding) and the estimate is plain least
squares.

Line tones (f and 2f of the mains, psi from the meter's own ``line_inc``) are fitted as free
sinusoids.  When one falls so close to a running-speed order k that one revolution cannot tell
them apart (:func:`line_collisions`: less than ``COLLISION_CYCLES`` cycles of difference per
revolution), that line term is dropped and a warning names the tone, the order and the gap.

Front end: each order's vector is divided by the conjugate of H(j 2 pi k f_rot) (the reading is
``amp e^{+j lag}``, so a lag added by the filter appears as conj(H)); :func:`frontend_correction`
also gives the spread of the correction over the components' tolerance corners.

Conventions: the k-th order component ``amp cos(k phi - lag)`` is ``c_k + j s_k = amp e^{+j lag}``
(coefficients of cos and sin), g peak after division by counts per g.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from runtrue.protocol.messages import line_hum_warning
from runtrue_fw import basis as fwb

N_HARMONICS = fwb.N_HARMONICS
N_LINE = fwb.N_LINE
N_FIT = 1 + 2 * N_HARMONICS + 2 * N_LINE  # fitted columns (Sy*y is not a basis column)
TURN = float(fwb.TURN_MASK + 1)
Q14 = float(fwb.Q14_ONE)

#: A line tone closer than this many cycles per revolution to a running-speed order is not fitted
#: in that revolution (our choice: keeping it would multiply the variance of both by more than
#: about 1 / (1 - sinc^2(0.1)) = 30; two tones 0.1 cycle apart over one window are 98 % alike).
COLLISION_CYCLES = 0.1

COLUMN_NAMES = (
    ["dc"]
    + [f"{cs}{k}x" for k in range(1, N_HARMONICS + 1) for cs in ("cos", "sin")]
    + [f"{cs}line{m}" for m in range(1, N_LINE + 1) for cs in ("cos", "sin")]
)


def harmonic_columns(k: int) -> tuple[int, int]:
    """Column indices (cos, sin) of running-speed order k (1..N_HARMONICS)."""
    return 2 * k - 1, 2 * k


def line_columns(m: int) -> tuple[int, int]:
    """Column indices (cos, sin) of line tone m (1 = line frequency, 2 = twice it)."""
    return 2 * N_HARMONICS + 2 * m - 1, 2 * N_HARMONICS + 2 * m


@dataclass(frozen=True)
class RevGeometry:
    """Where a revolution's samples sit: the meter's REV fields (1/256-sample units)."""

    n_samples: int
    length_q8: int
    first_off_q8: int
    line_inc: int = 0  # line-tone angle step per sample, 2**-30 turn (0: line terms off)

    @property
    def length_samples(self) -> float:
        return self.length_q8 / 256.0


@lru_cache(maxsize=1)
def _table() -> np.ndarray:
    return np.array(fwb.make_cos_table(), dtype=np.int64)


def cos_q14(a: np.ndarray) -> np.ndarray:
    """The meter's Q14 cosine (``runtrue_fw.basis.cos_q14``) on an int64 array of angles."""
    t = _table()
    i = a >> 20
    v = t[i]
    out: np.ndarray = v + (((t[i + 1] - v) * ((a >> 6) & 0x3FFF)) >> 14)  # numpy's operators are untyped
    return out


def sin_q14(a: np.ndarray) -> np.ndarray:
    return cos_q14((a - fwb.QUARTER_TURN) & fwb.TURN_MASK)


def meter_angles(geom: RevGeometry) -> tuple[np.ndarray, np.ndarray]:
    """The meter's integer angles: rotor angle of order k (shape N_HARMONICS x n) and line angle
    of tone m (N_LINE x n), units of 2**-30 turn, exactly as ``runtrue_fw.basis.reference_sums``."""
    inc1 = fwb.rev_increment(geom.length_q8)
    a1 = fwb.first_angle(inc1, geom.first_off_q8)
    i = np.arange(geom.n_samples, dtype=np.int64)
    rot = np.empty((N_HARMONICS, geom.n_samples), dtype=np.int64)
    for k in range(1, N_HARMONICS + 1):
        rot[k - 1] = (k * a1 + i * ((k * inc1) & fwb.TURN_MASK)) & fwb.TURN_MASK
    line = np.empty((N_LINE, geom.n_samples), dtype=np.int64)
    for m in range(1, N_LINE + 1):
        line[m - 1] = (i * ((m * geom.line_inc) & fwb.TURN_MASK)) & fwb.TURN_MASK
    return rot, line


def meter_basis_q14(geom: RevGeometry) -> np.ndarray:
    """The meter's basis Phi in Q14 integers, shape (n_samples, N_FIT), columns COLUMN_NAMES."""
    rot, line = meter_angles(geom)
    phi = np.empty((geom.n_samples, N_FIT), dtype=np.int64)
    phi[:, 0] = fwb.Q14_ONE
    for k in range(1, N_HARMONICS + 1):
        c, s = harmonic_columns(k)
        phi[:, c] = cos_q14(rot[k - 1])
        phi[:, s] = sin_q14(rot[k - 1])
    for m in range(1, N_LINE + 1):
        c, s = line_columns(m)
        phi[:, c] = cos_q14(line[m - 1])
        phi[:, s] = sin_q14(line[m - 1])
    return phi


def meter_basis(geom: RevGeometry) -> np.ndarray:
    """Phi as float (Q14 values / 16384): Phi^T y is the meter's sums / 16384 (Sy unscaled)."""
    return meter_basis_q14(geom) / Q14


def meter_sums(geom: RevGeometry, y_codes: np.ndarray) -> np.ndarray:
    """The meter's N_SUMS integer sums of one channel (y: codes minus mid-scale), exactly as
    ``runtrue_fw.basis.reference_sums`` computes them (for tests and benchmarks)."""
    y = np.asarray(y_codes, dtype=np.int64)
    phi = meter_basis_q14(geom)
    sums = np.empty(fwb.N_SUMS, dtype=object)
    sums[0] = int(y.sum())
    sums[1:N_FIT] = [int(v) for v in y @ phi[:, 1:]]
    sums[N_FIT] = int(y @ y)
    return sums


def sample_times(geom: RevGeometry) -> np.ndarray:
    """Time of each sample after the revolution's first edge, in samples."""
    return geom.first_off_q8 / 256.0 + np.arange(geom.n_samples, dtype=float)


def accel_from_periods(length: float, prev_length: float | None = None, next_length: float | None = None) -> float:
    """Angular acceleration in turns per sample^2 for a revolution of ``length`` samples, from its
    neighbours' lengths (either may be None).  The mean speed of a revolution (1/length turns
    per sample) is the speed at its mid-time when the acceleration is constant, so the slope
    between two revolutions' mid-times is the acceleration."""
    if prev_length and next_length:
        return (1.0 / next_length - 1.0 / prev_length) / (0.5 * prev_length + length + 0.5 * next_length)
    if prev_length:
        return (1.0 / length - 1.0 / prev_length) / (0.5 * (prev_length + length))
    if next_length:
        return (1.0 / next_length - 1.0 / length) / (0.5 * (length + next_length))
    return 0.0


def model_angle_turns(geom: RevGeometry, accel: float) -> tuple[np.ndarray, np.ndarray]:
    """Modelled rotor angle (turns, 0 at the first edge, 1 at the second) and speed relative to
    the revolution's mean speed, at each sample, for constant acceleration ``accel``."""
    t = sample_times(geom)
    big_l = geom.length_samples
    angle = t / big_l + 0.5 * accel * (t * t - big_l * t)
    speed_rel = 1.0 + accel * big_l * (t - 0.5 * big_l)
    return angle, speed_rel


def model_basis(geom: RevGeometry, accel: float = 0.0, amp_exponent: float = 2.0) -> np.ndarray:
    """Theta: the basis at the modelled true rotor angle, running-speed orders scaled by
    (w/w_mean)**amp_exponent; dc and line columns as the meter's (time-based, exact cosines)."""
    angle, speed_rel = model_angle_turns(geom, accel)
    scale = speed_rel**amp_exponent if amp_exponent else np.ones_like(angle)
    theta = np.empty((geom.n_samples, N_FIT))
    theta[:, 0] = 1.0
    for k in range(1, N_HARMONICS + 1):
        c, s = harmonic_columns(k)
        w = 2.0 * math.pi * k * angle
        theta[:, c] = scale * np.cos(w)
        theta[:, s] = scale * np.sin(w)
    _, line = meter_angles(geom)
    for m in range(1, N_LINE + 1):
        c, s = line_columns(m)
        w = 2.0 * math.pi * line[m - 1] / TURN
        theta[:, c] = np.cos(w)
        theta[:, s] = np.sin(w)
    return theta


@dataclass(frozen=True)
class LineCollision:
    """A line tone too close to a running-speed order to be fitted in one revolution."""

    line_hz: float  # the tone (f or 2f of the mains)
    order: int  # k of k x f_rot
    gap_pct: float  # |line - k f_rot| / (k f_rot), percent
    line_term: int  # m: 1 = line frequency, 2 = twice it

    @property
    def message(self) -> str:
        return line_hum_warning(self.line_hz, self.order, self.gap_pct)


def line_collisions(speed_hz: float, line_hz: float, orders: Sequence[int] = range(1, N_HARMONICS + 1)) -> list[LineCollision]:
    """Line tones (m = 1, 2 times ``line_hz``) within ``COLLISION_CYCLES`` cycles per revolution
    of a fitted running-speed order."""
    out: list[LineCollision] = []
    if line_hz <= 0.0 or speed_hz <= 0.0:
        return out
    for m in range(1, N_LINE + 1):
        f_line = m * line_hz
        for k in orders:
            gap_cycles = abs(f_line - k * speed_hz) / speed_hz
            if gap_cycles < COLLISION_CYCLES:
                out.append(LineCollision(f_line, k, 100.0 * gap_cycles / k, m))
    return out


@dataclass(frozen=True)
class FitResult:
    """One channel's revolution: orders' vectors (codes, phase-lag convention) and what was fitted."""

    orders: dict[int, complex]  # k -> c_k + j s_k, codes (divide by counts per g for g)
    lines: dict[int, complex]  # m -> line tone's vector at the revolution's first sample, codes
    dc: float
    columns: tuple[int, ...]  # columns of COLUMN_NAMES fitted
    cov_unit: np.ndarray = field(repr=False)  # covariance of the fitted columns / sigma^2
    crlb_unit: np.ndarray = field(repr=False)  # the model's CRLB / sigma^2, same columns
    accel: float = 0.0
    collisions: tuple[LineCollision, ...] = ()


def sums_to_projections(sums: Sequence[int], cols: Sequence[int]) -> np.ndarray:
    """b = Phi^T y (float Phi) from the meter's sums: Sy as it is, the others carry the Q14 scale."""
    return np.array([float(sums[c]) if c == 0 else float(sums[c]) / Q14 for c in cols])


def fitted_columns(geom: RevGeometry, orders: Sequence[int], line_terms: Sequence[int]) -> tuple[int, ...]:
    cols = [0]
    for k in orders:
        cols.extend(harmonic_columns(k))
    if geom.line_inc:
        for m in line_terms:
            cols.extend(line_columns(m))
    return tuple(cols)


def fit_revolution(
    geom: RevGeometry,
    sums: Sequence[int],
    *,
    accel: float = 0.0,
    orders: Sequence[int] = range(1, N_HARMONICS + 1),
    line_hz: float = 0.0,
    speed_hz: float = 0.0,
    amp_exponent: float = 2.0,
    phi: np.ndarray | None = None,
) -> FitResult:
    """Fit one channel's revolution from the meter's sums (IV form, see the module doc).

    ``orders``: running-speed orders fitted (fewer when the revolution has few samples);
    ``line_hz``/``speed_hz``: for the collision check (line terms colliding with a fitted order
    are dropped and reported); ``phi``: the meter's basis if already built (float).
    """
    collisions = tuple(line_collisions(speed_hz, line_hz, orders)) if geom.line_inc else ()
    dropped = {c.line_term for c in collisions}
    lines = [m for m in range(1, N_LINE + 1) if m not in dropped]
    cols = fitted_columns(geom, orders, lines)
    p = meter_basis(geom) if phi is None else phi
    pk = p[:, cols]
    theta = model_basis(geom, accel, amp_exponent)[:, cols] if accel else pk
    b = sums_to_projections(sums, cols)
    a = pk.T @ theta
    x = np.linalg.solve(a, b)
    a_inv = np.linalg.inv(a)
    cov = a_inv @ (pk.T @ pk) @ a_inv.T
    crlb = np.linalg.inv(theta.T @ theta)
    pos = {c: i for i, c in enumerate(cols)}
    orders_out = {k: complex(x[pos[harmonic_columns(k)[0]]], x[pos[harmonic_columns(k)[1]]]) for k in orders}
    lines_out = {m: complex(x[pos[line_columns(m)[0]]], x[pos[line_columns(m)[1]]]) for m in lines if geom.line_inc}
    return FitResult(orders_out, lines_out, float(x[0]), cols, cov, crlb, accel, collisions)


# ---- front end ---------------------------------------------------------------------------------

#: The meter's front-end parts and tolerances (hardware/frontend.py, ``FrontEnd``; a test keeps
#: them equal): R1 (sensor output resistance), C1, R2, C2 and their relative tolerances.
FRONTEND_PARTS = {"r1_ohm": 32e3, "c1_f": 4.7e-9, "r2_ohm": 1e3, "c2_f": 1e-9}
FRONTEND_TOLERANCES = {"r1_ohm": 0.15, "c1_f": 0.10, "r2_ohm": 0.01, "c2_f": 0.05}


def frontend_response(freq_hz: float, a1_s: float, a2_s2: float) -> complex:
    """H(j 2 pi f) = 1 / (1 + a1 s + a2 s^2)."""
    s = 2j * math.pi * freq_hz
    return 1.0 / (1.0 + a1_s * s + a2_s2 * s * s)


def _coefficients(parts: dict[str, float]) -> tuple[float, float]:
    r1, c1, r2, c2 = parts["r1_ohm"], parts["c1_f"], parts["r2_ohm"], parts["c2_f"]
    return r1 * c1 + r1 * c2 + r2 * c2, r1 * c1 * r2 * c2


@dataclass(frozen=True)
class FrontEndCorrection:
    """What the front end did to one order at one speed, and how sure that is."""

    freq_hz: float
    gain: float  # |H|: the reading was this fraction of the vibration
    lag_deg: float  # phase lag added by the filter (subtracted from the reading)
    gain_tol: float  # largest relative departure of |H| over the tolerance corners
    lag_tol_deg: float  # largest departure of the lag over the tolerance corners

    def apply(self, z: complex) -> complex:
        """The reading ``z`` (amp e^{+j lag}) with the filter taken out."""
        return z / self.gain * cmath.exp(-1j * math.radians(self.lag_deg))

    @property
    def text(self) -> str:
        return (f"front end: lag {self.lag_deg:.2f} +-{self.lag_tol_deg:.2f} deg, gain {self.gain:.3f} "
                f"+-{100 * self.gain_tol:.1f} % at {self.freq_hz:.1f} Hz, corrected")


def frontend_correction(freq_hz: float, a1_s: float, a2_s2: float) -> FrontEndCorrection:
    """The filter's gain and lag at ``freq_hz`` from INFO's ``fe`` = [a1, a2], with their spread
    over the tolerance corners of the design's parts (the corners scale a1, a2 relatively)."""
    h = frontend_response(freq_hz, a1_s, a2_s2)
    gain, lag = abs(h), -math.degrees(cmath.phase(h))
    a1_0, a2_0 = _coefficients(FRONTEND_PARTS)
    g_tol = 0.0
    l_tol = 0.0
    names = list(FRONTEND_PARTS)
    for corner in range(1 << len(names)):
        parts = {n: FRONTEND_PARTS[n] * (1 + (1 if corner >> i & 1 else -1) * FRONTEND_TOLERANCES[n])
                 for i, n in enumerate(names)}
        a1_c, a2_c = _coefficients(parts)
        hc = frontend_response(freq_hz, a1_s * a1_c / a1_0, a2_s2 * a2_c / a2_0 if a2_0 else 0.0)
        g_tol = max(g_tol, abs(abs(hc) / gain - 1.0))
        l_tol = max(l_tol, abs(-math.degrees(cmath.phase(hc)) - lag))
    return FrontEndCorrection(freq_hz, gain, lag, g_tol, l_tol)
