"""Exact order statistics of the rows of an array, by a compiled bucket selection.

Method: distribution counting and selection (D. E. Knuth, *The Art of
Computer Programming*, vol. 3, 2nd ed., 1998, sec. 5.2 "distribution
counting" and 5.3.3 "minimum-comparison selection"), one row at a time so the
row stays in cache, linear in the row's length:

1. one pass: the least and greatest value and a NaN check (a row with a NaN
   or an infinity is flagged and left to ``np.sort``);
2. one pass: each value to the bucket ``floor((x - lo) * s)``,
   ``s = (B - 1/2) / (hi - lo)`` (computed in float64, rounded to the row's
   type) -- a monotone map: ``x - lo`` and the product are rounded, and
   rounding never reverses an order, so a larger value never falls in a lower
   bucket; the codes are counted in four interleaved histograms (neighbours in
   one bucket do not wait on each other's increment);
3. the bucket of each wanted rank from the cumulative counts;
4. one pass without a branch: every value is written at the end of one buffer
   and the end advanced only for a value of a wanted bucket;
5. those few values sorted together; as the wanted buckets are in order of
   value, a rank's value lies at its place among them.

Ranks 0 and n - 1 are the least and greatest values of step 1.  The result is
``np.sort(x, axis=1)[:, ranks]`` exactly, whatever the distribution (a
lopsided row only puts more values in a bucket), up to the order of equal
values (``-0.0`` and ``0.0``).  A row whose span ``hi - lo`` or scale ``s``
leaves the type's range (a span past float32's range, a subnormal span) is
flagged too and sorted.

Compiled (:mod:`service.compiled`) because each step is one pass over a row
held in cache; as numpy passes over memory the same selection measured 2.4x
slower on the Monte Carlo stores (see :mod:`service.tolerance.statistics`).
"""

from __future__ import annotations

import numpy as np

from service.compiled import kernel, warms

#: Buckets per row (codes are kept as uint16: at most 65536).
BUCKETS = 1024


@kernel
def _row_order_statistics(x, ranks, buckets, out, flagged):  # pragma: no cover - compiled
    """Order statistics ``ranks`` (K,, int64, sorted, distinct, in [0, n)) of each row of ``x`` (F, n) into
    ``out`` (F, K), dtype of ``x``, with ``buckets`` buckets per row (2 .. 65536); ``flagged`` (F,) bool set
    True for a row left to the caller (a NaN, an infinity, a span or scale out of range: its ``out`` row is
    left unwritten)."""
    f, n = x.shape
    k = ranks.size
    b = buckets
    hist = np.zeros((4, b), dtype=np.int32)
    total = np.empty(b, dtype=np.int64)
    mark = np.zeros(b, dtype=np.uint8)
    wanted = np.empty(k, dtype=np.int64)       # the wanted buckets, ascending, distinct
    before = np.empty(k, dtype=np.int64)       # values taken from the wanted buckets under each wanted one
    below = np.empty(k, dtype=np.int64)        # values in all buckets under each wanted one
    rank_bucket = np.empty(k, dtype=np.int64)  # index into ``wanted`` of each rank
    buf = np.empty(n, dtype=x.dtype)
    codes = np.empty(n, dtype=np.uint16)
    cast = np.empty(1, dtype=x.dtype)
    for i in range(f):
        row = x[i]
        lo = row[0]
        hi = row[0]
        bad = False
        for j in range(n):
            v = row[j]
            if v < lo:
                lo = v
            if v > hi:
                hi = v
            if v != v:
                bad = True
        if bad or np.isinf(lo) or np.isinf(hi):
            flagged[i] = True
            continue
        flagged[i] = False
        if hi == lo:
            for q in range(k):
                out[i, q] = lo
            continue
        width = hi - lo                                  # in the row's type
        cast[0] = (b - 0.5) / (np.float64(hi) - np.float64(lo))
        scale = cast[0]                                  # in the row's type
        if np.isinf(width) or np.isinf(scale):
            flagged[i] = True
            continue
        for j in range(n):                               # monotone map to [0, b)
            codes[j] = min(np.int32((row[j] - lo) * scale), b - 1)
        hist[:, :] = 0
        m4 = n - n % 4
        for j in range(0, m4, 4):
            hist[0, codes[j]] += 1
            hist[1, codes[j + 1]] += 1
            hist[2, codes[j + 2]] += 1
            hist[3, codes[j + 3]] += 1
        for j in range(m4, n):
            hist[0, codes[j]] += 1
        acc = 0
        for c in range(b):
            acc += hist[0, c] + hist[1, c] + hist[2, c] + hist[3, c]
            total[c] = acc                               # values in buckets 0 .. c
        nb = 0
        c = 0
        taken = 0
        for q in range(k):                               # the bucket of each inner rank (ranks ascending)
            r = ranks[q]
            if r == 0 or r == n - 1:
                rank_bucket[q] = -1
                continue
            while total[c] <= r:
                c += 1
            if nb == 0 or wanted[nb - 1] != c:
                wanted[nb] = c
                below[nb] = total[c - 1] if c > 0 else 0
                before[nb] = taken
                taken += total[c] - below[nb]
                mark[c] = 1
                nb += 1
            rank_bucket[q] = nb - 1
        if nb:
            e = 0
            for j in range(n):                           # branchless: the end moves for a wanted value only
                buf[e] = row[j]
                e += mark[codes[j]]
            buf[:e].sort()
            for s in range(nb):
                mark[wanted[s]] = 0
        for q in range(k):
            r = ranks[q]
            if r == 0:
                out[i, q] = lo
            elif r == n - 1:
                out[i, q] = hi
            else:
                s = rank_bucket[q]
                out[i, q] = buf[before[s] + (r - below[s])]


def select_into(rows: np.ndarray, ranks: np.ndarray, out: np.ndarray, buckets: int = BUCKETS) -> None:
    """Order statistics ``ranks`` of every row of ``rows`` into ``out``, the kernel and then ``np.sort`` for
    the rows it leaves.

    Parameters
    ----------
    rows : ndarray, shape (F, n), float32 or float64, C-contiguous, writeable (the kernel's compiled types)
    ranks : ndarray, shape (K,), int64, sorted, distinct, each in [0, n)
    out : ndarray, shape (F, K), dtype of ``rows``, C-contiguous
    buckets : int
        Buckets per row, 2 .. 65536.
    """
    flagged = np.empty(rows.shape[0], dtype=np.bool_)
    _row_order_statistics(rows, ranks, buckets, out, flagged)
    if flagged.any():
        bad = np.flatnonzero(flagged)
        out[bad] = np.sort(rows[bad], axis=1)[:, ranks]        # NaN last, infinities in place


def row_order_statistics(x: np.ndarray, ranks: np.ndarray, buckets: int = BUCKETS) -> np.ndarray:
    """The ``ranks``-th smallest values of every row (see the module notes).

    Parameters
    ----------
    x : ndarray, shape (F, n), n >= 1
        float32 or float64 (other types are converted to float64); a C-contiguous, writeable array is read
        in place, any other is copied first.
    ranks : array of int, shape (K,)
        0-based ranks, each in ``[0, n)``, in any order, repeats allowed.
    buckets : int
        Buckets per row, 2 .. 65536 (the default suits rows of thousands of values).

    Returns
    -------
    ndarray, shape (F, K), dtype of ``x``
        ``np.sort(x, axis=1)[:, ranks]`` bit for bit, up to the order of equal values (``-0.0`` and
        ``0.0``); NaN sorts last and infinities in place, as in ``np.sort``.
    """
    x = np.asarray(x)
    if x.ndim != 2:
        raise ValueError("x must be two-dimensional (rows, values)")
    if x.dtype not in (np.float32, np.float64) or not x.dtype.isnative:
        x = x.astype(np.float64)
    if not (x.flags.c_contiguous and x.flags.writeable):
        x = np.array(x, order="C")                          # the kernel is compiled for this layout only
    if not 2 <= buckets <= 65536:
        raise ValueError("buckets must lie in [2, 65536]")
    ranks = np.asarray(ranks, dtype=np.int64).ravel()
    f, n = x.shape
    if ranks.size and (ranks.min() < 0 or ranks.max() >= n):
        raise ValueError(f"ranks must lie in [0, {n})")
    if ranks.size == 0 or f == 0:
        return np.empty((f, ranks.size), dtype=x.dtype)
    distinct, back = np.unique(ranks, return_inverse=True)
    picked = np.empty((f, distinct.size), dtype=x.dtype)
    select_into(x, distinct, picked, buckets)
    return picked if distinct.size == ranks.size and np.array_equal(distinct, ranks) else picked[:, back]


@warms
def _warm() -> None:
    """Compile (or load) the kernel for float32 and float64 rows, as the service calls it."""
    rng = np.random.default_rng(0)
    for dtype in (np.float32, np.float64):
        row_order_statistics(rng.standard_normal((3, 64)).astype(dtype), [0, 5, 31, 63])


__all__ = ["BUCKETS", "row_order_statistics", "select_into"]
