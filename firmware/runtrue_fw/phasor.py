"""Per-revolution 1x and 2x phasors: least-squares fit of [1, cos φ, sin φ, cos 2φ, sin 2φ].

Source: D. C. Rife and R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
observations", IEEE Trans. Information Theory 20(5), 1974, pp. 591-598: for a sinusoid of
known frequency in white Gaussian noise the least-squares fit is the maximum-likelihood
estimate and reaches the Cramér-Rao bound.  The frequency is known here from the two reference
edges: rotation is taken as uniform between them, so sample i of a revolution sits at angle
φ_i = a0 + i·d with d = 2π·256/L (L the period in 1/256 sample) and a0 set by the fractional
position of the first edge.  A revolution rarely holds a whole number of samples, so the
basis is not orthogonal over it; a plain DFT would leak, the full 5x5 normal equations do not.

The Gram (normal) matrix of the basis over an arithmetic progression of angles has a closed
form (sum of a geometric series, e.g. Oppenheim and Schafer, *Discrete-Time Signal
Processing*, 3rd ed., §8.1 (from memory)):
    Σ_{i<n} e^{jm(a0+id)} = e^{jm(a0+(n-1)d/2)} · sin(mnd/2) / sin(md/2),
so only the five data sums Σy·basis need a pass over the samples (`kernels.fit_sums`).

Phase convention (PROTOCOL.md): the k-th order component amp·cos(kφ − lag) is reported as
re + j·im = amp·e^{+j·lag}; that is exactly (coefficient of cos kφ, coefficient of sin kφ).
"""

from math import cos, sin, sqrt


def _geo(m: int, n: int, a0: float, d: float):
    """(Σ cos mφ_i, Σ sin mφ_i) over φ_i = a0 + i·d, i < n."""
    half = 0.5 * m * d
    den = sin(half)
    if abs(den) < 1e-12:
        return (float(n) * cos(m * a0), float(n) * sin(m * a0))
    k = sin(n * half) / den
    mid = m * (a0 + 0.5 * (n - 1) * d)
    return (k * cos(mid), k * sin(mid))


def gram(n: int, a0: float, d: float) -> list:
    """Normal matrix of the basis [1, cos φ, sin φ, cos 2φ, sin 2φ] over n samples."""
    c1, s1 = _geo(1, n, a0, d)
    c2, s2 = _geo(2, n, a0, d)
    c3, s3 = _geo(3, n, a0, d)
    c4, s4 = _geo(4, n, a0, d)
    nf = float(n)
    return [
        [nf, c1, s1, c2, s2],
        [c1, 0.5 * (nf + c2), 0.5 * s2, 0.5 * (c1 + c3), 0.5 * (s3 + s1)],
        [s1, 0.5 * s2, 0.5 * (nf - c2), 0.5 * (s3 - s1), 0.5 * (c1 - c3)],
        [c2, 0.5 * (c1 + c3), 0.5 * (s3 - s1), 0.5 * (nf + c4), 0.5 * s4],
        [s2, 0.5 * (s3 + s1), 0.5 * (c1 - c3), 0.5 * s4, 0.5 * (nf - c4)],
    ]


def solve(a: list, b: list) -> list:
    """Solve a·x = b (Gaussian elimination with partial pivoting); a and b are overwritten.

    Raises ValueError for a singular matrix.
    """
    n = len(b)
    for col in range(n):
        piv = col
        best = abs(a[col][col])
        for r in range(col + 1, n):
            v = abs(a[r][col])
            if v > best:
                best = v
                piv = r
        if best == 0.0:
            raise ValueError("singular normal matrix")
        if piv != col:
            a[col], a[piv] = a[piv], a[col]
            b[col], b[piv] = b[piv], b[col]
        inv = 1.0 / a[col][col]
        for r in range(col + 1, n):
            f = a[r][col] * inv
            if f != 0.0:
                row = a[r]
                prow = a[col]
                for k in range(col, n):
                    row[k] -= f * prow[k]
                b[r] -= f * b[col]
    x = [0.0] * n
    for r in range(n - 1, -1, -1):
        acc = b[r]
        row = a[r]
        for k in range(r + 1, n):
            acc -= row[k] * x[k]
        x[r] = acc / row[r]
    return x


def fit(sums, n: int, a0: float, d: float) -> list:
    """Least-squares coefficients [dc, cos φ, sin φ, cos 2φ, sin 2φ] from `kernels.fit_sums`."""
    return solve(gram(n, a0, d), [sums[0], sums[1], sums[2], sums[3], sums[4]])


def rms(sums, n: int) -> float:
    """RMS about the sample mean, from Σy and Σy² (same units as y)."""
    if n <= 0:
        return 0.0
    m = sums[0] / n
    v = sums[5] / n - m * m
    return sqrt(v) if v > 0.0 else 0.0


def rotate(re: float, im: float, ang: float):
    """(re + j·im)·e^{j·ang}."""
    c = cos(ang)
    s = sin(ang)
    return (re * c - im * s, re * s + im * c)
