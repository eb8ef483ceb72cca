"""Per-trial figures of merit, vectorized over trials, on the metric grid.

The definitions are those of :mod:`service.response.metrics` (A. B.
Williams, F. J. Taylor, *Electronic Filter Design Handbook*, 4th ed., 2006,
sec. 2.1-2.3), read on the metric grid of :mod:`service.tolerance.grids`
instead of refined on one exact response.  They are read from the power
ratio ``p = |H|^2``: ``10 log10`` is increasing, so the largest gain is the
gain of the largest ``p`` and a point is below a level in dB exactly when
its ``p`` is below the level's power (to rounding); the logarithm is taken
of the few values a figure reports, not of every point.

reference gain
    The largest gain over the requirement's passband points; without one the
    DC gain (lowpass, bandstop) or the peak gain (highpass, bandpass -- an
    op-amp macromodel takes a highpass's gain to 0 at high frequency); a
    fixed ``reference_gain_db`` when the criteria give one.
loss
    reference gain minus gain, dB.
f3db_hz
    Where the gain crosses the reference minus 10 log10 2 dB (half the
    reference power), by linear interpolation of dB in log frequency between
    adjacent metric points (the dense window around the nominal 3 dB point
    keeps that within ~1e-5 relative); NaN when the trial has no crossing in
    the grid.
passband_ripple_db
    Largest minus smallest gain over the passband points (needs a requirement).

The yield itself is not read here: every trial is verified on the whole band
by :func:`service.response.verification.verify` (the same verdict as a
design's); these figures describe the spread.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.approximation.types import ResponseType
from service.compiled import kernel, warms
from service.tolerance.grids import HALF_POWER_DB, Grids

#: Smallest |H| before the logarithm (keeps an exact transmission zero finite, -3000 dB).
MAGNITUDE_FLOOR = 1e-150
#: The same floor for the power ratio |H|^2.
POWER_FLOOR = MAGNITUDE_FLOOR ** 2


def power(h: np.ndarray) -> np.ndarray:
    """``|h|^2`` (float64, same shape) of a complex response."""
    return h.real ** 2 + h.imag ** 2


def db(p: np.ndarray) -> np.ndarray:
    """``10 log10 p`` in dB of a power ratio (float64, same shape; ``p`` floored at :data:`POWER_FLOOR`)."""
    a = np.array(p, dtype=float)
    if a.size and not a.min() >= POWER_FLOOR:          # the floor touches only values below it (or NaN)
        np.maximum(a, POWER_FLOOR, out=a)
    np.log10(a, out=a)
    a *= 10.0
    return a


def gain_db(h: np.ndarray) -> np.ndarray:
    """``20 log10 |h|`` in dB, float64, same shape (|h| floored at 1e-150): ``db(power(h))``."""
    return db(power(h))


def columns(selected: np.ndarray) -> slice | np.ndarray:
    """A bool column selection (M,) as a slice when it is one run of columns (a view, not a copy), else as is."""
    idx = np.flatnonzero(selected)
    if idx.size and idx[-1] - idx[0] + 1 == idx.size:
        return slice(int(idx[0]), int(idx[-1]) + 1)
    return selected


def positive_columns(grids: Grids) -> slice | np.ndarray:
    """The metric points above 0 Hz (the grid is sorted: at most a leading DC point is left out); read once per grid."""
    cached = grids.__dict__.get("_positive_columns")
    if cached is None:
        cached = grids.__dict__["_positive_columns"] = columns(grids.positive)
    return cached


def _metric_columns(grids: Grids, selected: np.ndarray, layout: np.ndarray | None) -> slice | np.ndarray:
    """Columns of ``p`` holding the metric points ``selected`` (bool (M,)), in metric order."""
    if layout is None:
        return columns(selected)
    idx = layout[np.flatnonzero(selected)]
    if idx.size and idx[-1] - idx[0] + 1 == idx.size and np.all(np.diff(idx) == 1):
        return slice(int(idx[0]), int(idx[-1]) + 1)
    return idx


def reference_power(p: np.ndarray, grids: Grids, layout: np.ndarray | None = None) -> np.ndarray:
    """Reference power ratio per trial, shape (Tc,), from the powers ``p`` (Tc, M) of the metric points.

    ``layout`` (M,) gives the column of ``p`` of each metric point (None: ``p`` is in metric order); the
    criteria's fixed reference gain, when they give one, as a power.
    """
    criteria = grids.criteria
    if criteria is not None and criteria.reference_gain_db is not None:
        return np.full(p.shape[0], 10.0 ** (float(criteria.reference_gain_db) / 10.0))
    if grids.passband_columns is not None:
        return p[:, _metric_columns(grids, grids.passband_columns, layout)].max(axis=1)
    if grids.response in (ResponseType.LOWPASS, ResponseType.BANDSTOP) and grids.metric_hz[0] == 0.0:
        return p[:, 0 if layout is None else int(layout[0])].copy()
    return p.max(axis=1)


def reference_gain(p: np.ndarray, grids: Grids, layout: np.ndarray | None = None) -> np.ndarray:
    """Reference gain (dB) per trial, shape (Tc,), from the powers ``p`` (Tc, M) of the metric points."""
    criteria = grids.criteria
    if criteria is not None and criteria.reference_gain_db is not None:
        return np.full(p.shape[0], float(criteria.reference_gain_db))
    return db(reference_power(p, grids, layout))


def _interp(fa, fb, ga, gb, level):
    la, lb = np.log(fa), np.log(fb)
    d = gb - ga
    t = np.divide(level - ga, d, out=np.full(d.shape, 0.5), where=d != 0)
    return np.exp(la + t * (lb - la))


@kernel
def _first_below(p, cols, threshold, start, out):
    """For each row ``i`` of ``p`` (Tc, N) float64: the first position ``k >= start[i]`` of ``cols`` (M,) with
    ``p[i, cols[k]] < threshold[i]``, or -1; into ``out`` (Tc,) int64.  The scan stops at the first one."""
    for i in range(p.shape[0]):
        out[i] = -1
        for k in range(max(start[i], 0), cols.size):
            if p[i, cols[k]] < threshold[i]:
                out[i] = k
                break


@kernel
def _last_below(p, cols, threshold, stop, out):
    """For each row ``i``: the last position ``k <= stop[i]`` of ``cols`` with ``p[i, cols[k]] < threshold[i]``,
    or -1; into ``out`` (Tc,) int64 (the scan runs down from ``stop[i]``)."""
    for i in range(p.shape[0]):
        out[i] = -1
        for k in range(min(stop[i], cols.size - 1), -1, -1):
            if p[i, cols[k]] < threshold[i]:
                out[i] = k
                break


@warms
def _warm() -> None:
    p = np.ones((2, 3))
    cols = np.arange(3, dtype=np.intp)
    thr = np.full(2, 0.5)
    k = np.zeros(2, dtype=np.int64)
    _first_below(p, cols, thr, k, np.empty(2, dtype=np.int64))
    _last_below(p, cols, thr, k + 2, np.empty(2, dtype=np.int64))


@dataclass
class HalfPowerBrackets:
    """Per trial, the adjacent positive metric points whose gains bracket the half-power level.

    Every array has the shape of the 3 dB result: (Tc,) for lowpass and highpass, (Tc, 2) for band
    responses (lower and upper edge).  ``lower`` and ``upper`` are positions among the positive metric
    points (clipped into range), ``p_lower`` and ``p_upper`` their powers ``|H|^2``, ``found`` whether
    the trial crosses the level there (else its 3 dB frequency is NaN).
    """

    lower: np.ndarray
    upper: np.ndarray
    p_lower: np.ndarray
    p_upper: np.ndarray
    found: np.ndarray


def half_power_brackets(p: np.ndarray, ref_db: np.ndarray, grids: Grids,
                        layout: np.ndarray | None = None) -> HalfPowerBrackets:
    """The crossing brackets of :func:`f3db` (same arguments): the metric points are scanned in order of
    frequency from each trial's row of ``p`` (``layout`` gives the columns), with no copy of the rows."""
    pos = positive_columns(grids)
    metric_cols = np.arange(grids.metric_hz.size, dtype=np.intp) if layout is None else np.asarray(layout, np.intp)
    cols = np.ascontiguousarray(metric_cols[pos])               # column of p of each positive metric point
    m = cols.size
    p = np.ascontiguousarray(p, dtype=np.float64)
    tc = p.shape[0]
    rows = np.arange(tc)
    threshold = np.ascontiguousarray(10.0 ** ((ref_db - HALF_POWER_DB) / 10.0), dtype=np.float64)
    zero, top = np.zeros(tc, dtype=np.int64), np.full(tc, m - 1, dtype=np.int64)

    def first(start):
        out = np.empty(tc, dtype=np.int64)
        _first_below(p, cols, threshold, start, out)
        return out

    def last(stop):
        out = np.empty(tc, dtype=np.int64)
        _last_below(p, cols, threshold, stop, out)
        return out

    def bracket(a, b, ok):
        a = np.clip(a, 0, m - 1)
        b = np.clip(b, 0, m - 1)
        return a, b, p[rows, cols[a]], p[rows, cols[b]], ok

    rt = grids.response
    if rt is ResponseType.LOWPASS:
        k = first(zero)                                       # -1 when no point is below the level
        return HalfPowerBrackets(*bracket(k - 1, k, k > 0))
    if rt is ResponseType.HIGHPASS:
        k = last(top)
        return HalfPowerBrackets(*bracket(k, k + 1, (k >= 0) & (k < m - 1)))
    if rt is ResponseType.BANDPASS:
        kp = np.argmax(p[:, cols], axis=1)                    # the peak; the edges below it on either side
        lo, hi = last(kp - 1), first(kp + 1)
        parts = (bracket(lo, lo + 1, lo >= 0), bracket(hi - 1, hi, hi > 0))
    else:
        k0, k1 = first(zero), last(top)
        ok = (k0 > 0) & (k1 < m - 1)                          # k0 > 0 implies a point below, so k1 >= 0
        parts = (bracket(k0 - 1, k0, ok), bracket(k1, k1 + 1, ok))
    return HalfPowerBrackets(*(np.stack([x, y], axis=1) for x, y in zip(*parts)))


def interpolated_f3db(brackets: HalfPowerBrackets, ref_db: np.ndarray, grids: Grids) -> np.ndarray:
    """3 dB frequencies (Hz) from the brackets: the half-power level interpolated linearly in dB between the
    bracketing points in log frequency; NaN where no crossing was found.  Element by element: the same bits
    whether the trials come in one array or chunk by chunk."""
    f = grids.metric_hz[positive_columns(grids)]
    level = ref_db - HALF_POWER_DB
    if brackets.lower.ndim == 2:
        level = level[:, None]
    out = _interp(f[brackets.lower], f[brackets.upper], db(brackets.p_lower), db(brackets.p_upper),
                  np.broadcast_to(level, brackets.lower.shape))
    return np.where(brackets.found, out, np.nan)


def f3db(p: np.ndarray, ref_db: np.ndarray, grids: Grids, layout: np.ndarray | None = None) -> np.ndarray:
    """3 dB frequencies (Hz) per trial: (Tc,) for lowpass/highpass, (Tc, 2) for band responses; NaN when absent.

    ``p`` (Tc, M) are the powers of the metric points (``layout`` as in :func:`reference_power`), ``ref_db``
    (Tc,) the reference gains; a point is below the half-power level when
    ``p < 10^((ref_db - 10 log10 2)/10)``: lowpass, the first such point; highpass, the last; bandpass,
    the nearest on either side of the peak; bandstop, the first and the last.  The crossing is
    interpolated in dB (:func:`interpolated_f3db`).
    """
    return interpolated_f3db(half_power_brackets(p, ref_db, grids, layout), ref_db, grids)


def ripple(p: np.ndarray, grids: Grids, layout: np.ndarray | None = None) -> np.ndarray | None:
    """Passband ripple (dB) per trial, (Tc,), from the powers ``p`` (Tc, M) of the metric points (``layout`` as
    in :func:`reference_power`); None without a passband."""
    if grids.passband_columns is None:
        return None
    pp = p[:, _metric_columns(grids, grids.passband_columns, layout)]
    return db(pp.max(axis=1)) - db(pp.min(axis=1))


__all__ = ["power", "db", "gain_db", "reference_power", "reference_gain", "f3db", "half_power_brackets",
           "interpolated_f3db", "HalfPowerBrackets", "ripple", "columns",
           "MAGNITUDE_FLOOR", "POWER_FLOOR"]
