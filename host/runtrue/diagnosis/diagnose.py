"""A diagnosis before weights go on: what the meter sees, put through severity and the verdict.

From revolutions (the meter's per-revolution fits: 1x, 2x, 3x, RMS, the 1x phase of each turn)
and, when there is one, a raw capture (spectrum, broadband velocity RMS, what lies below 1x and
between the orders): per pickup, the severity zone (:mod:`runtrue.diagnosis.severity`) and the
"is it unbalance?" verdict (:mod:`runtrue.diagnosis.verdict`); overall, the verdict of the
loudest pickup with the two-pickup ratio where two radial pickups share a bearing.  The verdict
is advice: the user may balance anyway.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from runtrue.diagnosis.severity import (
    Severity,
    Spectrum,
    assess,
    band_hz,
    broadband_velocity_rms_mm_s,
    order_velocity_rms_mm_s,
    spectrum,
)
from runtrue.diagnosis.spectral import OrderContent, order_content
from runtrue.diagnosis.verdict import Verdict, circular_sd_deg, judge
from runtrue.protocol.admit import counts
from runtrue.readings.units import lag_deg

GO_ON_TEXT = ("The verdict is advice: you can balance anyway, but weights rarely fix what is listed "
              "and may have to come off again.")


def _amp_phase(z: complex) -> dict[str, float]:
    return {"amp_g": round(abs(z), 6), "phase_deg": round(lag_deg(z), 2)}


@dataclass
class ChannelDiagnosis:
    channel: int
    name: str
    n_revs: int
    one_x_g: complex
    orders_g: list[complex]                 # 2x, 3x (g peak; 0 where not fitted)
    overall_rms_g: float
    phase_sd_deg: float
    severity: Severity
    severity_from: str                      # "capture" or "orders" (1x-3x only: no capture)
    verdict: Verdict
    content: OrderContent | None = None
    spectrum: Spectrum | None = None
    waveform_g: np.ndarray | None = None

    def to_dict(self, spectrum: bool = False) -> dict[str, Any]:
        d: dict[str, Any] = {
            "channel": self.channel, "name": self.name, "revs": self.n_revs,
            "one_x": _amp_phase(self.one_x_g),
            "two_x": _amp_phase(self.orders_g[0]) if self.orders_g else None,
            "three_x": _amp_phase(self.orders_g[1]) if len(self.orders_g) > 1 else None,
            "overall_rms_g": round(self.overall_rms_g, 6),
            "phase_sd_deg": round(self.phase_sd_deg, 2) if math.isfinite(self.phase_sd_deg) else None,
            "severity": {"velocity_rms_mm_s": round(self.severity.velocity_rms_mm_s, 3),
                         "zone": self.severity.zone, "meaning": self.severity.meaning,
                         "class": self.severity.table.key, "table": self.severity.table.title,
                         "source": self.severity.table.source, "from": self.severity_from},
            "verdict": verdict_dict(self.verdict),
        }
        if self.content is not None:
            c = self.content
            d["content"] = {"band_hz": list(c.band_hz), "total_mm_s_rms": round(c.total_mm_s_rms, 3),
                            "orders_mm_s_rms": [[k, round(v, 3)] for k, v in c.orders_mm_s_rms],
                            "sub_sync_mm_s_rms": round(c.sub_sync_mm_s_rms, 3),
                            "non_sync_mm_s_rms": round(c.non_sync_mm_s_rms, 3),
                            "electrical_mm_s_rms": round(c.electrical_mm_s_rms, 3), "line_hz": c.line_hz,
                            "shares": {k: round(v, 4) for k, v in c.shares().items()}}
        if spectrum and self.spectrum is not None:
            keep = self.spectrum.freq_hz <= 1000.0
            d["spectrum"] = {"freq_hz": [round(float(f), 3) for f in self.spectrum.freq_hz[keep]],
                             "velocity_mm_s_pk": [round(float(v), 4) for v in self.spectrum.velocity_mm_s_pk[keep]],
                             "window": self.spectrum.window}
        return d


def verdict_dict(v: Verdict) -> dict[str, Any]:
    return {"unbalance": v.unbalance, "headline": v.headline, "checks": v.checks,
            "findings": [{"name": f.name, "ok": f.ok,
                          "value": round(f.value, 4) if math.isfinite(f.value) else None,
                          "limit": f.limit} for f in v.findings]}


@dataclass
class Diagnosis:
    speed_rpm: float
    machine_class: str
    channels: list[ChannelDiagnosis]
    verdict: Verdict
    rate_hz: float = 0.0
    capture_frames: int = 0
    pair: tuple[int, int] | None = None
    notes: list[str] = field(default_factory=list)
    edges_samples: np.ndarray | None = None     # the capture's reference edges (samples from its start)

    @property
    def loudest(self) -> ChannelDiagnosis:
        return max(self.channels, key=lambda c: abs(c.one_x_g))

    @property
    def worst_severity(self) -> Severity:
        return max((c.severity for c in self.channels), key=lambda s: s.velocity_rms_mm_s)

    def to_dict(self, spectrum: bool = False) -> dict[str, Any]:
        """JSON-ready; ``spectrum``: each pickup's velocity spectrum up to 1000 Hz too (for a
        report kept with the job)."""
        return {
            "rpm": round(self.speed_rpm, 2), "machine_class": self.machine_class,
            "capture": {"frames": self.capture_frames, "rate_hz": self.rate_hz, "window": "Hann"}
            if self.capture_frames else None,
            "pair": list(self.pair) if self.pair else None,
            "verdict": verdict_dict(self.verdict),
            "go_on": None if self.verdict.unbalance else GO_ON_TEXT,
            "severity": {"zone": self.worst_severity.zone,
                         "velocity_rms_mm_s": round(self.worst_severity.velocity_rms_mm_s, 3),
                         "meaning": self.worst_severity.meaning},
            "channels": [c.to_dict(spectrum) for c in self.channels],
            "notes": list(self.notes),
            "conventions": "amp_g: g peak; phase_deg: lag after the reference mark (2x: of the 2x cycle); "
                           "velocity: mm/s r.m.s. over the band of ISO 20816-3",
        }

    def lines(self) -> list[str]:
        """The diagnosis as text lines (the command's table, the screen's panel)."""
        out = [f"{self.speed_rpm:.0f} rpm; " + self.verdict.headline]
        for c in self.channels:
            s = c.severity
            two = abs(c.orders_g[0]) / abs(c.one_x_g) if c.orders_g and abs(c.one_x_g) > 0 else 0.0
            out.append(f"ch{c.channel} {c.name}: 1x {abs(c.one_x_g):.3f} g, 2x {two:.0%} of 1x, "
                       f"{s.velocity_rms_mm_s:.2f} mm/s rms zone {s.zone}"
                       + (" (orders only)" if c.severity_from == "orders" else ""))
        for text in self.verdict.checks:
            out.append(f"check: {text}")
        if not self.verdict.unbalance:
            out.append(GO_ON_TEXT)
        out.extend(self.notes)
        return out


def diagnose(revs: Sequence[Any], capture: Any = None, machine_class: str = "class-I", *,
             pair: tuple[int, int] | None = None, names: dict[int, str] | None = None,
             linearity: tuple[complex, complex, complex] | None = None, line_hz: float = 0.0) -> Diagnosis:
    """The diagnosis of ``revs`` (:class:`runtrue.protocol.messages.Revolution`; flagged ones are
    left out) and, if given, a :class:`runtrue.device.capture.RawCapture` of the same running.
    ``pair``: two physical channels on one bearing, 90 deg apart; ``linearity``: (reference,
    expected, measured) 1x of the loudest pickup after a known weight (see ``verdict.judge``);
    ``line_hz``: the mains frequency (INFO's), so that hum is counted as electrical."""
    good = [r for r in revs if counts(r)]
    if len(good) < 3:
        raise ValueError(f"only {len(good)} usable revolutions: steady the speed and check the reference "
                         "mark, then diagnose again")
    speed = float(np.mean([r.speed_rpm for r in good]))
    chans = list(good[0].channels)
    names = names or {}
    notes: list[str] = []
    cap_speed = capture.speed_rpm() if capture is not None else float("nan")
    out: list[ChannelDiagnosis] = []
    for i, ch in enumerate(chans):
        h1 = np.array([r.h1[i] for r in good])
        h2 = np.array([r.h2[i] for r in good])
        h3 = np.array([r.h3[i] if getattr(r, "h3", None) else 0j for r in good])
        rms = float(np.sqrt(np.mean([r.rms_g[i] ** 2 for r in good])))
        one = complex(h1.mean())
        orders = [complex(h2.mean()), complex(h3.mean())]
        sd = circular_sd_deg(list(h1))
        content = spec = wave = None
        if capture is not None and ch in capture.channels:
            x = capture.channel(ch)
            cs = cap_speed if math.isfinite(cap_speed) else speed
            vel = broadband_velocity_rms_mm_s(x, capture.rate_hz, band_hz(cs))
            sev, sev_from = assess(vel, machine_class), "capture"
            try:
                content = order_content(x, capture.rate_hz, cs, line_hz=line_hz)
            except ValueError as exc:
                notes.append(str(exc))
            spec = spectrum(x, capture.rate_hz)
            wave = x
        else:
            sev, sev_from = assess(order_velocity_rms_mm_s([one, *orders], speed), machine_class), "orders"
        verdict = judge(one_x_g=one, orders_g=orders, overall_rms_g=rms, per_rev_one_x_g=list(h1),
                        shares=content.shares() if content is not None else None)
        out.append(ChannelDiagnosis(ch, names.get(ch, f"channel {ch}"), len(good), one, orders, rms, sd, sev,
                                    sev_from, verdict, content, spec, wave))
    loud = max(out, key=lambda c: abs(c.one_x_g))
    other = None
    if pair is not None:
        a, b = pair
        if a not in chans or b not in chans:
            raise ValueError(f"--pair {a},{b}: both channels must be measured (channels {chans})")
        partner = b if loud.channel == a else a if loud.channel == b else None
        if partner is None:
            loud = next(c for c in out if c.channel == a)
            partner = b
        other = next(c for c in out if c.channel == partner).one_x_g
    overall = judge(one_x_g=loud.one_x_g, orders_g=loud.orders_g, overall_rms_g=loud.overall_rms_g,
                    per_rev_one_x_g=[r.h1[chans.index(loud.channel)] for r in good],
                    other_pickup_one_x_g=other, linearity=linearity,
                    shares=loud.content.shares() if loud.content is not None else None)
    if capture is None:
        notes.append("no raw capture: severity from the 1x-3x orders only, no sub-/non-synchronous check")
    return Diagnosis(speed, machine_class, out, overall, capture.rate_hz if capture is not None else 0.0,
                     capture.n_frames if capture is not None else 0, pair, notes,
                     capture.edges_samples if capture is not None else None)
