"""Percentiles, summary statistics and the yield confidence interval.

Percentiles follow the linear interpolation between order statistics of
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The
American Statistician 50(4) (1996) 361-365, definition 7 (numpy's default):
``h = (n - 1) p``, ``Q = x[floor h] + (h - floor h) (x[floor h + 1] - x[floor h])``.
The named levels are the minimum, the +-3-sigma points of a normal
distribution (0.135 % and 99.865 %), the 95 % band (2.5 %, 97.5 %), the
median and the maximum.

Only the order statistics those levels read are needed (twelve of them),
not a sorted copy of every row: :func:`order_statistics` selects them by a
bucket (distribution-counting) selection (D. E. Knuth, *The Art of Computer
Programming*, vol. 3, 2nd ed., 1998, sec. 5.2 "distribution counting" and
5.3.3 on selection), linear in the row length.  Each row's values are
mapped to ``B`` buckets by a monotone map, ``floor((x - min) * s)``
(rounding preserves order: a larger value never falls in a lower bucket),
the buckets are counted, the bucket holding each wanted rank is read from
the cumulative counts, and only the few values in those buckets are
sorted.  The values returned are the row's order statistics exactly --
the same bits as sorting the row -- whatever the values' distribution
(a lopsided row only puts more values in a bucket).

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


#: Buckets per row of the selection.
BUCKETS = 512
#: Rows selected at once (keeps the counts and bucket indices in cache).
ROW_BLOCK = 32


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


def _select_block(x: np.ndarray, lo: np.ndarray, width: np.ndarray, ranks: np.ndarray, buckets: int,
                  work: np.ndarray) -> np.ndarray:
    """Order statistics ``ranks`` (K,) of every row of ``x`` (R, n); shape (R, K), dtype of ``x``.

    ``lo`` (R,) is each row's minimum and ``width`` (R,) its maximum minus it, finite, in ``x``'s dtype;
    ``work`` a scratch array of at least ``x.size`` elements of ``x``'s dtype.
    """
    r, n = x.shape
    scale = np.zeros(r, dtype=x.dtype)
    with np.errstate(over="ignore"):
        np.divide(x.dtype.type(buckets - 0.5), width, out=scale, where=width > 0)
    scale[~np.isfinite(scale)] = 0.0                        # a subnormal span: one bucket (still exact)
    y = work[:x.size].reshape(r, n)
    np.subtract(x, lo[:, None], out=y)                      # in [0, width]: rounding keeps the order
    y *= scale[:, None]                                     # in [0, buckets - 0.5] to rounding: below buckets
    y += (np.arange(r, dtype=x.dtype) * buckets)[:, None]  # row offsets: integers below 2**15, exact
    code = y.astype(np.intp).ravel()                        # (row, bucket) of every value, monotone in x per row
    cum = np.cumsum(np.bincount(code, minlength=r * buckets).reshape(r, buckets), axis=1)
    # the bucket holding each rank: the first whose cumulative count exceeds it (one search over all
    # rows, each row's counts shifted above the previous row's)
    rows = np.arange(r)[:, None]
    shift = rows * (n + 1)
    bucket = (np.searchsorted((cum + shift).ravel(), (ranks[None, :] + shift).ravel(), side="right").reshape(r, -1)
              - rows * buckets)                                                        # (R, K)
    below = np.where(bucket > 0, cum[rows, np.maximum(bucket - 1, 0)], 0)             # values in lower buckets
    wanted = (bucket + rows * buckets).ravel()
    mark = np.zeros(r * buckets, dtype=bool)
    mark[wanted] = True
    pick = np.flatnonzero(mark[code])
    code, vals = code[pick], x[pick // n, pick % n]            # x may be a strided view: no copy of it
    order = np.lexsort((vals, code))
    code, vals = code[order], vals[order]
    return vals[np.searchsorted(code, wanted).reshape(r, -1) + ranks[None, :] - below]


def order_statistics(rows: np.ndarray, ranks: np.ndarray, *, buckets: int = BUCKETS,
                     row_block: int = ROW_BLOCK) -> np.ndarray:
    """The ``ranks``-th smallest values of every row, without sorting the rows (see the module notes).

    Parameters
    ----------
    rows : ndarray, shape (R, n), float32 or float64
    ranks : ndarray of int, shape (K,)
        0-based ranks, each in ``[0, n)``.
    buckets, row_block : int
        Buckets per row and rows per block (speed only; at most ``2**15`` buckets in a block).

    Returns
    -------
    ndarray, shape (R, K), dtype of ``rows``
        ``np.sort(rows, axis=1)[:, ranks]``, bit for bit up to the order of
        equal values (``-0.0`` and ``0.0``).  A row with a NaN or an infinite
        span is sorted (NaN last, as ``np.sort`` does).
    """
    rows = np.asarray(rows)
    if rows.dtype not in (np.float32, np.float64):
        rows = rows.astype(np.float64)
    ranks = np.asarray(ranks, dtype=np.intp)
    out = np.empty((rows.shape[0], ranks.size), dtype=rows.dtype)
    if rows.shape[0] == 0 or ranks.size == 0:
        return out
    row_block = max(1, min(row_block, 2**15 // buckets))
    work = np.empty(min(rows.shape[0], row_block) * rows.shape[1], dtype=rows.dtype)
    for r0 in range(0, rows.shape[0], row_block):
        x = np.ascontiguousarray(rows[r0:r0 + row_block])   # a block of a transposed store: copied block by block
        lo = x.min(axis=1)
        with np.errstate(invalid="ignore", over="ignore"):
            width = x.max(axis=1) - lo                      # NaN for a row with a NaN, inf past the range
        ok = np.isfinite(width)
        if ok.all():
            out[r0:r0 + x.shape[0]] = _select_block(x, lo, width, ranks, buckets, work)
            continue
        good, bad = np.flatnonzero(ok), np.flatnonzero(~ok)
        if good.size:
            out[r0 + good] = _select_block(x[good], lo[good], width[good], ranks, buckets, work)
        out[r0 + bad] = np.sort(x[bad], axis=1)[:, ranks]
    return out


def row_percentiles(rows: np.ndarray) -> np.ndarray:
    """Named percentiles of every row, ``sorted_percentiles(np.sort(rows, axis=-1))`` bit for bit.

    Parameters
    ----------
    rows : ndarray, shape (R, n)

    Returns
    -------
    ndarray, shape (7, R), float64
    """
    n = rows.shape[-1]
    ranks = percentile_ranks(n)
    picked = order_statistics(rows, ranks)                 # (R, K)
    where = {int(k): i for i, k in enumerate(ranks)}
    out = []
    for _, p in PERCENTILES:
        h = (n - 1) * p / 100.0
        lo = int(math.floor(h))
        hi = min(lo + 1, n - 1)
        w = h - lo
        a = picked[:, where[lo]].astype(np.float64)
        if w > 0 and hi != lo:
            a = a + w * (picked[:, where[hi]].astype(np.float64) - a)
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


__all__ = ["PERCENTILES", "PERCENTILE_NAMES", "sorted_percentiles", "row_percentiles", "order_statistics",
           "percentile_ranks", "summary", "wilson_interval", "Z95"]
