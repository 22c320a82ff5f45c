"""RP2040 edge timebase: a microsecond stamp of a reference edge as a position on the sample
timebase, in 1/256 frame since START, exact over any length of run.

Pure small-integer arithmetic (no hardware module): the board layer (board_rp2040.py) feeds it the
instant it started the ADC and the stamps its edge interrupt took.

Source: Raspberry Pi Ltd, *RP2040 Datasheet*, section 4.6 "Timer": the 1 microsecond tick behind
``time.ticks_us`` comes from clk_ref (the crystal), and clk_adc (48 MHz) comes from PLL_USB (the
same crystal), so the two clocks keep an exact ratio: an edge's microsecond stamp converts to a
sample position with no drift.

Timebase.  Sample frame n (one conversion of every enabled channel, ascending) holds channel c's
conversion number ``n*n_ch + c``; conversion j is sampled at ``t_adc + (j + 1) * P`` (assumed, see
``_FIRST_SAMPLE_PERIODS``) where P is the conversion period in clk_adc cycles (so channel c lags
channel 0 by c*P: the board's ``info()`` says ``round_robin`` and the host's fit corrects that
known delay) and ``t_adc = t_read + START_READ_OFFSET_US`` (the start time is read about 14 us
before the ADC really starts).  An edge stamped at ``t_us`` happened ``EDGE_LATENCY_US`` (19 us,
the middle of the 17-21 us measured) earlier, at frame position
``(t_us - EDGE_LATENCY_US - t_adc) * 48 / (P * n_ch) - 1/n_ch``, reported in 1/256 frame modulo
2**30 and computed from an anchor moved at every pass by an exact division (no long ints, no
drift).  Residual (firmware/README.md, timing): +-2 us of IRQ latency jitter around the constant,
+-0.5 us of stamp rounding, and the constants' own error on a given board.
"""

import time

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

# Timing (measured on an emulated RP2040, MicroPython 1.28; firmware/README.md, timing):
# a hard Pin IRQ stamps ticks_us() 17-21 us after the pin changed: the stamp is taken back by 19.
EDGE_LATENCY_US = const(19)
# the ticks_us() read before START_MANY comes about 14 us before the ADC really starts.
START_READ_OFFSET_US = const(14)
POS_MOD = const(1 << 30)  # positions are reported modulo 2**30
# Conversion periods between START_MANY and the sampling instant of conversion 0.  Assumed: the
# divider counts one period before the first paced conversion (the datasheet text we checked
# does not say).  Unverified on hardware; hardware/BRINGUP.md (timing check) measures it.
_FIRST_SAMPLE_PERIODS = const(1)


class Timebase:
    """Frame positions of microsecond instants since the last ``set``.  Allocates nothing after
    construction (small ints only)."""

    def __init__(self) -> None:
        self._ticks_diff = time.ticks_diff
        self._anc_us = 0           # the anchor: a ticks_us instant ...
        self._anc_q8 = 0           # ... its frame position in 1/256 frame ...
        self._anc_rem = 0          # ... plus anc_rem / den of 1/256 frame (exact, no drift)
        self.wrapped = False       # the position has wrapped at 2**30 since START
        self._den = 1
        self._kstep = 1
        self._rem_out = 0

    # Frame position x (frames since START) of an instant t (us):
    #   x = (t - t_adc) * 48 / (P * n_ch) - 1/n_ch,  t_adc = t0_read + START_READ_OFFSET_US,
    # with P = period_q8 / 256 clk_adc cycles (the first conversion samples one period after
    # START_MANY).  In 1/256 frame: q8 = cycles * 65536 / den, den = period_q8 * n_ch.  It is
    # kept as an anchor (instant, q8, remainder) moved at every pass by an exact long division
    # in small steps, so nothing becomes a long int and nothing drifts.
    def set(self, t0_read_us: int, period_q8: int, n: int) -> None:
        """Start: ``t0_read_us`` read just before START_MANY, conversion period ``period_q8``
        (1/256 clk_adc cycle), ``n`` channels in round robin."""
        den = period_q8 * n
        self._den = den
        k = 8
        while k > 1 and (den << k) >= (1 << 30):
            k -= 1
        self._kstep = k
        # -1/n_ch of a frame (_FIRST_SAMPLE_PERIODS = 1) = -256/n_ch q8
        #   = -(a + 1) q8 + (n - b)/n q8 for 256 = a n + b, b > 0; (n - b)/n q8 = (n - b) P_q8 / den
        a = 256 // n
        b = 256 - a * n
        if b:
            self._anc_q8 = -(a + 1)
            self._anc_rem = (n - b) * period_q8
        else:
            self._anc_q8 = -a
            self._anc_rem = 0
        self._anc_us = time.ticks_add(t0_read_us, START_READ_OFFSET_US)  # type: ignore[assignment,type-var]  # stubs: _Ticks
        self.wrapped = False

    def _q8_since_anchor(self, dt_us: int) -> int:
        """floor(q8) of the position dt_us after the anchor, relative to the anchor's q8; leaves
        the remainder (in 1/den q8) in self._rem_out.  |dt_us| < 22 s."""
        den = self._den
        c = dt_us * 48
        q = c // den
        r = c - q * den
        bits = 16
        k = self._kstep
        while bits > 0:
            s = k if k < bits else bits
            r <<= s
            d = r // den
            q = (q << s) + d
            r -= d * den
            bits -= s
        r += self._anc_rem
        if r >= den:
            r -= den
            q += 1
        self._rem_out = r
        return q

    def edge_position_q8(self, t_us: int) -> int:
        """Frame position of an edge stamped at ``t_us`` (interrupt latency taken back), in 1/256
        frame since START; negative before the first sample (before wrapping at 2**30)."""
        dt = self._ticks_diff(t_us, self._anc_us) - EDGE_LATENCY_US
        return self._anc_q8 + self._q8_since_anchor(dt)

    def advance(self, now_us: int) -> None:
        """Move the anchor to ``now_us`` (at every pass of the main loop, < 22 s apart)."""
        q = self._q8_since_anchor(self._ticks_diff(now_us, self._anc_us))
        pos = self._anc_q8 + q
        if pos >= POS_MOD:
            pos -= POS_MOD
            self.wrapped = True
        self._anc_q8 = pos
        self._anc_rem = self._rem_out
        self._anc_us = now_us
