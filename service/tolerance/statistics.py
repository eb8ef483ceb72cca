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
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtri

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


#: Trials of the pilot sample: the first rows of a store, sorted per column.
PILOT_ROWS = 512
#: Stores of at most this many trials, or this many values, are sorted outright (cheaper than the passes).
SORT_TRIALS = 2048
SORT_VALUES = 1 << 16
#: Columns selected at once: bounds the working memory (row blocks, extracted values) by one column block.
COLUMN_BLOCK = 4096
#: Values in one row block of a pass (kept in cache); a block has a multiple of TILE rows, at most 255 * TILE.
BLOCK_VALUES = 1 << 18
#: Rows per chunk whose extremes bound the ranks near either end.
CHUNK = 64
#: Rows folded into one long row, so that a per-column threshold is one contiguous operand
#: (TILE * 4 bytes * F is a whole number of 64-byte lines for any F).
TILE = 16
#: Half-width of a bracket in standard deviations of the estimated rank.
BRACKET_Z = 3.0
#: Relative error allowed for the pilot's density when a rank is extrapolated from a counted value.
DENSITY_ERROR = 0.0
#: The counted pilot values lie this many standard deviations of a pilot rank beyond the ranks sought.
COUNT_Z = 3.0
#: Ranks this close to each other share a bracket.
GROUP_GAP = 16
#: Values taken out of one column sorted as one short row (fast); up to MAX_WIDTH as a longer row, and a
#: column with more is sorted whole.
ROW_WIDTH = 512
MAX_WIDTH = 4096


@dataclass(frozen=True)
class _Group:
    """Ranks selected from one bracket: ``first``..``last`` (0-based); ``kind`` is "bottom" (bracket
    ``(-inf, upper]``), "middle" (``[lower, upper]``) or "top" (``[lower, +inf]`` and NaN)."""
    first: int
    last: int
    kind: str

    def estimate_rank(self) -> int:
        """The rank whose value the first pass counts below."""
        if self.kind == "bottom":
            return self.last
        if self.kind == "top":
            return self.first
        return (self.first + self.last) // 2


def _plan(ranks: np.ndarray, n: int, m: int) -> list[_Group]:
    """Brackets for the sorted, distinct ``ranks`` of columns of ``n`` values (pilot of ``m``), ascending.

    Ranks within :data:`GROUP_GAP` share a bracket; a bracket expected to hold fewer than two pilot values
    below (above) it is open to that end."""
    runs: list[list[int]] = []
    for r in ranks:
        if runs and r - runs[-1][1] <= GROUP_GAP:
            runs[-1][1] = int(r)
        else:
            runs.append([int(r), int(r)])
    groups = []
    for a, b in runs:
        kind = "bottom" if a * m < 2 * n else "top" if (n - 1 - b) * m < 2 * n else "middle"
        groups.append(_Group(a, b, kind))
    return groups


def _row_blocks(n_rows: int, width: int, start: int = 0):
    """``(first_row, rows)`` of the row blocks of a pass over rows ``start..n_rows`` (a multiple of CHUNK rows,
    at most 255 * TILE, about BLOCK_VALUES values; the last block takes the rest)."""
    rows = max(CHUNK, min(255 * TILE, BLOCK_VALUES // max(width, 1)) // CHUNK * CHUNK)
    for a in range(start, n_rows, rows):
        yield a, min(rows, n_rows - a)


class _Thresholds:
    """One value per column (F,), and the same tiled TILE times (TILE * F,) for a folded block."""

    def __init__(self, per_column: np.ndarray):
        self.plain = per_column
        self.tiled = np.tile(per_column, TILE)

    def like(self, folded: bool) -> np.ndarray:
        return self.tiled if folded else self.plain


def _fold(block: np.ndarray) -> tuple[np.ndarray, bool]:
    """The block as ``(rows / TILE, TILE * F)`` when its rows allow (and whether it was folded)."""
    q, f = block.shape
    if q % TILE == 0:
        return block.reshape(q // TILE, TILE * f), True
    return block, False


class _Counter:
    """Per-column counts of masks over row blocks.  A folded mask is counted 8 bytes at a time: each byte of
    the uint64 sum over at most 255 folded rows is one column's count."""

    def __init__(self, f: int):
        self.tiled = np.zeros(TILE * f, dtype=np.int64)
        self.plain = np.zeros(f, dtype=np.int64)

    def add(self, mask: np.ndarray, folded: bool) -> None:
        if folded:
            self.tiled += np.add.reduce(mask.view(np.uint64), axis=0).view(np.uint8)
        else:
            self.plain += mask.sum(axis=0)

    def total(self) -> np.ndarray:
        return self.tiled.reshape(TILE, -1).sum(axis=0) + self.plain


@dataclass(frozen=True)
class _FirstPass:
    """Counts ``below`` (K, F) of the values under each threshold, and the least and greatest value of every
    chunk of CHUNK consecutive rows, ``chunk_min`` and ``chunk_max`` (C, F), NaN ignored."""
    below: np.ndarray
    chunk_min: np.ndarray
    chunk_max: np.ndarray


def _first_pass(x: np.ndarray, thresholds: list[_Thresholds]) -> _FirstPass:
    """One pass over the store: counts below the thresholds, and the chunks' extremes."""
    n, f = x.shape
    counters = [_Counter(f) for _ in thresholds]
    lows, highs = [], []
    for a, q in _row_blocks(n, f):
        raw = np.ascontiguousarray(x[a:a + q])
        block, folded = _fold(raw)
        mask = np.empty(block.shape, dtype=bool)
        for th, counter in zip(thresholds, counters):
            np.less(block, th.like(folded), out=mask)
            counter.add(mask, folded)
        whole = q // CHUNK * CHUNK
        if whole:
            chunks = raw[:whole].reshape(whole // CHUNK, CHUNK, f)
            lows.append(np.minimum.reduce(chunks, axis=1))
            highs.append(np.maximum.reduce(chunks, axis=1))
        if whole < q:
            lows.append(np.minimum.reduce(raw[whole:], axis=0)[None])
            highs.append(np.maximum.reduce(raw[whole:], axis=0)[None])
    below = np.stack([c.total() for c in counters]) if counters else np.zeros((0, f), dtype=np.int64)
    return _FirstPass(below, np.concatenate(lows), np.concatenate(highs))


@dataclass(frozen=True)
class _Brackets:
    """Per group and column: ``lower`` (G, F) and ``upper`` (G, F) in the store's dtype (``-inf``/``+inf``
    where a group is open to that end) and ``bad`` (F,): columns left to the sort."""
    lower: np.ndarray
    upper: np.ndarray
    bad: np.ndarray


def _pilot_index(rank: int, n: int, m: int) -> int:
    """Index in a sorted pilot of ``m`` values whose rank among ``n`` is expected to be ``rank``."""
    return min(m - 1, max(0, int(round((rank + 1) * (m + 1) / (n + 1) - 1))))


def _counted_points(rank_first: int, rank_last: int, n: int, m: int) -> tuple[int, int]:
    """Indices of the two pilot values counted for a middle bracket: BRACKET_Z standard deviations of a
    pilot rank below the first rank sought and above the last."""
    def spread(rank: int) -> float:
        p = (rank + 1) / (n + 1)
        return COUNT_Z * math.sqrt(m * p * (1 - p)) + 1
    lo = (rank_first + 1) * (m + 1) / (n + 1) - 1 - spread(rank_first)
    hi = (rank_last + 1) * (m + 1) / (n + 1) - 1 + spread(rank_last)
    return max(0, int(math.floor(lo))), min(m - 1, int(math.ceil(hi)))


def _interpolate(va: np.ndarray, vb: np.ndarray, ca: np.ndarray, cb: np.ndarray, n: int, first: int,
                 last: int) -> tuple[np.ndarray, np.ndarray]:
    """Bracket ``(lower, upper)`` (F,) of ranks ``first..last`` of ``n`` from two counted values ``va < vb``
    (F,) with ``ca``, ``cb`` values below them.

    Between them the normal score of the rank, ``z = ndtri((rank + 1/2) / n)``, is taken as linear in the
    value: exact for a normal distribution, and for any smooth one over a short span, where a rank linear
    in the value would miss the curvature of the tails.  The bracket is widened by BRACKET_Z standard
    deviations of the rank at the sought value: binomial, ``N q (1 - q)`` for the ``N`` values between the
    ends and the fraction ``q`` under it, plus the ends' own sampling error carried by the bend of the
    normal scores, ``((1 - s) (phi(z) / phi(z_a) - 1))^2 ca (1 - ca / n)`` and the like for ``b``
    (``s`` the value's fraction of the span), plus DENSITY_ERROR of ``N`` for a shape that is not normal.
    It never leaves ``[va, vb]``, which holds the ranks for sure when ``ca <= first`` and ``cb > last``;
    otherwise it is ``[va, vb]`` and fails the check after the pass."""
    held = cb - ca
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        score = lambda rank: ndtri((np.clip(rank, 0, n - 1) + 0.5) / n)   # noqa: E731
        za, zb = score(ca), score(cb)

        def spread(rank: float) -> np.ndarray:
            z = score(np.full_like(ca, rank))
            s = (z - za) / (zb - za)
            q = np.clip((rank - ca) / held, 0, 1)
            bend_a = ((1 - s) * (np.exp((za * za - z * z) / 2) - 1)) ** 2 * ca * (1 - ca / n)
            bend_b = (s * (np.exp((zb * zb - z * z) / 2) - 1)) ** 2 * cb * (1 - cb / n)
            return BRACKET_Z * np.sqrt(held * q * (1 - q) + bend_a + bend_b + 1) + DENSITY_ERROR * held

        lo = va + (score(first - spread(first)) - za) / (zb - za) * (vb - va)
        hi = va + (score(last + 1 + spread(last + 1)) - za) / (zb - za) * (vb - va)
    inside = (ca <= first) & (cb > last) & np.isfinite(lo) & np.isfinite(hi)
    return np.where(inside, np.maximum(lo, va), va), np.where(inside, np.minimum(hi, vb), vb)


def _brackets(x: np.ndarray, pilot: np.ndarray, groups: list[_Group]) -> _Brackets:
    """Value brackets of every group and column (see the module notes).

    A bracket open below ends at the ``(last + 1)``-th least chunk minimum: that many values lie at or
    under it, so it holds its ranks for sure; one open above starts at the ``(n - first)``-th greatest chunk
    maximum.  A middle bracket is read from two counted pilot values ``a < b``: where the wanted ranks lie
    between their counts, linearly interpolated in value between them, widened by BRACKET_Z binomial
    standard deviations of the count, and never wider than ``[a, b]`` (which holds the ranks for sure)."""
    n, f = x.shape
    m = pilot.shape[1]
    middle = [k for k, g in enumerate(groups) if g.kind == "middle"]
    points = {k: _counted_points(groups[k].first, groups[k].last, n, m) for k in middle}
    thresholds = [_Thresholds(pilot[:, i]) for k in middle for i in points[k]]
    first = _first_pass(x, thresholds)
    lower = np.full((len(groups), f), -np.inf)
    upper = np.full((len(groups), f), np.inf)
    lows = np.sort(first.chunk_min, axis=0)                # NaN (an all-NaN chunk) last
    highs = np.sort(first.chunk_max, axis=0)
    chunks = lows.shape[0]
    for k, g in enumerate(groups):
        if g.kind == "bottom":
            upper[k] = lows[g.last] if g.last < chunks else np.inf
        elif g.kind == "top":
            lower[k] = highs[chunks - (n - g.first)] if n - g.first <= chunks else -np.inf
        else:
            j = 2 * middle.index(k)
            ia, ib = points[k]
            ca, cb = first.below[j].astype(np.float64), first.below[j + 1].astype(np.float64)
            lower[k], upper[k] = _interpolate(pilot[:, ia].astype(np.float64), pilot[:, ib].astype(np.float64),
                                              ca, cb, n, g.first, g.last)
    with np.errstate(over="ignore", invalid="ignore"):
        lower, upper = lower.astype(x.dtype), upper.astype(x.dtype)
        bad = np.isnan(pilot[:, -1]) | np.isnan(lower).any(axis=0) | np.isnan(upper).any(axis=0)
        bad |= (upper[:-1] >= lower[1:]).any(axis=0) | (lower > upper).any(axis=0)
    lower[:, bad] = np.inf                                 # a column left to the sort takes out nothing
    upper[:, bad] = -np.inf                                # (or only its infinities and NaN)
    return _Brackets(lower, upper, bad)


@dataclass(frozen=True)
class _Extracted:
    """The second pass: per group and column the values ``below`` its lower bound (G, F); the values inside
    the brackets (N,), their columns (N,) and the number of lower bounds above each (N,), in row-major order
    (with disjoint brackets in rank order, a value of group ``g`` is under ``G - 1 - g`` lower bounds; NaN
    under none: the top group's, as np.sort puts it last)."""
    below: np.ndarray
    values: np.ndarray
    column: np.ndarray
    under: np.ndarray


_ONE_PER_BYTE = np.uint64(0x0101010101010101)


def _extract(x: np.ndarray, groups: list[_Group], br: _Brackets) -> _Extracted:
    """Count below every lower bound and take out the values inside the brackets, in one pass (the
    bracket masks are merged 8 bytes at a time)."""
    n, f = x.shape
    lows = {k: _Thresholds(br.lower[k]) for k, g in enumerate(groups) if g.kind != "bottom"}
    ups = {k: _Thresholds(br.upper[k]) for k, g in enumerate(groups) if g.kind != "top"}
    below = {k: _Counter(f) for k in lows}
    most = max(q for _, q in _row_blocks(n, f)) * f
    words = -(-most // 8)
    union, lt, le, code = (np.zeros(words * 8, dtype=bool) for _ in range(4))
    u64, lt64, le64 = union.view(np.uint64), lt.view(np.uint64), le.view(np.uint64)
    code64, tmp64 = code.view(np.uint64), np.empty(words, dtype=np.uint64)
    column_of = np.tile(np.arange(f, dtype=np.uint16), most // f)
    values, columns, under = [], [], []
    for a, q in _row_blocks(n, f):
        raw = np.ascontiguousarray(x[a:a + q])
        block, folded = _fold(raw)
        size = q * f
        u64[:] = 0
        code64[:] = 0
        for k, g in enumerate(groups):
            if k in lows:
                mask = lt[:size].reshape(block.shape)
                np.less(block, lows[k].like(folded), out=mask)
                below[k].add(mask, folded)
                code64 += lt64                             # bytes count the bounds above: at most G - 1
            if k in ups:
                np.less_equal(block, ups[k].like(folded), out=le[:size].reshape(block.shape))
            if g.kind == "bottom":
                u64 |= le64
            elif g.kind == "top":
                np.bitwise_xor(lt64, _ONE_PER_BYTE, out=tmp64)     # not below: above, or NaN
                u64 |= tmp64
            else:
                np.invert(lt64, out=tmp64)
                tmp64 &= le64
                u64 |= tmp64
        hit = np.flatnonzero(union[:size])
        values.append(raw.ravel()[hit])
        columns.append(column_of[hit])
        under.append(code.view(np.uint8)[hit])
    counts = np.zeros((len(groups), f), dtype=np.int64)
    for k in lows:
        counts[k] = below[k].total()
    return _Extracted(counts, np.concatenate(values), np.concatenate(columns), np.concatenate(under))


def _sorted_rows(values: np.ndarray, column: np.ndarray, total: np.ndarray, width: int, dtype: np.dtype
                 ) -> np.ndarray:
    """The ``values`` (N,) of columns ``column`` (N,, intp, grouped by column in row order), ``total`` (C,)
    per column, sorted in one row per column (C, width); NaN after them (NaN also pads)."""
    slot = np.arange(column.size, dtype=np.intp)
    slot += column * width
    slot -= (np.cumsum(total) - total)[column]             # column * width + place in the column
    rows = np.full(total.size * width, np.nan, dtype=dtype)
    rows[slot] = values
    rows = rows.reshape(total.size, width)
    rows.sort(axis=1)
    return rows


def _pick(groups: list[_Group], ranks: np.ndarray, ex: _Extracted, br: _Brackets, dtype: np.dtype
          ) -> tuple[np.ndarray, np.ndarray]:
    """Order statistics ``ranks`` (K, F) from the values taken out, and the columns where they are exact.

    A column's values taken out, sorted, are its brackets' values one bracket after the other (the brackets
    are disjoint and in rank order), so rank ``r`` of group ``g`` sits at ``(values in the brackets before
    g) + r - below[g]``; exact where every bracket held its ranks: at most ``first`` values below it and
    more than ``last`` up to its top."""
    f = ex.below.shape[1]
    ng = len(groups)
    column = ex.column.astype(np.intp)
    group = (ng - 1) - ex.under.astype(np.intp)
    inside = np.bincount(group * f + column, minlength=ng * f).reshape(ng, f)
    total = inside.sum(axis=0)                             # values taken out of each column
    ok = ~br.bad & (total <= MAX_WIDTH)
    for k, g in enumerate(groups):
        ok &= (ex.below[k] <= g.first) & (ex.below[k] + inside[k] > g.last)
    offset = np.cumsum(inside, axis=0) - inside            # (G, F) where each group starts in the row
    group_of = np.searchsorted([g.last for g in groups], ranks)
    at = offset[group_of] + ranks[:, None] - ex.below[group_of]             # (K, F) place in the sorted row
    out = np.zeros((ranks.size, f), dtype=dtype)
    order = np.argsort(ex.column, kind="stable")           # by column, row order kept (a radix sort)
    column, values = column[order], ex.values[order]
    short = ok & (total <= ROW_WIDTH)
    if short.all():
        rows = _sorted_rows(values, column, total, max(int(total.max()), 1), dtype)
        return np.take_along_axis(rows.T, at, axis=0), ok
    for cols in (np.flatnonzero(short), np.flatnonzero(ok & ~short)):
        if cols.size:
            index = np.full(f, -1, dtype=np.intp)
            index[cols] = np.arange(cols.size)
            sel = index[column] >= 0
            rows = _sorted_rows(values[sel], index[column[sel]], total[cols], int(total[cols].max()), dtype)
            out[:, cols] = rows[np.arange(cols.size)[None, :], at[:, cols]]
    return out, ok


def _select_columns(x: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    """Order statistics ``ranks`` (sorted, distinct) of the columns of ``x`` (n, F): (K, F)."""
    n, f = x.shape
    if n <= SORT_TRIALS or n * f <= SORT_VALUES:
        return np.sort(x, axis=0)[ranks]
    m = PILOT_ROWS
    pilot = np.sort(np.ascontiguousarray(x[:m].T), axis=1)              # (F, m)
    groups = _plan(ranks, n, m)
    br = _brackets(x, pilot, groups)
    ex = _extract(x, groups, br)
    out, ok = _pick(groups, ranks, ex, br, x.dtype)
    if not ok.all():
        left = np.flatnonzero(~ok)
        out[:, left] = np.sort(x[:, left], axis=0)[ranks]
    return out


def column_order_statistics(x: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    """The ``ranks``-th smallest values of every column, without sorting the columns (see the module notes).

    Parameters
    ----------
    x : ndarray, shape (n, F), float32 or float64 (other types are converted to float64)
        One column per frequency, one row per trial; any memory layout (C-contiguous is fastest).
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
    for c0 in range(0, f, COLUMN_BLOCK):
        c1 = min(f, c0 + COLUMN_BLOCK)
        out[:, c0:c1] = _select_columns(x[:, c0:c1], distinct)[back]
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
    """Named percentiles of every row of a frequency-major (F, n) array: ``column_percentiles(rows.T)``.

    Kept for callers that still fill (F, n) stores; (7, F) float64.
    """
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


__all__ = ["PERCENTILES", "PERCENTILE_NAMES", "sorted_percentiles", "row_percentiles", "order_statistics",
           "percentile_ranks", "summary", "wilson_interval", "Z95"]
