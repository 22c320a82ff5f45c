"""Self-test: checks the meter can make after about one second of sampling.

Checks (thresholds are common practice for a bench check, not from a published source):
sample_rate (measured from frames and the board clock, within 5 % of the configured rate),
dropped_samples (none during the test), cpu_load (below 90 %), chN_signal per enabled channel
(RMS in g; fails when the input is flat, which an unplugged or dead sensor gives, or sat at an
ADC end stop), reference (speed from the reference edges; informational, passes either way).
"""

from runtrue_fw import kernels as _k


def _check(name: str, ok: bool, value, unit: str, note: str = "") -> dict:
    return {"name": name, "pass": bool(ok), "value": value, "unit": unit, "note": note}


def _round(v: float, digits: int) -> float:
    return float("%.*g" % (digits, v))


def _int40(buf, o: int) -> int:
    hi = buf[o + 3] | (buf[o + 4] << 8)
    if hi >= 32768:
        hi -= 65536
    return hi * 16777216 + (buf[o] | (buf[o + 1] << 8) | (buf[o + 2] << 16))


def run_checks(*, ring, ring_frames: int, end_frame: int, frames: int, elapsed_ms: int,
               rate_hz: float, slots: list, full_code: int, counts_per_g: list,
               offset: int, dropped: int, revs: int, ref_period_q8: int, cpu_permille: int,
               rev_sums, table) -> dict:
    """Return {"pass": bool, "checks": [...]} (PROTOCOL.md, SELFTEST)."""
    checks = []
    measured = frames * 1000.0 / elapsed_ms if elapsed_ms > 0 else 0.0
    if frames <= 0:
        checks.append(_check("sample_rate", False, 0.0, "Hz", "no samples: ADC not running"))
    else:
        ok = abs(measured / rate_hz - 1.0) <= 0.05
        checks.append(_check("sample_rate", ok, _round(measured, 5), "Hz",
                             "" if ok else "set %.0f Hz" % rate_hz))
    checks.append(_check("dropped_samples", dropped == 0, dropped, "samples",
                         "" if dropped == 0 else "DMA overrun"))
    checks.append(_check("cpu_load", cpu_permille < 900, cpu_permille / 10.0, "%",
                         "" if cpu_permille < 900 else "too busy: lower the rate"))
    n = frames if frames < ring_frames else ring_frames
    mask = ring_frames - 1
    # the integer kernel over the last n frames of all channels (angle step 0: only Sy, Sy.y
    # and the min/max codes are used); n <= 8192 keeps every sum within int40
    p = _k.make_params()
    p[_k.P_N] = n if n > 0 else 0
    p[_k.P_NCH] = len(slots)
    p[_k.P_START] = (end_frame - n) & mask
    p[_k.P_MASK] = mask
    p[_k.P_SLOT] = ring_frames
    p[_k.P_OFFSET] = offset
    out = bytearray(_k.CH_BYTES * len(slots))
    if n > 1:
        rev_sums(ring, table, p, out)
    for k in range(len(slots)):
        ch = slots[k]
        name = "ch%d_signal" % ch
        if n <= 1:
            checks.append(_check(name, False, 0.0, "g", "no samples"))
            continue
        lo = p[_k.P_MIN + k]
        hi = p[_k.P_MAX + k]
        sy = _int40(out, _k.CH_BYTES * k)
        syy = _int40(out, _k.CH_BYTES * k + _k.INT40_LEN * (_k.N_SUMS - 1))
        m = sy / n
        var = syy / n - m * m
        rms_g = (var if var > 0.0 else 0.0) ** 0.5 / counts_per_g[ch]
        if lo <= 0 or hi >= full_code:
            checks.append(_check(name, False, _round(rms_g, 4), "g", "clipped at an ADC end stop"))
        elif hi == lo:
            checks.append(_check(name, False, 0.0, "g", "flat: sensor unplugged?"))
        else:
            checks.append(_check(name, True, _round(rms_g, 4), "g"))
    rpm = 60.0 * rate_hz * 256.0 / ref_period_q8 if revs > 0 and ref_period_q8 > 0 else 0.0
    checks.append(_check("reference", True, _round(rpm, 5), "rpm",
                         "" if revs > 0 else "no edges: machine stopped or mark not seen"))
    ok_all = True
    for c in checks:
        if not c["pass"]:
            ok_all = False
    return {"pass": ok_all, "checks": checks}
