"""Integer basis of the meter's per-revolution sums: angle accumulators and a Q14 cosine table.

This module is the specification shared by the firmware kernels (``kernels``, ``kernels_viper``)
and the host's fit (which rebuilds the very same basis values to form the normal equations).
Everything here is integer arithmetic, so the board (32-bit viper words), MicroPython's unix and
WebAssembly ports and CPython give bit-identical results; the tests hold every implementation to
``reference_sums`` below.

Angles are fractions of a turn in units of 2**-30 turn (``TURN_MASK`` + 1 is one turn).  For a
revolution between reference edges e0 and e1 (positions in 1/256 sample), with L = e1 - e0 and
f the offset in 1/256 sample from e0 to the revolution's first whole sample:

* rotor angle step per sample ``inc1 = rev_increment(L)`` (floor of 2**38 / L, computed from
  2**30 - 1 so that every intermediate is a MicroPython small int), first sample's angle
  ``a1 = first_angle(inc1, f)``; harmonic k (1..N_HARMONICS) of sample i is at
  ``(k*a1 + i*((k*inc1) & TURN_MASK)) & TURN_MASK``;
* line-frequency tone m (1..N_LINE) of sample i is at ``(i*((m*line_inc) & TURN_MASK)) & TURN_MASK``
  (zero at the revolution's first sample; its phase is a free parameter of the fit);
* ``cos_q14`` reads a 1,025-entry table of round(16384*cos(2*pi*j/1024)) with linear
  interpolation on the next 14 bits of the angle (interpolation error below 5e-6; table
  rounding below 3.1e-5 of full scale); ``sin_q14(a) = cos_q14(a - quarter turn)``.

Sample values are the ADC code minus ``1 << (adc_bits - 1)``, so every product fits 2**25 for a
12-bit ADC and a block of 32 products fits 2**30 (viper words are 32-bit on the RP2040).

Sums per channel, in this order (``N_SUMS``): Sy, then Sy*cos(k.phi), Sy*sin(k.phi) for
k = 1..N_HARMONICS, then Sy*cos(m.psi), Sy*sin(m.psi) for m = 1..N_LINE, then Sy*y.
Basis values carry the Q14 scale (16384 = 1.0).

Table values: Q14 rounding of the cosine (any table of cosines, e.g. Abramowitz and Stegun,
*Handbook of Mathematical Functions*, 1964, table 4.8, agrees; the test recomputes it with
CPython's math.cos).
"""

from array import array

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

TURN_MASK = const(0x3FFFFFFF)      # angles are modulo 2**30 (one turn)
QUARTER_TURN = const(0x10000000)
Q14_ONE = const(16384)
TABLE_SIZE = const(1024)           # table steps per turn (1,025 entries with the closing one)
_IDX_SHIFT = const(20)             # 30-bit angle -> 10-bit table index
_FRAC_SHIFT = const(6)             # next 14 bits interpolate
_FRAC_MASK = const(0x3FFF)
N_HARMONICS = const(4)             # orders 1x..4x
N_LINE = const(2)                  # line frequency and twice it
N_SUMS = const(14)                 # 1 + 2*N_HARMONICS + 2*N_LINE + 1
BASIS_ID = "q14c1024h4l2"          # names this basis in INFO; change it with any change here

# round(16384*cos(2*pi*j/1024)) for j = 0..256 (a quarter turn).
_QUARTER_COS_Q14 = (
    16384, 16384, 16383, 16381, 16379, 16376, 16373, 16369, 16364, 16359, 16353, 16347, 16340, 16332, 16324, 16315,
    16305, 16295, 16284, 16273, 16261, 16248, 16235, 16221, 16207, 16192, 16176, 16160, 16143, 16125, 16107, 16088,
    16069, 16049, 16029, 16008, 15986, 15964, 15941, 15917, 15893, 15868, 15843, 15817, 15791, 15763, 15736, 15707,
    15679, 15649, 15619, 15588, 15557, 15525, 15493, 15460, 15426, 15392, 15357, 15322, 15286, 15250, 15213, 15175,
    15137, 15098, 15059, 15019, 14978, 14937, 14896, 14854, 14811, 14768, 14724, 14680, 14635, 14589, 14543, 14497,
    14449, 14402, 14354, 14305, 14256, 14206, 14155, 14104, 14053, 14001, 13949, 13896, 13842, 13788, 13733, 13678,
    13623, 13567, 13510, 13453, 13395, 13337, 13279, 13219, 13160, 13100, 13039, 12978, 12916, 12854, 12792, 12729,
    12665, 12601, 12537, 12472, 12406, 12340, 12274, 12207, 12140, 12072, 12004, 11935, 11866, 11797, 11727, 11656,
    11585, 11514, 11442, 11370, 11297, 11224, 11151, 11077, 11003, 10928, 10853, 10778, 10702, 10625, 10549, 10471,
    10394, 10316, 10238, 10159, 10080, 10001, 9921, 9841, 9760, 9679, 9598, 9516, 9434, 9352, 9269, 9186,
    9102, 9019, 8935, 8850, 8765, 8680, 8595, 8509, 8423, 8337, 8250, 8163, 8076, 7988, 7900, 7812,
    7723, 7635, 7545, 7456, 7366, 7276, 7186, 7096, 7005, 6914, 6823, 6731, 6639, 6547, 6455, 6363,
    6270, 6177, 6084, 5990, 5897, 5803, 5708, 5614, 5520, 5425, 5330, 5235, 5139, 5044, 4948, 4852,
    4756, 4660, 4563, 4467, 4370, 4273, 4176, 4078, 3981, 3883, 3786, 3688, 3590, 3492, 3393, 3295,
    3196, 3098, 2999, 2900, 2801, 2702, 2603, 2503, 2404, 2305, 2205, 2105, 2006, 1906, 1806, 1706,
    1606, 1506, 1406, 1306, 1205, 1105, 1005, 904, 804, 704, 603, 503, 402, 302, 201, 101,
    0,
)


def make_cos_table():
    """The full-turn table (1,025 entries, array('h')), built from the quarter by symmetry."""
    q = _QUARTER_COS_Q14
    t = array("h", bytearray(2 * (TABLE_SIZE + 1)))
    for j in range(TABLE_SIZE + 1):
        if j <= 256:
            t[j] = q[j]
        elif j <= 512:
            t[j] = -q[512 - j]
        elif j <= 768:
            t[j] = -q[j - 512]
        else:
            t[j] = q[1024 - j]
    return t


def rev_increment(length_q8: int) -> int:
    """Rotor angle step per sample for a revolution of `length_q8` (1/256 sample): floor(2**38/L)
    computed from 2**30 - 1; every intermediate stays below 2**30."""
    q = TURN_MASK // length_q8
    r = TURN_MASK % length_q8
    return (q << 8) + ((r << 8) // length_q8)


def first_angle(inc1: int, first_off_q8: int) -> int:
    """Angle of the revolution's first whole sample, `first_off_q8` (0..255) after the edge."""
    return (inc1 >> 8) * first_off_q8 + (((inc1 & 255) * first_off_q8) >> 8)


def line_increment(line_hz: float, rate_hz: float) -> int:
    """Line-tone angle step per sample (0 turns the line terms off).  Float work, done only
    when the rate or the line frequency is set."""
    if line_hz <= 0.0:
        return 0
    return int(line_hz / rate_hz * 1073741824.0 + 0.5) & TURN_MASK


def cos_q14(table, a: int) -> int:
    """Q14 cosine of angle `a` (units of 2**-30 turn, 0 <= a < 2**30), linearly interpolated."""
    i = a >> _IDX_SHIFT
    v = table[i]
    return v + (((table[i + 1] - v) * ((a >> _FRAC_SHIFT) & _FRAC_MASK)) >> 14)


def sin_q14(table, a: int) -> int:
    return cos_q14(table, (a - QUARTER_TURN) & TURN_MASK)


def reference_sums(table, samples, offset: int, first_off_q8: int, length_q8: int, line_inc: int) -> list:
    """The N_SUMS exact integer sums of one channel's revolution (the specification).

    `samples` are the ADC codes of the revolution's whole samples (first one `first_off_q8`
    after the edge), `offset` the code subtracted (1 << (adc_bits - 1)).  Plain Python, one
    sample at a time: the reference every kernel must reproduce bit for bit.
    """
    inc1 = rev_increment(length_q8)
    a1 = first_angle(inc1, first_off_q8)
    out = [0] * N_SUMS
    for i in range(len(samples)):
        y = samples[i] - offset
        out[0] += y
        for k in range(1, N_HARMONICS + 1):
            a = (k * a1 + i * ((k * inc1) & TURN_MASK)) & TURN_MASK
            out[2 * k - 1] += y * cos_q14(table, a)
            out[2 * k] += y * sin_q14(table, a)
        for m in range(1, N_LINE + 1):
            a = (i * ((m * line_inc) & TURN_MASK)) & TURN_MASK
            out[2 * N_HARMONICS + 2 * m - 1] += y * cos_q14(table, a)
            out[2 * N_HARMONICS + 2 * m] += y * sin_q14(table, a)
        out[N_SUMS - 1] += y * y
    return out
