"""Percentiles, summary statistics and the yield confidence interval.

Percentiles follow the linear interpolation between order statistics of
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The
American Statistician 50(4) (1996) 361-365, definition 7 (numpy's default):
``h = (n - 1) p``, ``Q = x[floor h] + (h - floor h) (x[floor h + 1] - x[floor h])``.
The named levels are the minimum, the +-3-sigma points of a normal
distribution (0.135 % and 99.865 %), the 95 % band (2.5 %, 97.5 %), the
median and the maximum.

The yield interval is the score interval of E. B. Wilson, "Probable
inference, the law of succession, and statistical inference", J. Amer.
Statist. Assoc. 22 (1927) 209-212:
``(p + z^2/2n +- z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n)``.
"""

from __future__ import annotations

import math

import numpy as np

#: Percentile levels (percent) and their public names, in order.
PERCENTILES = (("min", 0.0), ("p0.135", 0.135), ("p2.5", 2.5), ("p50", 50.0), ("p97.5", 97.5),
               ("p99.865", 99.865), ("max", 100.0))
PERCENTILE_NAMES = tuple(n for n, _ in PERCENTILES)
#: Two-sided 95 % normal quantile.
Z95 = 1.959963984540054


def sorted_percentiles(sorted_rows: np.ndarray) -> np.ndarray:
    """Named percentiles of rows that are already sorted along the last axis.

    Parameters
    ----------
    sorted_rows : ndarray, shape (..., n)
        Ascending along the last axis, no NaN.

    Returns
    -------
    ndarray, shape (7, ...), float64
        One row per level of :data:`PERCENTILES` (Hyndman and Fan, def. 7).
    """
    n = sorted_rows.shape[-1]
    out = []
    for _, p in PERCENTILES:
        h = (n - 1) * p / 100.0
        lo = int(math.floor(h))
        hi = min(lo + 1, n - 1)
        w = h - lo
        a = sorted_rows[..., lo].astype(np.float64)
        if w > 0 and hi != lo:
            a = a + w * (sorted_rows[..., hi].astype(np.float64) - a)
        out.append(a)
    return np.stack(out)


def summary(values: np.ndarray) -> dict:
    """``{count, mean, std, min, p0.135, ..., max}`` of the finite values of a 1-D array.

    ``std`` is the sample standard deviation (n - 1 in the denominator);
    ``count`` the number of finite values (a metric a trial does not have,
    e.g. no 3 dB point in the analysed band, is NaN there and left out).
    Everything is None when no value is finite.
    """
    v = np.asarray(values, dtype=np.float64)
    v = np.sort(v[np.isfinite(v)])
    d: dict = {"count": int(v.size)}
    if v.size == 0:
        d.update(mean=None, std=None, **{k: None for k in PERCENTILE_NAMES})
        return d
    d["mean"] = float(np.mean(v))
    d["std"] = float(np.std(v, ddof=1)) if v.size > 1 else 0.0
    for name, val in zip(PERCENTILE_NAMES, sorted_percentiles(v)):
        d[name] = float(val)
    return d


def wilson_interval(successes: int, n: int, z: float = Z95) -> tuple[float, float]:
    """Wilson score interval of a binomial proportion (see the module notes).

    Returns
    -------
    (low, high) : tuple of float
        Within [0, 1]; (0, 1) for n = 0.
    """
    if n <= 0:
        return 0.0, 1.0
    p = successes / n
    z2 = z * z
    centre = p + z2 / (2 * n)
    half = z * math.sqrt(max(p * (1 - p) / n + z2 / (4 * n * n), 0.0))
    den = 1 + z2 / n
    lo = (centre - half) / den
    hi = (centre + half) / den
    if successes == n:
        hi = 1.0
    if successes == 0:
        lo = 0.0
    return max(0.0, lo), min(1.0, hi)


__all__ = ["PERCENTILES", "PERCENTILE_NAMES", "sorted_percentiles", "summary", "wilson_interval", "Z95"]
