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

import numpy as np

from service.approximation.types import ResponseType
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


def f3db(p: np.ndarray, ref_db: np.ndarray, grids: Grids, layout: np.ndarray | None = None) -> np.ndarray:
    """3 dB frequencies (Hz) per trial: (Tc,) for lowpass/highpass, (Tc, 2) for band responses; NaN when absent.

    ``p`` (Tc, M) are the powers of the metric points (``layout`` as in :func:`reference_power`), ``ref_db``
    (Tc,) the reference gains; a point is below the half-power level when
    ``p < 10^((ref_db - 10 log10 2)/10)``, and the crossing is interpolated in dB.
    """
    pos = positive_columns(grids)
    f = grids.metric_hz[pos]
    level = (ref_db - HALF_POWER_DB)[:, None]
    threshold = 10.0 ** (level / 10.0)
    if layout is None:
        pp = p[:, pos]
        below = pp < threshold
        cols = None
    else:
        cols = layout[pos]                                    # column of p of each positive metric point
        below = (p < threshold)[:, cols]                      # compared in place, reordered as bytes
    tc, m = below.shape
    rows = np.arange(tc)
    idx = np.arange(m)[None, :]

    def value(k):
        """Power of each row's positive metric point ``k`` (Tc,)."""
        return pp[rows, k] if cols is None else p[rows, cols[k]]

    def first(sel):
        """Column of each row's first True, -1 when none (one pass: argmax, then the found entry read back)."""
        k = np.argmax(sel, axis=1)
        return np.where(sel[rows, k], k, -1)

    def last(sel):
        k = m - 1 - np.argmax(sel[:, ::-1], axis=1)
        return np.where(sel[rows, k], k, -1)

    def cross(a, b, ok):
        a = np.clip(a, 0, m - 1)
        b = np.clip(b, 0, m - 1)
        out = _interp(f[a], f[b], db(value(a)), db(value(b)), level[:, 0])
        return np.where(ok, out, np.nan)

    rt = grids.response
    if rt is ResponseType.LOWPASS:
        k = first(below)                                      # -1 when no point is below the level
        return cross(k - 1, k, k > 0)
    if rt is ResponseType.HIGHPASS:
        k = last(below)
        return cross(k, k + 1, (k >= 0) & (k < m - 1))
    if rt is ResponseType.BANDPASS:
        kp = np.argmax(p[:, pos] if cols is None else p[:, cols], axis=1)[:, None]
        lo = last(below & (idx < kp))
        hi = first(below & (idx > kp))
        return np.stack([cross(lo, lo + 1, lo >= 0), cross(hi - 1, hi, hi > 0)], axis=1)
    k0, k1 = first(below), last(below)
    ok = (k0 > 0) & (k1 < m - 1)                              # k0 > 0 implies a point below, so k1 >= 0
    return np.stack([cross(k0 - 1, k0, ok), cross(k1, k1 + 1, ok)], axis=1)


def ripple(p: np.ndarray, grids: Grids, layout: np.ndarray | None = None) -> np.ndarray | None:
    """Passband ripple (dB) per trial, (Tc,), from the powers ``p`` (Tc, M) of the metric points (``layout`` as
    in :func:`reference_power`); None without a passband."""
    if grids.passband_columns is None:
        return None
    pp = p[:, _metric_columns(grids, grids.passband_columns, layout)]
    return db(pp.max(axis=1)) - db(pp.min(axis=1))


__all__ = ["power", "db", "gain_db", "reference_power", "reference_gain", "f3db", "ripple", "columns",
           "MAGNITUDE_FLOOR", "POWER_FLOOR"]
