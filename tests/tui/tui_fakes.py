"""A fake meter for screen tests that do not need the whole simulator: a linear rotor model
(1x = influence x unbalance + noise) behind the MeterClient interface the application uses.

Only for tests of the interface itself; the whole-job test uses the real simulator.
"""

from __future__ import annotations

import cmath
import math
import random
import threading
import time
from dataclasses import dataclass, field

from runtrue.protocol.messages import Revolution


@dataclass
class FakeRotor:
    """Unbalance per plane (g.mm, complex) and influence [pickup][plane] (g per g.mm)."""

    initial_gmm: list[complex] = field(default_factory=lambda: [2400 * cmath.exp(1j * math.radians(117))])
    influence: list[list[complex]] = field(default_factory=lambda: [[2e-4 * cmath.exp(1j * math.radians(35))]])
    speed_rpm: float = 1470.0
    noise_g: float = 0.003
    weights: dict[int, tuple[int, float, float, float]] = field(default_factory=dict)
    _next: int = 1

    def __post_init__(self) -> None:
        self._lock = threading.Lock()

    def add_weight(self, plane: int, mass_g: float, angle_deg: float, radius_mm: float) -> int:
        with self._lock:
            wid = self._next
            self._next += 1
            self.weights[wid] = (plane, mass_g, angle_deg, radius_mm)
            return wid

    def remove_weight(self, wid: int) -> None:
        with self._lock:
            del self.weights[wid]

    def unbalance(self) -> list[complex]:
        with self._lock:
            u = list(self.initial_gmm)
            for plane, m, a, r in self.weights.values():
                u[plane] += m * r * cmath.exp(1j * math.radians(a))
            return u

    def true_residual_unbalance_gmm(self) -> list[float]:
        return [abs(x) for x in self.unbalance()]

    def expected_1x(self) -> list[complex]:
        u = self.unbalance()
        return [sum(row[p] * u[p] for p in range(len(u))) for row in self.influence]


class FakeTransport:
    def __init__(self, rotor: FakeRotor) -> None:
        self.machine = rotor
        self.name = "fake"
        self.closed = False

    def reopen(self, timeout_s: float) -> bool:
        return False

    def close(self) -> None:
        self.closed = True


class FakeMeter:
    """Enough of ``runtrue.device.MeterClient`` for the application."""

    def __init__(self, rotor: FakeRotor | None = None, seed: int = 1) -> None:
        self.transport = FakeTransport(rotor or FakeRotor())
        self.rng = random.Random(seed)
        self.rev = 0
        self.streaming = False
        self.lost_frames = 0
        self.fail_after: int | None = None  # raise TransportLost after this many revolutions
        self.line_collisions: tuple[tuple[float, int, float], ...] = ()  # what the host fit could not separate

    def identify(self) -> dict:
        n = len(self.transport.machine.influence)
        return {"fw": "fake-1", "board": "fake", "proto": 1, "channels_max": 3,
                "channel_mask": (1 << n) - 1, "rate_hz": 4000.0, "adc_bits": 12, "edge": "rising", "serial": ""}

    def start(self) -> None:
        self.streaming = True

    def stop(self) -> None:
        self.streaming = False

    def self_test(self) -> dict:
        return {"pass": True, "checks": [{"name": "reference pulses", "pass": True, "value": 25, "unit": "/s", "note": ""}]}

    def read_revolution(self, timeout_s: float) -> Revolution | None:
        from runtrue.transport.base import TransportLost

        if self.fail_after is not None and self.rev >= self.fail_after:
            raise TransportLost("fake cable pulled")
        time.sleep(0.002)  # a fast machine, but not a busy loop
        rotor = self.transport.machine
        n = self.rng.gauss
        h1 = [v + complex(n(0, rotor.noise_g), n(0, rotor.noise_g)) for v in rotor.expected_1x()]
        self.rev += 1
        return Revolution(
            rev=self.rev, period_us=60e6 / rotor.speed_rpm, n_samples=160, flags=0,
            channel_mask=(1 << len(h1)) - 1, h1=h1, h2=[0.01 + 0j] * len(h1), rms_g=[abs(v) * 0.8 + 0.02 for v in h1],
            line_collisions=self.line_collisions,
        )

    def close(self) -> None:
        self.transport.close()


def fake_opener(rotor: FakeRotor | None = None):
    """An ``opener`` for ``make_app`` that always returns a FakeMeter on ``rotor``."""
    rotor = rotor or FakeRotor()

    def opener(port: str, seed: int | None = None, realtime: bool = False) -> FakeMeter:
        return FakeMeter(rotor, seed or 1)

    return opener
