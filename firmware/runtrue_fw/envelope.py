"""The product envelope: the one place its numbers live (firmware/README.md, "Envelope", shows
them as a table; INFO reports them; hardware/frontend.py, the simulator's scenarios and the host
read them from here).

The limits and where each comes from:

* ``MAX_REV_SAMPLES``: the longest revolution the meter sums (its samples must stay in the
  8,192-frame ring while the revolution is held, and its sums in int40): 4,096 samples, so the
  slowest speed is 60 * rate / 4096 rpm (58.6 rpm at 4 kS/s).
* ``MIN_REV_SAMPLES``: the host fits 1x and 2x with at least 3 samples per parameter
  (runtrue.device.revfit), 15 samples: 60 * rate / 15 rpm (16,000 rpm at 4 kS/s).
* ``MAX_RPM``: every revolution costs the chip edge logic, the kernel's set-up, fold and
  output, packing, CRC, COBS and a USB write.  tests/bench/bench_meter_unix.py measures the
  Meter under MicroPython's unix port and scales it to the RP2040 by the ratio of the old float
  path's cost there (158 us per sample and channel, emulated RP2040) to its cost here: an
  ESTIMATE of about 0.8-2.3 ms per revolution and 5-35 us per frame (firmware/README.md,
  "CPU budget"; the spread is between runs on a shared machine).  At 3 channels x 4 kS/s and
  10,000 rpm (167 rev/s) that is about 25-45 % CPU,
  leaving margin under the 60 % that `runtrue device check` accepts for the USB writes and the
  main loop, which the benchmark does not include.  So 10,000 rpm, for 1 to 3 channels.

The hardware front end is specified over the same range (hardware/frontend.py reads it here).
So the envelope at the default 4 kS/s is 60-10,000 rpm for 1 to 3 channels (24 samples a
revolution at the top: 1x, 2x and 3x are fitted).
"""

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

RATE_MIN_HZ = const(500)
RATE_MAX_HZ = const(10000)
DEFAULT_RATE_HZ = const(4000)
MAX_REV_SAMPLES = const(4096)
MIN_REV_SAMPLES = const(15)
MAX_RPM = const(10000)
MIN_RPM = const(60)


def max_rpm(rate_hz: float) -> float:
    """Highest speed the meter measures at this per-channel rate (any channel count)."""
    by_samples = 60.0 * rate_hz / MIN_REV_SAMPLES
    return by_samples if by_samples < MAX_RPM else float(MAX_RPM)


def min_rpm(rate_hz: float) -> float:
    """Lowest speed the meter measures at this per-channel rate."""
    by_samples = 60.0 * rate_hz / MAX_REV_SAMPLES
    return by_samples if by_samples > MIN_RPM else float(MIN_RPM)
