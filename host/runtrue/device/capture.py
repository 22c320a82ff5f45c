"""Raw capture on the host: the RAW parts put together into samples in g and edge times.

Implements the host side of firmware/PROTOCOL.md, "Raw capture": BEGIN, EDGES, SAMPLES, END
parts of one capture id are collected; the ADC codes become g with INFO's calibration,
``g = (code - zero_code) / counts_per_g`` per channel, and the edge positions (1/256 sample from
the block's first frame) become sample positions.  With INFO ``round_robin`` the channel of rank
r in a frame was converted r / n_ch of a sample after the first: ``channel_offset_samples``
says so for code that needs the exact timing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from runtrue.device.errors import MeterError
from runtrue.protocol.messages import DeviceInfo, channels_of_mask
from runtrue.protocol.raw import RAW_BEGIN, RAW_EDGES, RAW_END, RAW_SAMPLES, RawPart

END_MEANING = {
    0: "complete",
    1: "samples overwritten before they were sent (the link was too slow): capture again",
    2: "streaming stopped during the capture: START and capture again",
}


class CaptureError(MeterError):
    """A capture that could not be completed, with what to do."""


@dataclass(frozen=True)
class RawCapture:
    """A block of raw samples of the enabled channels and the reference edges on its timebase."""

    rate_hz: float
    channels: list[int]                 # physical channel of each row of samples_g
    samples_g: np.ndarray               # (n_channels, n_frames) acceleration in g (DC included)
    edges_samples: np.ndarray           # accepted reference edges, in samples from the first frame
    start_frame: int                    # the block's first frame (frames since START, mod 2**22)
    round_robin: bool = False

    @property
    def n_frames(self) -> int:
        return int(self.samples_g.shape[1])

    @property
    def duration_s(self) -> float:
        return self.n_frames / self.rate_hz

    def channel_offset_samples(self, row: int) -> float:
        return row / len(self.channels) if self.round_robin else 0.0

    def channel(self, ch: int) -> np.ndarray:
        """The samples (g) of physical channel ``ch``."""
        if ch not in self.channels:
            raise ValueError(f"channel {ch} was not enabled for this capture (channels {self.channels})")
        return self.samples_g[self.channels.index(ch)]

    def speed_rpm(self) -> float:
        """Mean speed from the edges inside the block (nan with fewer than two)."""
        e = self.edges_samples
        if len(e) < 2:
            return float("nan")
        return 60.0 * self.rate_hz * (len(e) - 1) / float(e[-1] - e[0])

    def to_dict(self) -> dict:
        return {"rate_hz": self.rate_hz, "channels": self.channels, "n_frames": self.n_frames,
                "edges_samples": [round(float(x), 4) for x in self.edges_samples],
                "speed_rpm": None if not np.isfinite(self.speed_rpm()) else round(self.speed_rpm(), 2)}


class RawAssembler:
    """Collects the parts of one capture id; ``feed`` returns the finished capture or None."""

    def __init__(self) -> None:
        self.begin: RawPart | None = None
        self.codes: dict[int, tuple[int, ...]] = {}
        self.edges: dict[int, tuple[int, ...]] = {}
        self.end: RawPart | None = None

    def feed(self, part: RawPart) -> RawPart | None:
        """Keep ``part``; returns the END part when the capture is over."""
        if part.kind == RAW_BEGIN:
            self.begin, self.codes, self.edges, self.end = part, {}, {}, None
        elif self.begin is None or part.cap_id != self.begin.cap_id:
            return None                       # a part of a capture we did not see begin
        elif part.kind == RAW_SAMPLES:
            self.codes[part.index] = part.codes
        elif part.kind == RAW_EDGES:
            self.edges[part.index] = part.edges_q8
        elif part.kind == RAW_END:
            self.end = part
            return part
        return None

    def result(self, info: DeviceInfo) -> RawCapture:
        b, end = self.begin, self.end
        if b is None or end is None:
            raise CaptureError("the capture did not finish: try again")
        if end.status != 0:
            raise CaptureError(f"capture failed: {END_MEANING.get(end.status, f'status {end.status}')}")
        n_ch = b.n_ch
        codes = np.zeros((b.n_frames, n_ch), dtype=float)
        got = 0
        for index, block in sorted(self.codes.items()):
            rows = len(block) // n_ch
            if index + rows > b.n_frames:
                raise CaptureError("capture parts run past the announced length: try again")
            codes[index:index + rows] = np.asarray(block, dtype=float).reshape(rows, n_ch)
            got += rows
        if got != b.n_frames:
            raise CaptureError(f"{b.n_frames - got} of {b.n_frames} sample frames were lost on the link: "
                               "capture again (check the USB cable)")
        edges: list[int] = []
        for _index, block in sorted(self.edges.items()):
            edges.extend(block)
        if len(edges) != b.n_edges:
            raise CaptureError("reference edges of the capture were lost on the link: capture again")
        channels = channels_of_mask(b.channel_mask)
        cpg = list(info.counts_per_g) or [1.0]
        zero = list(info.zero_code) or [float(info.adc_offset)]
        g = np.empty((n_ch, b.n_frames))
        for r, ch in enumerate(channels):
            c = cpg[ch] if ch < len(cpg) else cpg[-1]
            z = zero[ch] if ch < len(zero) else zero[-1]
            g[r] = (codes[:, r] - z) / (c if c else 1.0)
        return RawCapture(float(info.rate_hz), channels, g, np.asarray(edges, dtype=float) / 256.0,
                          int(b.start_frame), bool(info.round_robin))
