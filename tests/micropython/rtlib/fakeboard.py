"""A scripted board for driving the real Meter in tests, under CPython and MicroPython alike.

It implements the board contract of DEVELOPERS.md and records what the Meter writes.  The
signal is synthetic: each channel is zero_code + counts_per_g * (h1 and h2 sinusoids locked to a
uniformly turning shaft), plus optional deterministic noise; edges fall where the shaft angle
crosses 0.  Nothing here is hardware.
"""

from array import array
from math import cos, floor, pi


class FakeBoard:
    def __init__(self, channels_max=3, adc_bits=12, counts_per_g=None, zero_code=None,
                 round_robin=False, out_capacity=1 << 18):
        self.channels_max = channels_max
        self.adc_bits = adc_bits
        self.counts_per_g = counts_per_g or [400.0] * channels_max
        self.zero_code = zero_code or [2048.0] * channels_max
        self.round_robin = round_robin
        self.out = bytearray(out_capacity)   # preallocated: write() allocates nothing
        self.n_out = 0
        self.mask = (1 << channels_max) - 1
        self.rate_hz = 0.0
        self.falling = False
        self.started = 0
        self.stopped = 0
        self.ms = 1000
        self.dropped = 0
        self.lost_edges = 0
        self.cpu = 123
        self.repl = 0

    # board contract
    def write(self, buf, n=None):
        """The board contract's write(buf, n): copies buf[:n] at once (the Meter reuses buf)."""
        if n is None:
            n = len(buf)
        o = self.n_out
        if o + n > len(self.out):
            return 0                      # full: the Meter counts a tx overflow
        i = 0
        while i < n:
            self.out[o + i] = buf[i]
            i += 1
        self.n_out = o + n
        return n

    def configure(self, channel_mask, rate_hz):
        self.mask = channel_mask
        self.rate_hz = float(rate_hz)
        return self.rate_hz

    def set_edge(self, falling):
        self.falling = falling

    def start(self):
        self.started += 1

    def stop(self):
        self.stopped += 1

    def ticks_ms(self):
        return self.ms

    def info(self):
        return {"board": "fake", "adc_bits": self.adc_bits, "channels_max": self.channels_max,
                "counts_per_g": self.counts_per_g, "zero_code": self.zero_code,
                "serial": "e66038b713526d2a", "round_robin": self.round_robin,
                "fe": [1.834e-4, 1.504e-10]}

    def cpu_load_permille(self):
        return self.cpu

    def dropped_samples(self):
        return self.dropped

    def edges_lost(self):
        return self.lost_edges

    def enter_repl(self):
        self.repl += 1

    def take_output(self):
        data = bytes(self.out[:self.n_out])
        self.n_out = 0
        return data


class Shaft:
    """Synthetic signals: a shaft turning at `rpm` (optionally changing per revolution).

    `channels`: list of (h1_amp_g, h1_lag_deg, h2_amp_g, h2_lag_deg, dc_g) per enabled
    channel.  Angle phi(t) = 2*pi*(t - t0_s)*rpm/60 with t in seconds of the sample clock;
    sample i of enabled slot k is at t = (i + k/n*round_robin)/rate.  The edge is at phi = 0 (mod 2*pi).
    """

    def __init__(self, rate_hz, rpm, channels, t0_samples=0.37, round_robin=False,
                 noise_codes=0.0, seed=1):
        self.rate_hz = float(rate_hz)
        self.rpm = float(rpm)
        self.channels = channels
        self.t0 = float(t0_samples)           # first edge, in samples
        self.round_robin = round_robin
        self.noise = noise_codes
        self.state = seed * 2654435761 % 4294967296 or 1

    def samples_per_rev(self):
        return self.rate_hz * 60.0 / self.rpm

    def _rand(self):
        # xorshift32, the same sequence under CPython and MicroPython
        x = self.state
        x ^= (x << 13) & 0xFFFFFFFF
        x ^= x >> 17
        x ^= (x << 5) & 0xFFFFFFFF
        self.state = x
        return x / 4294967296.0 - 0.5

    def block(self, first, n, counts_per_g, zero_code, full_code=4095, slots=None):
        """Frames first..first+n-1, interleaved, as array('H') (rounded, clipped codes)."""
        nch = len(self.channels)
        out = array("H", bytes(2 * n * nch))
        spr = self.samples_per_rev()
        k = 0
        for i in range(first, first + n):
            for c in range(nch):
                ch = slots[c] if slots else c
                pos = i + (c / nch if self.round_robin else 0.0)
                phi = 2.0 * pi * (pos - self.t0) / spr
                a1, l1, a2, l2, dc = self.channels[c]
                g = dc + a1 * cos(phi - l1 * pi / 180.0) + a2 * cos(2.0 * phi - l2 * pi / 180.0)
                code = zero_code[ch] + g * counts_per_g[ch]
                if self.noise:
                    code += self.noise * self._rand() * 3.4641016   # uniform, std = noise
                v = int(floor(code + 0.5))
                out[k] = 0 if v < 0 else (full_code if v > full_code else v)
                k += 1
        return out

    def edges_q8(self, n_frames):
        """Edge positions (q8, mod 2**30) of the edges inside frames [0, n_frames)."""
        spr = self.samples_per_rev()
        res = []
        j = 0
        while True:
            pos = self.t0 + j * spr
            if pos >= n_frames:
                break
            res.append(int(floor(pos * 256.0 + 0.5)) & 0x3FFFFFFF)
            j += 1
        return res
