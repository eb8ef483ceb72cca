"""Percentiles, summary statistics and the yield confidence interval.

Percentiles follow the linear interpolation between order statistics of
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The
American Statistician 50(4) (1996) 361-365, definition 7 (numpy's default):
``h = (n - 1) p``, ``Q = x[floor h] + (h - floor h) (x[floor h + 1] - x[floor h])``.
The named levels are the minimum, the +-3-sigma points of a normal
distribution (0.135 % and 99.865 %), the 95 % band (2.5 %, 97.5 %), the
median and the maximum.

Only the order statistics those levels read are needed (twelve of them),
not a sorted copy of every column: :func:`column_order_statistics` selects
them from a trial-major store (n trials, F columns) by a bucket
(distribution-counting) selection (D. E. Knuth, *The Art of Computer
Programming*, vol. 3, 2nd ed., 1998, sec. 5.2 "distribution counting" and
5.3.3 on selection), linear in the number of trials.  The store is taken a
slab of columns at a time (SLAB_VALUES values), copied column-major
TRANSPOSE_ROWS trials at a time (the strided reads stay in cache; the working
memory is one slab, never a copy of the store; a column-major store is read
in place), and a block of the slab's rows (BLOCK_VALUES values) at a time is
selected: each column's values are mapped to BUCKETS buckets by the monotone
map ``floor((x - min) * s)``
(rounding preserves order: a larger value never falls in a lower bucket), the
buckets are counted, the bucket holding each wanted rank is read from the
cumulative counts, and only the values of those few buckets are taken out and
sorted, as one short row per column (the least and greatest values are the
minimum and maximum already read).  The values returned are the columns'
order statistics exactly -- the same bits as ``np.sort`` -- whatever the
distribution (a lopsided column only puts more values in a bucket); a column
with a NaN or an infinite span is sorted.

Measured on (10000, 501) float32 stores, one thread (see
tests/bench/bench_percentiles.py): about 24 ms from a trial-major store, of
which the slab copies take about 5 ms (a frequency-major array, read in
place: about 19 ms); the counting (``np.bincount``, one scalar increment per
value) and the marking of the wanted buckets are most of the rest.  A sampling
bracket (R. W. Floyd and R. L. Rivest, "Expected time bounds for selection",
Comm. ACM 18(3) (1975) 165-172: the first trials as a pilot sample, then per
column and rank a value bracket counted in one pass and the values inside it
taken out in a second) was built and measured exact but slower, 31 ms: with
five brackets it needs about fourteen comparisons of the whole store, and
numpy spends about as long on each as the counting spends per value.

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


#: Buckets per column of the selection.
BUCKETS = 512
#: Values in one column-major slab of the store (its columns selected together): bounds the working
#: memory to the slab and the bucket codes of one block of its rows, whatever the store's size.
SLAB_VALUES = 1_310_720
#: Values per block of slab rows coded and counted at once (their counts and codes stay in cache).
BLOCK_VALUES = 320_000
#: Trials copied per step of the transposition into a slab (the strided rows read stay in cache).
TRANSPOSE_ROWS = 512
#: Most values taken out of one column to be sorted with the others as a row of one padded array (a short
#: sort); a column whose marked buckets hold more (a lopsided column) is sorted alone.
SHORT_ROW = 512


def _transposed(x: np.ndarray, c0: int, c1: int, buffer: np.ndarray) -> np.ndarray:
    """Columns ``c0..c1`` of ``x`` (n, F) as the rows of a C-contiguous (c1 - c0, n) array in ``buffer``,
    copied TRANSPOSE_ROWS trials at a time."""
    n = x.shape[0]
    out = buffer[:(c1 - c0) * n].reshape(c1 - c0, n)
    for a in range(0, n, TRANSPOSE_ROWS):
        out[:, a:a + TRANSPOSE_ROWS] = x[a:a + TRANSPOSE_ROWS, c0:c1].T
    return out


class _Work:
    """Buffers of one block of rows, reused block after block (fresh arrays of this size would be mapped
    and faulted in page by page each time)."""

    def __init__(self, size: int, dtype: np.dtype):
        self.y = np.empty(size, dtype=dtype)
        self.code32 = np.empty(size, dtype=np.int32)
        self.code = np.empty(size, dtype=np.intp)
        self.hit = np.empty(size, dtype=bool)


def _select_block(x: np.ndarray, lo: np.ndarray, hi: np.ndarray, ranks: np.ndarray, work: _Work) -> np.ndarray:
    """Order statistics ``ranks`` (K,, sorted) of every row of ``x`` (R, n); shape (R, K), dtype of ``x``.

    ``lo`` (R,) and ``hi`` (R,) are each row's minimum and maximum, their difference finite; ``work`` has
    room for ``x``.
    """
    r, n = x.shape
    rows = np.arange(r)[:, None]
    width = hi - lo
    scale = np.zeros(r, dtype=x.dtype)
    with np.errstate(over="ignore"):
        np.divide(x.dtype.type(BUCKETS - 0.5), width, out=scale, where=width > 0)
    scale[~np.isfinite(scale)] = 0.0                        # a subnormal span: one bucket (still exact)
    y = np.subtract(x, lo[:, None], out=work.y[:x.size].reshape(r, n))   # in [0, width]: rounding keeps order
    y *= scale[:, None]                                     # in [0, BUCKETS - 0.5] to rounding: below BUCKETS
    y += (np.arange(r, dtype=x.dtype) * BUCKETS)[:, None]  # row offsets: integers below 2**15, exact
    code32 = work.code32[:x.size]
    np.copyto(code32, y.ravel(), casting="unsafe")          # floor: y >= 0 (float to int32 is the fast cast)
    code = work.code[:x.size]
    np.copyto(code, code32)                                 # (row, bucket) of every value, monotone in x per row
    hist = np.bincount(code, minlength=r * BUCKETS).reshape(r, BUCKETS)
    cum = np.cumsum(hist, axis=1)
    # the bucket holding each rank: the first whose cumulative count exceeds it (one search over all rows,
    # each row's counts shifted above the previous row's)
    shift = rows * (n + 1)
    bucket = (np.searchsorted((cum + shift).ravel(), (ranks[None, :] + shift).ravel(), side="right")
              .reshape(r, -1) - rows * BUCKETS)                                  # (R, K), ascending per row
    below = np.where(bucket > 0, cum[rows, np.maximum(bucket - 1, 0)], 0)       # values in lower buckets
    # the buckets of the ranks to take out, each once: not for rank 0 or n - 1 (the least and greatest
    # values are known), whose buckets may be crowded in a lopsided column
    inner = np.flatnonzero((ranks > 0) & (ranks < n - 1))  # a run of the sorted ranks
    first = np.zeros(bucket.shape, dtype=bool)
    if inner.size:
        first[:, inner] = True
        first[:, inner[1:]] = bucket[:, inner[1:]] != bucket[:, inner[:-1]]
    mark = np.zeros(r * BUCKETS, dtype=bool)
    mark[(bucket + rows * BUCKETS)[first]] = True
    pick = np.flatnonzero(np.take(mark, code, out=work.hit[:x.size]))   # the marked buckets' values, by row
    row = pick // n
    values = x.ravel()[pick]
    taken = np.bincount(row, minlength=r)
    start = np.cumsum(taken) - taken                        # each row's run in pick
    # a rank's place among its row's marked values: the marked buckets below its own come first
    held = np.where(first, hist[rows, bucket], 0)
    before = ((bucket[:, None, :] > bucket[:, :, None]) * held[:, :, None]).sum(axis=1)
    at = before + ranks[None, :] - below                    # (R, K); used for ranks 1 .. n - 2
    out = np.empty((r, ranks.size), dtype=x.dtype)
    short = taken <= SHORT_ROW                              # sorted together, as rows of one padded array
    if short.any():
        keep = short[row]
        marked = np.full((r, max(int(taken[short].max()), 1)), np.inf, dtype=x.dtype)
        marked[row[keep], (np.arange(pick.size) - start[row])[keep]] = values[keep]
        marked.sort(axis=1)
        out[short] = marked[rows, np.clip(at, 0, marked.shape[1] - 1)][short]
    for i in np.flatnonzero(~short):                        # crowded buckets (a lopsided column): alone
        own = np.sort(values[start[i]:start[i] + taken[i]])
        out[i] = own[np.clip(at[i], 0, own.size - 1)]
    out[:, ranks == 0] = lo[:, None]
    out[:, ranks == n - 1] = hi[:, None]
    return out


def _block_rows(n: int) -> int:
    """Rows of ``n`` values selected together (row offsets ``row * BUCKETS`` stay below 2**15)."""
    return int(np.clip(BLOCK_VALUES // n, 1, 2**15 // BUCKETS))


def _select_rows(rows: np.ndarray, ranks: np.ndarray, work: _Work) -> np.ndarray:
    """Order statistics ``ranks`` (sorted, distinct) of every row of ``rows`` (R, n); shape (R, K).

    ``work`` has room for :func:`_block_rows` rows.  Rows with a NaN or an infinite span are sorted (NaN
    last, as ``np.sort`` puts it)."""
    out = np.empty((rows.shape[0], ranks.size), dtype=rows.dtype)
    block = _block_rows(rows.shape[1])
    for r0 in range(0, rows.shape[0], block):
        x = rows[r0:r0 + block]
        lo, hi = x.min(axis=1), x.max(axis=1)
        with np.errstate(invalid="ignore", over="ignore"):
            ok = np.isfinite(hi - lo)                       # not for a row with a NaN, or a span past the range
        if ok.all():
            out[r0:r0 + x.shape[0]] = _select_block(x, lo, hi, ranks, work)
            continue
        good, bad = np.flatnonzero(ok), np.flatnonzero(~ok)
        if good.size:
            out[r0 + good] = _select_block(x[good], lo[good], hi[good], ranks, work)
        out[r0 + bad] = np.sort(x[bad], axis=1)[:, ranks]
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
    if x.dtype not in (np.float32, np.float64):
        x = x.astype(np.float64)
    ranks = np.asarray(ranks, dtype=np.intp).ravel()
    n, f = x.shape
    if ranks.size and (ranks.min() < 0 or ranks.max() >= n):
        raise ValueError(f"ranks must lie in [0, {n})")
    out = np.empty((ranks.size, f), dtype=x.dtype)
    if ranks.size == 0 or f == 0:
        return out
    distinct = np.unique(ranks)
    back = np.searchsorted(distinct, ranks)
    slab = max(1, SLAB_VALUES // n)
    column_major = x.T.flags.c_contiguous                   # a frequency-major store seen through .T: no copy
    buffer = None if column_major else np.empty(min(slab, f) * n, dtype=x.dtype)
    work = _Work(min(_block_rows(n), f) * n, x.dtype)
    for c0 in range(0, f, slab):
        c1 = min(f, c0 + slab)
        rows = x.T[c0:c1] if column_major else _transposed(x, c0, c1, buffer)
        out[:, c0:c1] = _select_rows(rows, distinct, work).T[back]
    return out


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
