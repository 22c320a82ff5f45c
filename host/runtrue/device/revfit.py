"""The host's half of the per-revolution fit: the meter's exact integer sums -> phasors in g.

Source: linear least squares by the normal equations (e.g. G. H. Golub and C. F. Van Loan,
*Matrix Computations*, 4th ed., 2013, section 5.3); for sinusoids of known frequency in white
Gaussian noise the least-squares fit is the maximum-likelihood estimate (D. C. Rife and
R. R. Boorstyn, "Single-tone parameter estimation from discrete-time observations", IEEE Trans.
Information Theory 20(5), 1974, pp. 591-598).

The meter (firmware/runtrue_fw/kernels*.py) sends per revolution and channel the 14 sums of
``runtrue_fw.basis``: b_j = sum_i y_i B_ij with B the Q14 basis values [1, cos k.phi, sin k.phi
(k = 1..4), cos m.psi, sin m.psi (m = 1, 2 line tones)] and Sy.y.  This module rebuilds the very
same integer basis values per sample (numpy int64, bit-exact with ``basis.reference_sums``),
forms the Gram matrix G = B^T B exactly in integers, and solves G x = b in float64.  Because the
meter and the host use the same basis values, the fit is the exact least-squares fit of the
samples on that basis; the basis differs from ideal cosines by the Q14 table (below 3.1e-5 of
full scale, see basis.py).

Model terms follow the samples a revolution has: at least ``SAMPLES_PER_TERM`` samples per fitted
parameter, dropping 4x, then 3x, then the line tones, in that order.  The line tones are also
left out where they would more than double the variance of any order's coefficients (a line
frequency close to a multiple of the running speed cannot be told apart from that order within
one revolution; this basic rule is where a finer disturbance model takes over).

Round robin: with ``DeviceInfo.round_robin`` the channel of rank r in a frame is converted r/n_ch
of a sample after the frame's first conversion, that is at rotor angle phi_i + delta with
delta = (r/n_ch) * 2 pi * 256/length_q8; its order-k phasor is rotated by e^{+j k delta}.

Disturbance model (:mod:`runtrue.device.revmodel`, which cites its sources): the speed change
within a revolution is modelled from the previous revolution's period (rotor angle quadratic
through the edges, instrumental-variable form x = (Phi^T Theta)^-1 b, Phi the meter's basis,
Theta the basis at the modelled angle); line tones within ``revmodel.COLLISION_CYCLES`` of a
fitted order are not fitted and the revolution carries a warning that says so; each order is
divided by the front end's H(j 2 pi k f_rot) from INFO's ``fe`` (gain and lag), and the 1x's
correction and its spread over the parts' tolerances travel with the revolution.

Phase convention (firmware/PROTOCOL.md): the order-k component amp.cos(k.phi - lag) is
re + j.im = amp.e^{+j.lag}, i.e. (coefficient of cos k.phi, coefficient of sin k.phi).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

import runtrue.device.revmodel as revmodel
from runtrue.protocol.messages import (
    FLAG_DROPPED_SAMPLES,
    FLAG_EXTRA_PULSE,
    FLAG_FIRST,
    FLAG_MISSING_PULSE,
    FLAG_NO_FIT,
    DeviceInfo,
    Revolution,
    RevStats,
)
from runtrue_fw import basis

N_ORDERS = basis.N_HARMONICS  # 4
N_LINE = basis.N_LINE  # 2
N_BASIS = basis.N_SUMS - 1  # 13 basis columns; the 14th sum is Sy.y
SAMPLES_PER_TERM = 3  # at least this many samples per fitted parameter
MIN_ORDERS = 2  # 1x and 2x are always fitted (or nothing)
MIN_SAMPLES = SAMPLES_PER_TERM * (1 + 2 * MIN_ORDERS)  # 15: fewer and the revolution is not fitted
LINE_VARIANCE_LIMIT = 2.0  # line tones kept only if no order's coefficient variance grows more
Q14 = float(basis.Q14_ONE)
_MASK = basis.TURN_MASK


@lru_cache(maxsize=1)
def _table() -> np.ndarray:
    return np.array(list(basis.make_cos_table()), dtype=np.int64)


def _cos_q14(a: np.ndarray) -> np.ndarray:
    t = _table()
    i = a >> 20
    v = t[i]
    return v + (((t[i + 1] - v) * ((a >> 6) & 0x3FFF)) >> 14)


def _sin_q14(a: np.ndarray) -> np.ndarray:
    return _cos_q14((a - basis.QUARTER_TURN) & _MASK)


def basis_q14(n_samples: int, first_off_q8: int, length_q8: int, line_inc: int) -> np.ndarray:
    """The meter's basis values of one revolution, (n_samples, 13) int64 in Q14 (column 0 is
    16384), columns in the order of the sums: 1, cos/sin of orders 1..4, cos/sin of line tones
    1..2.  Bit-exact with ``basis.cos_q14``/``sin_q14`` as ``reference_sums`` uses them."""
    inc1 = basis.rev_increment(length_q8)
    return basis_q14_from_angles(n_samples, inc1, basis.first_angle(inc1, first_off_q8), line_inc)


def basis_q14_from_angles(n_samples: int, inc1: int, a1: int, line_inc: int) -> np.ndarray:
    """:func:`basis_q14` from the angle step per sample and the first sample's angle (the
    kernels' own parameters): all six angles at once, cosines and sines in two table passes."""
    i = np.arange(n_samples, dtype=np.int64)[:, None]
    k = np.arange(1, N_ORDERS + 1, dtype=np.int64)
    m = np.arange(1, N_LINE + 1, dtype=np.int64)
    start = np.concatenate([(k * a1) & _MASK, np.zeros(N_LINE, dtype=np.int64)])
    step = np.concatenate([(k * inc1) & _MASK, (m * line_inc) & _MASK])
    ang = (start + i * step) & _MASK
    out = np.empty((n_samples, N_BASIS), dtype=np.int64)
    out[:, 0] = basis.Q14_ONE
    out[:, 1::2] = _cos_q14(ang)
    out[:, 2::2] = _sin_q14(ang)
    return out


def sums_from_samples(samples: np.ndarray, offset: int, first_off_q8: int, length_q8: int, line_inc: int) -> list[int]:
    """The 14 sums of one channel computed with numpy from the basis above (exact integers);
    equal to ``basis.reference_sums`` (tested), for the simulator's tools and the tests."""
    y = np.asarray(samples, dtype=np.int64) - offset
    b = basis_q14(len(y), first_off_q8, length_q8, line_inc)
    s = [int(v) for v in y @ b]
    s[0] = int(y.sum())
    return s + [int(y @ y)]


@dataclass(frozen=True)
class FitSettings:
    """What the fit needs to know about the meter (from its INFO)."""

    rate_hz: float
    counts_per_g: tuple[float, ...]
    adc_offset: int = 2048
    line_inc: int = 0
    round_robin: bool = False
    line_hz: float = 0.0
    fe: tuple[float, ...] = ()  # front end H(s) = 1/(1 + a1 s + a2 s^2): (a1_s, a2_s2); () = not corrected

    @classmethod
    def from_info(cls, info: DeviceInfo) -> FitSettings:
        cpg = tuple(float(v) if v else 1.0 for v in info.counts_per_g) or (1.0,)
        fe = tuple(float(v) for v in info.fe[:2]) if len(info.fe) >= 2 else ()
        return cls(float(info.rate_hz), cpg, int(info.adc_offset), int(info.line_inc), bool(info.round_robin),
                   float(info.line_hz), fe)


@dataclass(frozen=True)
class Terms:
    """The model terms fitted for one revolution."""

    orders: int  # harmonics 1..orders (2, 3 or 4)
    line: bool  # line tones 1x and 2x line frequency

    @property
    def columns(self) -> list[int]:
        cols = list(range(1 + 2 * self.orders))
        if self.line:
            cols += list(range(1 + 2 * N_ORDERS, 1 + 2 * N_ORDERS + 2 * N_LINE))
        return cols


def choose_terms(n_samples: int, line_inc: int) -> Terms | None:
    """Terms by samples per parameter (drop 4x, 3x, line tones in that order); None below
    ``MIN_SAMPLES``."""
    orders, line = N_ORDERS, line_inc != 0
    while n_samples < SAMPLES_PER_TERM * len(Terms(orders, line).columns):
        if orders > MIN_ORDERS:
            orders -= 1
        elif line:
            line = False
        else:
            return None
    return Terms(orders, line)


@dataclass
class ChannelFit:
    """One channel's fit: coefficients per fitted column (counts per unit basis), RMS (counts)."""

    coef: dict[int, float] = field(default_factory=dict)
    rms_counts: float = 0.0

    def phasor(self, k: int) -> complex:
        """Order-k phasor in counts (0 if not fitted)."""
        return complex(self.coef.get(2 * k - 1, 0.0), self.coef.get(2 * k, 0.0))


@dataclass
class RevolutionFit:
    """The fit of one revolution before scaling to g: terms, Gram matrix and channel fits."""

    terms: Terms
    gram: np.ndarray  # G = B^T B / Q14^2 over the fitted columns (float64)
    channels: list[ChannelFit]
    collisions: tuple[revmodel.LineCollision, ...] = ()  # line tones not fitted: too close to an order


def gram_q14(b: np.ndarray, cols: list[int]) -> np.ndarray:
    """B^T B over ``cols``, exact in int64 (entries below n * 2**28), returned in float64 in units of
    basis value squared (divided by Q14**2)."""
    sub = b[:, cols]
    return (sub.T @ sub).astype(np.float64) / (Q14 * Q14)


def _line_inflation_ok(g_all: np.ndarray, n_order_cols: int) -> bool:
    """Do the line tones leave every order coefficient's variance within LINE_VARIANCE_LIMIT?"""
    try:
        inv_all = np.linalg.inv(g_all)
        inv_orders = np.linalg.inv(g_all[:n_order_cols, :n_order_cols])
    except np.linalg.LinAlgError:
        return False
    d_all = np.diag(inv_all)[1:n_order_cols]
    d_orders = np.diag(inv_orders)[1:n_order_cols]
    if not np.all(np.isfinite(d_all)) or np.any(d_orders <= 0):
        return False
    return bool(np.all(d_all <= LINE_VARIANCE_LIMIT * d_orders))


def fit_sums(stats: RevStats, settings: FitSettings, accel: float = 0.0) -> RevolutionFit | None:
    """Least squares per channel from the sums of ``stats`` (instrumental variables on the
    modelled angle when ``accel``, turns per sample squared, is not 0); None if the revolution
    cannot be fitted (too few samples, no samples, or a singular basis)."""
    n = int(stats.n_samples)
    if n <= 0 or stats.length_q8 <= 0 or not stats.sums:
        return None
    terms = choose_terms(n, settings.line_inc)
    if terms is None:
        return None
    collisions: tuple[revmodel.LineCollision, ...] = ()
    if terms.line:
        speed_hz = settings.rate_hz * 256.0 / stats.length_q8
        collisions = tuple(revmodel.line_collisions(speed_hz, settings.line_hz, range(1, terms.orders + 1)))
        if collisions:  # one revolution cannot tell the tone from the order: the tones are not fitted
            terms = Terms(terms.orders, False)
    b = basis_q14(n, stats.first_off_q8, stats.length_q8, settings.line_inc)
    g = gram_q14(b, terms.columns)
    if terms.line and not _line_inflation_ok(g, 1 + 2 * terms.orders):
        terms = Terms(terms.orders, False)
        g = g[: 1 + 2 * terms.orders, : 1 + 2 * terms.orders]
    cols = terms.columns
    try:
        chol = np.linalg.cholesky(g)
    except np.linalg.LinAlgError:
        return None
    iv = None
    if accel:
        geom = revmodel.RevGeometry(n, stats.length_q8, stats.first_off_q8, settings.line_inc)
        theta = revmodel.model_basis(geom, accel)[:, cols]
        iv = (b[:, cols] / Q14).T @ theta  # Phi^T Theta
    fits: list[ChannelFit] = []
    for sums in stats.sums:
        rhs = np.array([float(sums[c]) for c in cols]) / Q14
        rhs[0] = float(sums[0])  # Sy: the constant's basis value is 1, not Q14
        if iv is not None:
            x = np.linalg.solve(iv, rhs)
        else:
            x = np.linalg.solve(chol.T, np.linalg.solve(chol, rhs))
        mean = sums[0] / n
        var = sums[basis.N_SUMS - 1] / n - mean * mean
        fits.append(ChannelFit({c: float(v) for c, v in zip(cols, x)}, math.sqrt(var) if var > 0 else 0.0))
    return RevolutionFit(terms, g, fits, collisions)


def revolution(stats: RevStats, settings: FitSettings, prev_length_q8: int | None = None,
               first_sample: int = -1, run_id: int = 0) -> Revolution:
    """The :class:`Revolution` (phasors in g, round-robin delay undone, front end taken out) of
    one REV.  ``prev_length_q8``: the previous revolution's length, when it was a true turn just
    before this one; the speed change it shows is modelled within this revolution.

    A revolution that cannot be fitted keeps its counters and gets ``FLAG_NO_FIT`` with zero
    phasors, so it is never averaged.
    """
    period_us = stats.length_q8 / 256.0 / settings.rate_hz * 1e6 if settings.rate_hz > 0 else 0.0
    channels = stats.channels
    n_ch = len(stats.sums)
    accel = 0.0
    if prev_length_q8 and stats.length_q8 > 0:
        accel = revmodel.accel_from_periods(stats.length_q8 / 256.0, prev_length_q8 / 256.0)
    fit = None if stats.flags & FLAG_NO_FIT else fit_sums(stats, settings, accel)
    if fit is None:
        zeros = [0j] * n_ch
        return Revolution(stats.rev, period_us, stats.n_samples, stats.flags | FLAG_NO_FIT, stats.channel_mask,
                          list(zeros), list(zeros), [0.0] * n_ch, list(zeros), stats=stats)
    speed_hz = settings.rate_hz * 256.0 / stats.length_q8
    fe = [revmodel.frontend_correction(k * speed_hz, settings.fe[0], settings.fe[1]) if settings.fe else None
          for k in (1, 2, 3)]
    h1: list[complex] = []
    h2: list[complex] = []
    h3: list[complex] = []
    rms: list[float] = []
    per_code: list[complex] = []
    step_rad = 2.0 * math.pi * 256.0 / stats.length_q8
    for rank, (ch, cf) in enumerate(zip(channels, fit.channels)):
        cpg = settings.counts_per_g[ch] if ch < len(settings.counts_per_g) else settings.counts_per_g[-1]
        delta = step_rad * rank / n_ch if settings.round_robin and n_ch > 1 else 0.0
        hk = [cf.phasor(k) * complex(math.cos(k * delta), math.sin(k * delta)) / cpg for k in (1, 2, 3)]
        hk = [c.apply(h) if c is not None else h for c, h in zip(fe, hk)]
        one = complex(math.cos(delta), math.sin(delta)) / cpg
        per_code.append(fe[0].apply(one) if fe[0] is not None else one)
        h1.append(hk[0])
        h2.append(hk[1])
        h3.append(hk[2])  # 0 where 3x was not fitted
        rms.append(cf.rms_counts / cpg)
    c1 = fe[0]
    return Revolution(
        stats.rev, period_us, stats.n_samples, stats.flags, stats.channel_mask, h1, h2, rms, h3,
        line_collisions=tuple((c.line_hz, c.order, c.gap_pct) for c in fit.collisions),
        fe_lag_deg=c1.lag_deg if c1 else 0.0, fe_lag_tol_deg=c1.lag_tol_deg if c1 else 0.0,
        fe_gain=c1.gain if c1 else 1.0, fe_gain_tol=c1.gain_tol if c1 else 0.0,
        accel=accel, stats=stats, first_sample=first_sample, run_id=run_id, h1_per_code=tuple(per_code),
    )


def revolution_from_info(stats: RevStats, info: DeviceInfo, prev_length_q8: int | None = None,
                         first_sample: int = -1, run_id: int = 0) -> Revolution:
    """:func:`revolution` with the settings of the meter's INFO."""
    return revolution(stats, FitSettings.from_info(info), prev_length_q8, first_sample, run_id)


class SampleClock:
    """Places revolutions in an unbroken run of samples: consecutive revolutions share their edge,
    so the next one's first sample follows the last one's samples.  A new run starts after START,
    a gap in the revolution numbers, or lost samples (the line tone's phase is carried only
    within a run)."""

    def __init__(self) -> None:
        self.run_id = 0
        self._last: RevStats | None = None
        self._first = 0

    def place(self, stats: RevStats) -> tuple[int, int]:
        """(first_sample, run_id) of ``stats``."""
        last = self._last
        if (last is None or stats.rev != last.rev + 1 or last.flags & (FLAG_DROPPED_SAMPLES | FLAG_NO_FIT)
                or stats.flags & (FLAG_DROPPED_SAMPLES | FLAG_FIRST)):
            self.run_id += 1
            self._first = 0
        else:
            self._first += int(last.n_samples)
        self._last = stats
        return self._first, self.run_id


#: Flags after which a revolution's period is not one true turn (or not just before the next).
_NOT_A_TURN = FLAG_MISSING_PULSE | FLAG_EXTRA_PULSE | FLAG_FIRST | FLAG_NO_FIT | FLAG_DROPPED_SAMPLES


def previous_length(prev: RevStats | None, stats: RevStats) -> int | None:
    """The previous revolution's length if it was a true turn right before ``stats`` (consecutive
    number, no pulse trouble, within 20 % of this one's length), else None."""
    if prev is None or prev.rev != stats.rev - 1 or prev.flags & _NOT_A_TURN or stats.flags & _NOT_A_TURN:
        return None
    if not 0.8 <= prev.length_q8 / max(stats.length_q8, 1) <= 1.25:
        return None
    return prev.length_q8
