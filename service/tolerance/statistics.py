"""Percentiles, summary statistics and the yield confidence interval.

Percentiles follow the linear interpolation between order statistics of
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The
American Statistician 50(4) (1996) 361-365, definition 7 (numpy's default):
``h = (n - 1) p``, ``Q = x[floor h] + (h - floor h) (x[floor h + 1] - x[floor h])``.
The named levels are the minimum, the +-3-sigma points of a normal
distribution (0.135 % and 99.865 %), the 95 % band (2.5 %, 97.5 %), the
median and the maximum.

Only the order statistics those levels read are needed (twelve of them for
10,000 trials), not a sorted copy of every column: :func:`column_order_statistics`
selects them by a bucket (distribution-counting) selection (D. E. Knuth, *The
Art of Computer Programming*, vol. 3, 2nd ed., 1998, sec. 5.2 "distribution
counting" and 5.3.3 on selection), linear in the number of trials, one column
at a time (:mod:`service.tolerance.selection`): the least and greatest
values, each value to one of 1024 buckets by a monotone map, the buckets
counted, the bucket of each wanted rank read from the cumulative counts, and
only those buckets' values taken out and sorted.  The values returned are the
columns' order statistics exactly -- the same bits as ``np.sort`` -- whatever
the distribution (a lopsided column only puts more values in a bucket); a
column with a NaN or an infinite span is sorted.  A frequency-major store
(seen as ``store.T``) is read in place; a trial-major one is copied a slab of
SLAB_VALUES values at a time, column-major, TRANSPOSE_ROWS trials per step
(the strided reads stay in cache; the working memory is one slab).

Why compiled: each step is one pass over a column that stays in cache, with a
scalar increment per value for the counting.  The same selection written as
numpy passes over blocks of columns (codes, ``np.bincount``, a mask of the
wanted buckets, a padded sort) walked every block several times through
memory.  Measured on the three (501, 10000) float32 stores of a 10,000-trial
reference run, one thread, alternating in one run of 31 repeats
(tests/bench/bench_percentiles.py --stores): 38 ms (IQR 35-60) for all three
compiled against 103 ms (IQR 85-154) for the numpy form, 2.5x per repeat
(IQR 2.0-3.4); from trial-major copies, 59 against 128 ms (2.2x).  The
whole Monte Carlo run (tests/bench/bench_tolerance.py --compare): 1.2x.

The yield interval is the score interval of E. B. Wilson, "Probable
inference, the law of succession, and statistical inference", J. Amer.
Statist. Assoc. 22 (1927) 209-212:
``(p + z^2/2n +- z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n)``.
"""

from __future__ import annotations

import math

import numpy as np

from service.tolerance.selection import select_into

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
    return _interpolated(sorted_rows.shape[-1], lambda r: sorted_rows[..., r].astype(np.float64))


def percentile_ranks(n: int) -> np.ndarray:
    """Sorted, distinct 0-based ranks that :func:`sorted_percentiles` reads in rows of ``n`` values."""
    ranks = set()
    for _, p in PERCENTILES:
        h = (n - 1) * p / 100.0
        lo = int(math.floor(h))
        ranks.add(lo)
        if h - lo > 0:
            ranks.add(min(lo + 1, n - 1))
    return np.array(sorted(ranks), dtype=np.intp)


#: Values in one slab of a trial-major store, copied column-major and selected together: bounds the working
#: memory to the slab, whatever the store's size.
SLAB_VALUES = 1_310_720
#: Trials copied per step of the transposition into a slab (the strided rows read stay in cache).
TRANSPOSE_ROWS = 512


def _transposed(x: np.ndarray, c0: int, c1: int, buffer: np.ndarray) -> np.ndarray:
    """Columns ``c0..c1`` of ``x`` (n, F) as the rows of a C-contiguous (c1 - c0, n) array in ``buffer``,
    copied TRANSPOSE_ROWS trials at a time."""
    n = x.shape[0]
    out = buffer[:(c1 - c0) * n].reshape(c1 - c0, n)
    for a in range(0, n, TRANSPOSE_ROWS):
        out[:, a:a + TRANSPOSE_ROWS] = x[a:a + TRANSPOSE_ROWS, c0:c1].T
    return out


def column_order_statistics(x: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    """The ``ranks``-th smallest values of every column, without sorting the columns (see the module notes).

    Parameters
    ----------
    x : ndarray, shape (n, F), float32 or float64 (other types are converted to float64)
        One column per frequency, one row per trial; any memory layout (a column-major one, e.g. the
        transpose of a frequency-major store, is read in place; others are copied a slab at a time).
    ranks : array of int, shape (K,)
        0-based ranks, each in ``[0, n)``, in any order.

    Returns
    -------
    ndarray, shape (K, F), dtype of ``x``
        ``np.sort(x, axis=0)[ranks]`` bit for bit, up to the order of equal values (``-0.0`` and ``0.0``);
        NaN sorts last and infinities in place, as in ``np.sort``.
    """
    x = np.asarray(x)
    if x.ndim != 2:
        raise ValueError("x must be two-dimensional (trials, columns)")
    if x.dtype not in (np.float32, np.float64) or not x.dtype.isnative:
        x = x.astype(np.float64)
    ranks = np.asarray(ranks, dtype=np.int64).ravel()
    n, f = x.shape
    if ranks.size and (ranks.min() < 0 or ranks.max() >= n):
        raise ValueError(f"ranks must lie in [0, {n})")
    if ranks.size == 0 or f == 0:
        return np.empty((ranks.size, f), dtype=x.dtype)
    distinct, back = np.unique(ranks, return_inverse=True)
    picked = np.empty((f, distinct.size), dtype=x.dtype)
    if x.T.flags.c_contiguous and x.flags.writeable:       # a frequency-major store seen through .T: no copy
        select_into(x.T, distinct, picked)
    else:
        slab = max(1, SLAB_VALUES // n)
        buffer = np.empty(min(slab, f) * n, dtype=x.dtype)
        for c0 in range(0, f, slab):
            c1 = min(f, c0 + slab)
            select_into(_transposed(x, c0, c1, buffer), distinct, picked[c0:c1])
    return picked.T[back]


def _interpolated(n: int, read) -> np.ndarray:
    """The levels of :data:`PERCENTILES` (Hyndman and Fan def. 7) from ``read(rank)``, the order statistic
    ``rank`` of columns of ``n`` values (float64 arrays of one shape); shape (7, ...)."""
    out = []
    for _, p in PERCENTILES:
        h = (n - 1) * p / 100.0
        lo = int(math.floor(h))
        hi = min(lo + 1, n - 1)
        w = h - lo
        a = read(lo)
        if w > 0 and hi != lo:
            a = a + w * (read(hi) - a)
        out.append(a)
    return np.stack(out)


def column_percentiles(x: np.ndarray) -> np.ndarray:
    """Named percentiles of every column, ``sorted_percentiles(np.sort(x, axis=0).T)`` bit for bit.

    Parameters
    ----------
    x : ndarray, shape (n, F), n >= 1
        One row per trial (e.g. a Monte Carlo store filled ``store[t0:t1, :] = chunk``).

    Returns
    -------
    ndarray, shape (7, F), float64
        One row per level of :data:`PERCENTILES`.
    """
    n = np.shape(x)[0]
    ranks = percentile_ranks(n)
    picked = column_order_statistics(x, ranks)
    where = {int(r): i for i, r in enumerate(ranks)}
    return _interpolated(n, lambda r: picked[where[r]].astype(np.float64))


def row_percentiles(rows: np.ndarray) -> np.ndarray:
    """Named percentiles of every row of a frequency-major (F, n) array: ``column_percentiles(rows.T)``
    (a C-contiguous ``rows`` is read in place); (7, F) float64."""
    return column_percentiles(np.asarray(rows).T)


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


__all__ = ["PERCENTILES", "PERCENTILE_NAMES", "sorted_percentiles", "column_order_statistics", "column_percentiles",
           "row_percentiles", "percentile_ranks", "summary", "wilson_interval", "Z95"]
