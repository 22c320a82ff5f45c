"""The product envelope: the one place its numbers live (firmware/README.md, "Envelope", shows
them as a table; INFO reports them; hardware/frontend.py, the simulator's scenarios and the host
read them from here).

The limits and where each comes from:

* ``MAX_REV_SAMPLES``: the longest revolution the meter sums (its samples must stay in the
  8,192-frame ring while the revolution is held, and its sums in int40): 4,096 samples, so the
  slowest speed is 60 * rate / 4096 rpm (58.6 rpm at 4 kS/s).
* ``MIN_REV_SAMPLES``: the host fits 1x and 2x with at least 3 samples per parameter
  (runtrue.device.revfit), 15 samples: 60 * rate / 15 rpm (16,000 rpm at 4 kS/s).
* ``MAX_REVS_PER_S``: every revolution costs the chip edge logic, the sums' fold and output,
  packing, COBS, CRC and a USB write (tests/bench/bench_meter_unix.py, an estimate for the
  RP2040 scaled from the unix port, firmware/README.md).  200 revolutions a second (12,000 rpm)
  keeps the per-revolution part of the CPU load within its share of the budget.
* ``FRONT_END_MAX_RPM``: the analog front end is specified (hardware/FRONTEND.md) to
  12,000 rpm, amplitude within 3 % and lag figures given per speed there.

So the envelope at the default 4 kS/s is 60-12,000 rpm for 1 to 3 channels.
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
MAX_REVS_PER_S = const(200)
FRONT_END_MAX_RPM = const(12000)
FRONT_END_MIN_RPM = const(60)


def max_rpm(rate_hz: float) -> float:
    """Highest speed the meter measures at this per-channel rate (any channel count)."""
    by_samples = 60.0 * rate_hz / MIN_REV_SAMPLES
    top = 60.0 * MAX_REVS_PER_S
    if FRONT_END_MAX_RPM < top:
        top = FRONT_END_MAX_RPM
    return by_samples if by_samples < top else top


def min_rpm(rate_hz: float) -> float:
    """Lowest speed the meter measures at this per-channel rate."""
    by_samples = 60.0 * rate_hz / MAX_REV_SAMPLES
    return by_samples if by_samples > FRONT_END_MIN_RPM else float(FRONT_END_MIN_RPM)
