"""Benchmark: the meter's 1x estimate against the Cramér-Rao lower bound.

Run:  .venv/bin/python tests/bench/bench_crb.py [--trials 300] [--quick]

What is measured (``--part model``, the default): the host's disturbance model on synthetic exact
sums, see ``main_model``.  ``--part sim``: the virtual machine (runtrue.sim) is sampled by SimBoard,
the REAL firmware Meter sends its exact integer sums, the host fits them (runtrue.device.revfit)
and averages N revolutions (runtrue.readings.vector_average, without the meter's INFO: the plain
vector average of the revolutions).  Each trial is
one such N-revolution reading; the error of a trial is its mean vector minus the truth, the
machine's noise-free 1x at each revolution's measured speed (VirtualMachine.expected_1x_at),
averaged over the same revolutions.  The error is split into amplitude (along the truth) and
phase (across it, divided by the amplitude).  Printed per case: the ratio of the measured
standard deviation of each to the square root of its bound, and the bias.

The bound.  For s[n] = A cos(w n + phi) + w[n], w[n] white Gaussian of variance sigma^2, the
frequency known, the Fisher information for (A, phi) over N samples is, for w not near 0 or pi,
diag(N/(2 sigma^2), N A^2/(2 sigma^2)), so

    var(A_hat)   >= 2 sigma^2 / N,        var(phi_hat) >= 2 sigma^2 / (A^2 N)

(D. C. Rife and R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
observations", IEEE Trans. Inf. Theory 20(5), 1974, pp. 591-598; S. M. Kay, *Fundamentals of
Statistical Signal Processing, Vol. I: Estimation Theory*, Prentice Hall 1993, Example 3.14,
which treats A, f0, phi all unknown; the known-frequency form above is its (A, phi) block --
both from memory).  Because that form is from memory, this script VERIFIES it: it also computes
the exact bound numerically, from the Fisher information J^T J / sigma^2 of the actual sample
angles of every revolution, with the per-revolution DC and 2x terms the firmware fits as
nuisance parameters (Schur complement per revolution, summed; Kay 1993, chapter 3, the CRLB
of a vector parameter for signals in white Gaussian noise, from memory).  The column
"exact/formula" shows how closely the two agree (within about 1 % on these sample grids).
N is the total number of samples in the N revolutions.

Where the bound does not apply, and why (the script says so per case):
* quantisation: the 12-bit ADC adds rounding error of variance LSB^2/12; when sigma is well
  above an LSB this behaves as extra white noise (B. Widrow and I. Kollar, *Quantization Noise*,
  Cambridge 2008, ch. 4-5, from memory) and the bound with sigma_eff^2 = sigma^2 + LSB^2/12 is
  printed beside the white-noise one; when sigma is below about half an LSB the error is no
  longer random from sample to sample and neither bound describes it;
* interference at twice line frequency and harmonics: not white noise.  Non-synchronous 100/
  120 Hz leaks into each revolution's fit and averages down across revolutions only as its
  phase relative to the rotor wanders; the bound (white noise only) is not a limit for it;
* speed drift: the fit assumes uniform rotation between the two edges of a revolution; a
  changing speed bends the angle scale (model error), and the bound assumes the model is exact.
"""

from __future__ import annotations

import argparse
import cmath
import dataclasses
import math
import sys
import time
from pathlib import Path

import numpy as np

_ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(_ROOT / "firmware"))  # firmware package first (see tests/host/sim/conftest.py)

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from disturbances import Machine, accels, synth  # noqa: E402

from runtrue.device import revmodel as rm  # noqa: E402
from runtrue.device.client import MeterClient  # noqa: E402
from runtrue.readings import joint as jf  # noqa: E402
from runtrue.readings import vector_average  # noqa: E402
from runtrue.sim.scenarios import SCENARIOS, Scenario  # noqa: E402
from runtrue.sim.transport import SimTransport  # noqa: E402


@dataclasses.dataclass(frozen=True)
class Case:
    label: str
    noise_g: float
    n_revs: int
    drift_frac: float = 0.0
    line_g: float = 0.0
    harmonics: bool = False
    counts_per_g: float = 409.6  # the meter's 12-bit ADC
    adc_bits: int = 12
    decel_rpm_per_s: float = 0.0  # each reading taken while coasting down at this rate


def scenario_for(case: Case) -> Scenario:
    """The fan, one pickup, with only the effects this case asks for."""
    sc = SCENARIOS["fan"]
    pk = dataclasses.replace(
        sc.pickups[0],
        noise_g=case.noise_g,
        line_g=case.line_g,
        harmonics_g=sc.pickups[0].harmonics_g if case.harmonics else (),
        dc_offset_g=0.0,
    )
    zero = 1 << (case.adc_bits - 1)
    fe = dataclasses.replace(sc.front_end, counts_per_g=case.counts_per_g, adc_bits=case.adc_bits, zero_code=zero)
    return dataclasses.replace(
        sc, pickups=(pk,), front_end=fe, speed_drift_frac=case.drift_frac, speed_drift_tau_s=0.5,
        glitch_per_rev=0.0, missed_per_rev=0.0,
    )


def exact_bound(n_samples: list[int], a0: list[float], d: list[float], amp: float, sigma: float) -> tuple[float, float]:
    """CRB (var A, var phi) for A cos(phi_i - lag) over the given revolutions, with DC and 2x
    of every revolution as nuisance parameters (Schur complement), white noise sigma."""
    info = np.zeros((2, 2))
    for n, a, step in zip(n_samples, a0, d):
        ang = a + step * np.arange(n)
        # model: A cos(ang - lag) + c0 + c2 cos 2ang + s2 sin 2ang; derivatives at lag = 0
        j_amp = np.cos(ang)
        j_lag = amp * np.sin(ang)
        nuis = np.column_stack([np.ones(n), np.cos(2 * ang), np.sin(2 * ang)])
        jm = np.column_stack([j_amp, j_lag])
        f_mm = jm.T @ jm
        f_mn = jm.T @ nuis
        f_nn = nuis.T @ nuis
        info += (f_mm - f_mn @ np.linalg.solve(f_nn, f_mn.T)) / sigma**2
    cov = np.linalg.inv(info)
    return float(cov[0, 0]), float(cov[1, 1])


def run_case(case: Case, trials: int, seed: int) -> dict:
    sc = scenario_for(case)
    transport = SimTransport(sc, seed=seed)
    client = MeterClient(transport, port=transport.name)
    rate = client.identify().rate_hz
    client.start()
    client.revolutions(2)  # settle: skip the FIRST revolution
    machine = transport.machine
    errs_amp, errs_ph, amps, samples = [], [], [], []
    exact_a, exact_p = [], []
    for _ in range(trials):
        if case.decel_rpm_per_s:  # back to running speed, then measure while it coasts down
            machine.set_speed_rpm(sc.speed_rpm)
            machine.coast_down(case.decel_rpm_per_s)
            client.discard_revolutions()
            client.revolutions(3)  # the jump back up is flagged; let it pass
        revs = client.revolutions(case.n_revs, timeout_s=5.0, usable_only=True)
        reading = vector_average(revs)
        est = reading.channels[0].mean
        truth = complex(
            np.mean([machine.expected_1x_at(r.speed_rpm, -case.decel_rpm_per_s)[0] for r in revs])
        )
        rot = est * np.conj(truth) / abs(truth)  # error frame: real = along the truth
        errs_amp.append(rot.real - abs(truth))
        errs_ph.append(math.atan2(rot.imag, rot.real))
        amps.append(abs(truth))
        samples.append(sum(r.n_samples for r in revs))
        if len(exact_a) < 5:  # exact bound from the real sample angles of a few trials
            n_s = [r.n_samples for r in revs]
            # revolution length in samples L; first sample at fractional offset: angle model of
            # the firmware (a0 = 2 pi * offset / L, d = 2 pi / L); the offset is uniform in [0, 1)
            lengths = [r.period_us * 1e-6 * rate for r in revs]
            rng = np.random.default_rng(len(exact_a))
            a0 = [2 * math.pi * rng.uniform() / L for L in lengths]
            d = [2 * math.pi / L for L in lengths]
            va, vp = exact_bound(n_s, a0, d, abs(truth), math.sqrt(sigma_eff2(case)))
            exact_a.append(va)
            exact_p.append(vp)
    client.stop()
    n_mean = float(np.mean(samples))
    amp_mean = float(np.mean(amps))
    sig2 = case.noise_g**2
    crb_a = 2 * sig2 / n_mean
    crb_p = 2 * sig2 / (amp_mean**2 * n_mean)
    s2e = sigma_eff2(case)
    crb_a_eff = 2 * s2e / n_mean
    crb_p_eff = 2 * s2e / (amp_mean**2 * n_mean)
    sd_a = float(np.std(errs_amp, ddof=1))
    sd_p = float(np.std(errs_ph, ddof=1))
    return {
        "case": case,
        "N": n_mean,
        "amp": amp_mean,
        "ratio_a": sd_a / math.sqrt(crb_a) if crb_a > 0 else math.inf,
        "ratio_p": sd_p / math.sqrt(crb_p) if crb_p > 0 else math.inf,
        "ratio_a_eff": sd_a / math.sqrt(crb_a_eff),
        "ratio_p_eff": sd_p / math.sqrt(crb_p_eff),
        "exact_over_formula": float(np.mean(exact_a)) / crb_a_eff * 0.5
        + float(np.mean(exact_p)) / crb_p_eff * 0.5,
        "bias_a_pct": 100 * float(np.mean(errs_amp)) / amp_mean,
        "bias_p_deg": math.degrees(float(np.mean(errs_ph))),
        "bias_a_in_sd": float(np.mean(errs_amp)) / (sd_a / math.sqrt(trials)),
        "sd_p_deg": math.degrees(sd_p),
        "sd_a_pct": 100 * sd_a / amp_mean,
    }


def sigma_eff2(case: Case) -> float:
    lsb_g = 1.0 / case.counts_per_g
    return case.noise_g**2 + lsb_g**2 / 12.0


def note_for(case: Case) -> str:
    lsb = 1.0 / case.counts_per_g
    notes = []
    if case.noise_g < 0.5 * lsb:
        notes.append("sigma < LSB/2: quantisation dominates, bound n/a")
    elif case.noise_g < 3 * lsb and case.adc_bits <= 12:
        notes.append("quantisation adds ~LSB^2/12: compare eff. ratio")
    if case.line_g:
        notes.append("2x-line interference: not white, bound n/a")
    if case.harmonics:
        notes.append("2x/3x harmonics (2x is fitted)")
    if case.drift_frac:
        notes.append("speed drift: angle-model error")
    if case.decel_rpm_per_s:
        notes.append("coast-down: uniform-rotation model error, bias")
    return "; ".join(notes) or "bound applies"


CASES = [
    # noise level well above the 12-bit ADC's step (the meter takes 8-12 bits): the bound applies
    Case("12-bit, sigma 0.2 g, 10 revs", 0.2, 10),
    Case("12-bit, sigma 0.5 g, 10 revs", 0.5, 10),
    # revolution count
    Case("12-bit, sigma 0.05 g, 1 rev", 0.05, 1),
    Case("12-bit, sigma 0.05 g, 10 revs", 0.05, 10),
    Case("12-bit, sigma 0.05 g, 50 revs", 0.05, 50),
    # quantisation
    Case("12-bit, sigma 0.005 g (2 LSB), 10 revs", 0.005, 10),
    Case("12-bit, sigma 0.001 g (0.4 LSB), 10 revs", 0.001, 10),
    Case("coarse 40.96 c/g, sigma 0.02 g, 10 revs", 0.02, 10, counts_per_g=40.96),
    # speed drift
    Case("12-bit, sigma 0.05 g, drift 0.5 %, 10 revs", 0.05, 10, drift_frac=0.005),
    Case("12-bit, sigma 0.05 g, drift 2 %, 10 revs", 0.05, 10, drift_frac=0.02),
    Case("12-bit, sigma 0.05 g, coast-down 300 rpm/s, 10 revs", 0.05, 10, decel_rpm_per_s=300.0),
    # interference
    Case("12-bit, sigma 0.05 g, 2x line 0.05 g, 10 revs", 0.05, 10, line_g=0.05),
    Case("12-bit, sigma 0.05 g, 2x line 0.2 g, 10 revs", 0.05, 10, line_g=0.2),
    Case("12-bit, sigma 0.05 g, harmonics, 10 revs", 0.05, 10, harmonics=True),
]




# ---- the host's disturbance model (runtrue.device.revmodel) ------------------------------------

@dataclasses.dataclass(frozen=True)
class DCase:
    label: str
    machine: Machine
    n_revs: int  # revolutions per reading (1: one revolution's fit; more: a joint fit, then the mean)
    estimator: str = "model"  # "model": IV on the modelled angle; "uniform": angle uniform between edges
    orders: tuple[int, ...] = (1, 2, 3, 4)


def _snr_sigma(amp_codes: float, snr_db: float) -> float:
    """Noise that puts the 1x (power A^2/2) snr_db above the noise power."""
    return amp_codes / math.sqrt(2.0) / 10 ** (snr_db / 20.0)


def _project(cov2: np.ndarray, truth: complex) -> tuple[float, float]:
    """(var amplitude, var phase) from the 2x2 covariance of (re, im) of an estimate of ``truth``."""
    u = np.array([truth.real, truth.imag]) / abs(truth)
    v = np.array([-u[1], u[0]])
    return float(u @ cov2 @ u), float(v @ cov2 @ v) / abs(truth) ** 2


def run_dcase(case: DCase, trials: int, seed: int) -> dict:
    rng = np.random.default_rng(seed)
    m = case.machine
    s2 = m.sigma_codes**2 + 1.0 / 12.0  # white noise plus the rounding to whole codes
    errs_a, errs_p, bounds_a, bounds_p, white_a = [], [], [], [], []
    warned = 0
    n_samples = 0
    for _ in range(trials):
        revs = synth(m, case.n_revs + 2, rng)
        acc = accels(revs)
        inner, acc_in = revs[1:-1], acc[1:-1]
        if case.estimator == "uniform":
            acc_in = [0.0] * len(inner)
        if case.n_revs == 1:
            r = inner[0]
            fit = rm.fit_revolution(r.geom, r.sums, accel=acc_in[0], orders=case.orders, line_hz=m.line_hz,
                                    speed_hz=m.speed_hz)
            est = fit.orders[1]
            i_c, i_s = (fit.columns.index(c) for c in rm.harmonic_columns(1))
            cov2 = fit.crlb_unit[np.ix_([i_c, i_s], [i_c, i_s])] * s2
            warned += bool(fit.collisions)
        else:
            j = jf.fit_joint([jf.RevInput(r.geom, r.sums, a, r.first_sample) for r, a in zip(inner, acc_in)],
                             orders=case.orders, line_hz=m.line_hz, speed_hz=m.speed_hz)
            est = j.orders[1]
            ic, is_ = j.index["cos1x"], j.index["sin1x"]
            cov2 = j.crlb_unit[np.ix_([ic, is_], [ic, is_])] * s2
            warned += bool(j.collisions)
        truth = complex(np.mean([r.truth for r in inner]))
        rot = est * np.conj(truth) / abs(truth)
        errs_a.append(rot.real - abs(truth))
        errs_p.append(math.atan2(rot.imag, rot.real))
        va, vp = _project(cov2, truth)
        bounds_a.append(va)
        bounds_p.append(vp)
        n = sum(r.geom.n_samples for r in inner)
        n_samples += n
        white_a.append(2.0 * s2 / n)  # the bound if only the 1x (and nothing else) were fitted
    sd_a, sd_p = float(np.std(errs_a, ddof=1)), float(np.std(errs_p, ddof=1))
    amp = abs(m.amp_codes)
    return {
        "ratio_a": sd_a / math.sqrt(np.mean(bounds_a)),
        "ratio_p": sd_p / math.sqrt(np.mean(bounds_p)),
        "cost": math.sqrt(np.mean(bounds_a) / np.mean(white_a)),
        "bias_a_pct": 100 * float(np.mean(errs_a)) / amp,
        "bias_p_deg": math.degrees(float(np.mean(errs_p))),
        "bias_p_se_deg": math.degrees(sd_p / math.sqrt(trials)),
        "sd_p_deg": math.degrees(sd_p),
        "warned": warned / trials,
        "samples_per_rev": n_samples / trials / case.n_revs,
    }


A_CODES = 400.0  # about 1 g at the meter's 409.6 counts per g
FAN_HZ = 1470 / 60.0  # 163 samples a revolution at 4 kS/s


def _m(**kw: object) -> Machine:
    base = dict(speed_hz=FAN_HZ, amp_codes=A_CODES, sigma_codes=_snr_sigma(A_CODES, 40.0))
    base.update(kw)
    return Machine(**base)  # type: ignore[arg-type]


def dcases() -> list[DCase]:
    hx = ((2, cmath.rect(0.5 * A_CODES, 1.0)), (3, cmath.rect(0.5 * A_CODES, 2.5)))
    tone = dict(line_codes=10 * A_CODES, line_tone_hz=100.0)  # 20 dB above the 1x
    coast = -300.0 / 60.0 / FAN_HZ**2  # 300 rpm/s: relative change per revolution
    out = []
    for n in (1, 10):
        out += [
            DCase(f"white noise 20 dB, steady, {n} rev", _m(sigma_codes=_snr_sigma(A_CODES, 20.0)), n),
            DCase(f"white noise 40 dB, steady, {n} rev", _m(), n),
            DCase(f"100 Hz tone +20 dB, 1470 rpm (2 % from 4x), {n} rev", _m(**tone), n),
            DCase(f"100 Hz tone +20 dB, 1100 rpm, {n} rev", _m(speed_hz=1100 / 60, **tone), n),
            DCase(f"2x, 3x at 50 %, 163 samples/rev, {n} rev", _m(orders=hx), n),
            DCase(f"2x, 3x at 50 %, 17.3 samples/rev, {n} rev", _m(orders=hx, speed_hz=4000 / 17.3, line_hz=0.0), n,
                  orders=(1, 2, 3)),
            DCase(f"speed -5 % -> +5 % in a rev, uniform angle, {n} rev", _m(change_per_rev=0.1), n, "uniform"),
            DCase(f"speed -5 % -> +5 % in a rev, modelled, {n} rev", _m(change_per_rev=0.1), n),
        ]
        if n == 1:  # slowing 10 % a revolution, a rotor stops within a few revolutions
            out.append(DCase(f"speed +5 % -> -5 % in a rev, modelled, {n} rev", _m(change_per_rev=-0.1), n))
        out += [
            DCase(f"coast-down 300 rpm/s, uniform angle, {n} rev", _m(change_per_rev=coast), n, "uniform"),
            DCase(f"coast-down 300 rpm/s, modelled, {n} rev", _m(change_per_rev=coast), n),
        ]
    return out


def main_model(trials: int, seed: int) -> None:
    print("Host fit from the meter's exact sums (runtrue.device.revmodel) against the Cramer-Rao bound of")
    print("the model being fitted: one revolution: dc, 1x..4x, the two line tones; 10 revolutions: a dc each,")
    print("1x..4x and each line tone common to all (joint fit); the angle quadratic through the edges; synthetic")
    print(f"signals (tests/disturbances.py), 1x = {A_CODES:g} codes, whole-code samples, 4 kS/s.")
    print("ratio = std / sqrt(CRLB) (amplitude, phase); cost = sqrt(CRLB / bound of a 1x-only fit);")
    print("bias of the phase +- its standard error; warned = share of readings with a line-hum warning")
    print(f"readings: {trials} of one revolution, {max(50, trials // 2)} of ten per case; a ratio estimated from "
          f"T readings is itself uncertain by about +-{100 / math.sqrt(2 * max(50, trials // 2)):.1f} % (T = "
          f"{max(50, trials // 2)}), +-{100 / math.sqrt(2 * trials):.1f} % (T = {trials})")
    print(f"{'case':56} {'smp/rev':>7} {'amp':>5} {'ph':>5} {'cost':>5} {'bias amp':>8} {'bias ph deg':>16} "
          f"{'sd ph':>6} {'warned':>6}")
    print(f"{'':56} {'':>7} {'ratio':>5} {'ratio':>5} {'':>5} {'%':>8} {'':>16} {'deg':>6}")
    worst_white = worst_dist = worst_bias = 0.0
    for i, case in enumerate(dcases()):
        n_trials = trials if case.n_revs == 1 else max(50, trials // 2)
        r = run_dcase(case, n_trials, seed + i)
        ratio = max(r["ratio_a"], r["ratio_p"])
        if case.estimator == "model" and not (r["warned"] > 0.5 and case.machine.line_codes):
            if "white" in case.label:
                worst_white = max(worst_white, ratio)
            else:
                worst_dist = max(worst_dist, ratio)
            if "speed" in case.label or "coast" in case.label:
                worst_bias = max(worst_bias, abs(r["bias_p_deg"]))
        print(f"{case.label:56} {r['samples_per_rev']:7.0f} {r['ratio_a']:5.2f} {r['ratio_p']:5.2f} {r['cost']:5.2f} "
              f"{r['bias_a_pct']:+8.3f} {r['bias_p_deg']:+8.4f} +-{r['bias_p_se_deg']:6.4f} {r['sd_p_deg']:6.3f} "
              f"{r['warned']:6.0%}", flush=True)
    print(f"worst ratio, white noise: {worst_white:.2f} (target <= 1.05); under disturbances: {worst_dist:.2f} "
          f"(target <= 1.2); worst phase bias with a speed change: {worst_bias:.4f} deg (target <= 0.05)")
    print("(readings with hum that were warned about are left out of the worst figures: one revolution at")
    print(" 1470 rpm cannot tell 100 Hz from 4x (98 Hz) nor 50 Hz from 2x; the warning asks to average longer,")
    print(" and the 10-revolution joint fit separates them)")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=300, help="readings per case (default 300)")
    parser.add_argument("--quick", action="store_true", help="first 4 cases, 60 trials")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--part", choices=("model", "sim", "all"), default="model",
                        help="model: the host's disturbance model on synthetic sums (default); "
                        "sim: the meter through the simulator; all: both")
    args = parser.parse_args()
    if args.part in ("model", "all"):
        main_model(60 if args.quick else max(args.trials, 2000), args.seed)
        if args.part == "model":
            return 0
    cases = CASES[:4] if args.quick else CASES
    trials = 60 if args.quick else args.trials
    print(f"1x estimate vs Cramer-Rao bound: fan scenario (1470 rpm, ~0.4 g 1x), {trials} readings per case")
    print("ratio = measured std / sqrt(CRB); CRB = 2 s^2/N (amp), 2 s^2/(A^2 N) (phase), s = white noise;")
    print("eff = same with s^2 + LSB^2/12; exact/formula = numerical CRB with the fit's nuisances / formula")
    print(f"(std of a ratio estimate from {trials} trials: about +-{100 / math.sqrt(2 * trials):.0f} %; 1-rev cases use 2000)")
    head = (f"{'case':52} {'N':>6} {'amp':>5} {'amp':>5} {'ph':>5} {'amp':>5} {'ph':>5} "
            f"{'exact/':>6} {'bias':>7} {'bias':>7} {'sd ph':>6}  note")
    print(head)
    print(f"{'':52} {'samp':>6} {'g':>5} {'ratio':>5} {'ratio':>5} {'eff':>5} {'eff':>5} {'formul':>6} "
          f"{'amp %':>7} {'ph deg':>7} {'deg':>6}")
    t0 = time.perf_counter()
    worst = 0.0
    formula_dev = 0.0
    for i, case in enumerate(cases):
        # at least 2000 revolutions per case (single-revolution readings are cheap)
        r = run_case(case, max(trials, 2000 // case.n_revs) if not args.quick else trials, args.seed + i)
        note = note_for(case)
        if note == "bound applies":
            worst = max(worst, r["ratio_a"], r["ratio_p"])
        formula_dev = max(formula_dev, abs(r["exact_over_formula"] - 1.0))
        print(f"{case.label:52} {r['N']:6.0f} {r['amp']:5.3f} {r['ratio_a']:5.2f} {r['ratio_p']:5.2f} "
              f"{r['ratio_a_eff']:5.2f} {r['ratio_p_eff']:5.2f} {r['exact_over_formula']:6.3f} "
              f"{r['bias_a_pct']:+7.3f} {r['bias_p_deg']:+7.3f} {r['sd_p_deg']:6.3f}  {note}", flush=True)
    print(f"worst ratio where the white-noise bound applies: {worst:.2f} (target <= 1.1)")
    print(f"bound formula (from memory) vs exact numerical CRB with the fit's nuisances: within "
          f"{100 * formula_dev:.1f} %, so the formula's form is verified for these sample grids")
    print("where the bound does not apply:")
    print("  sigma < LSB/2: rounding error is then deterministic, not white; the 'eff' columns use")
    print("    sigma^2 + LSB^2/12 and show how far that approximation goes (Widrow and Kollar 2008)")
    print("  2x-line interference: a 100 Hz tone is not white noise; in this plain per-revolution")
    print("    average it leaks into each revolution's fit and averages down only as its phase walks")
    print("    relative to the rotor; readings with the meter's INFO fit it across the revolutions")
    print("    (--part model, runtrue.readings.joint)")
    print("  coast-down: the host models the speed change from the previous revolution (revfit);")
    print("    the truth here is taken at each revolution's measured speed")
    print(f"run time {time.perf_counter() - t0:.1f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
