"""Nearest preferred values: by ratio (logarithmic distance), vectorized.

"Nearest" is measured by ratio, ``|log(candidate / value)|``, because the
series are geometric: 4.87 lies nearer 4.7 than 5.1 in that sense
(4.87/4.7 = 1.036, 5.1/4.87 = 1.047). This is the sense in which IEC 60063
spaces its values evenly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.components.series import normalize_series, series_mantissas, series_value
from service.errors import InvalidParameter

# Values within this relative distance of a preferred value count as equal to it.
_SAME = 1e-9


@dataclass(frozen=True)
class NearestValues:
    """Preferred values around one value.

    Attributes
    ----------
    value : float
        The value asked about (SI unit of the component).
    series : str
    nearest, below, above : float
        Nearest by ratio; largest value <= ``value``; smallest value >= ``value``.
    nearest_error, below_error, above_error : float
        Relative error ``(preferred - value) / value`` of each.
    """

    value: float
    series: str
    nearest: float
    below: float
    above: float
    nearest_error: float
    below_error: float
    above_error: float


def _check_positive(values: np.ndarray, field: str = "value") -> None:
    if not np.all(np.isfinite(values)) or np.any(values <= 0):
        raise InvalidParameter("a component value must be a finite number greater than zero", field=field)


def _bracket(values: np.ndarray, series: str) -> tuple[np.ndarray, np.ndarray]:
    """Preferred values just below and above each value; shapes like ``values``."""
    mant = np.asarray(series_mantissas(series))
    log_m = np.log10(mant)
    x = np.log10(values)
    decade = np.floor(x).astype(int)
    frac = x - decade
    # index of the largest mantissa <= value (with a little slack for values already preferred)
    idx = np.searchsorted(log_m, frac + np.log10(1 + _SAME), side="right") - 1
    below = series_value(series, idx, decade)
    above = series_value(series, idx + 1, decade)
    same = np.abs(below / values - 1) <= _SAME
    above = np.where(same, below, above)
    return below, above


def nearest_preferred(value: float, series: str) -> NearestValues:
    """Nearest, next-below and next-above preferred values of ``value``.

    Parameters
    ----------
    value : float
        Component value in its SI unit, > 0.
    series : str
        ``"E3"`` ... ``"E192"``.

    Returns
    -------
    NearestValues
    """
    key = normalize_series(series)
    v = np.asarray([value], dtype=float)
    _check_positive(v)
    below, above = _bracket(v, key)
    b, a, x = float(below[0]), float(above[0]), float(v[0])
    nearest = b if np.log(x / b) <= np.log(a / x) else a
    return NearestValues(
        value=x, series=key, nearest=nearest, below=b, above=a,
        nearest_error=(nearest - x) / x, below_error=(b - x) / x, above_error=(a - x) / x,
    )


def snap_to_series(values, series: str) -> np.ndarray:
    """Each value replaced by its nearest preferred value (by ratio).

    Parameters
    ----------
    values : array_like of float, any shape
        Positive values (ohm, farad, ...). NaN passes through as NaN.
    series : str

    Returns
    -------
    ndarray of float, same shape as ``values``
    """
    key = normalize_series(series)
    v = np.asarray(values, dtype=float)
    ok = np.isfinite(v) & (v > 0)
    out = np.full(v.shape, np.nan)
    if ok.any():
        x = v[ok]
        below, above = _bracket(x, key)
        out[ok] = np.where(np.log(x / below) <= np.log(above / x), below, above)
    return out


def snap_to_values(values, allowed) -> np.ndarray:
    """Each value replaced by the nearest (by ratio) entry of ``allowed``.

    Parameters
    ----------
    values : array_like of float, any shape
        NaN passes through as NaN.
    allowed : array_like of float, shape (M,)
        Positive values, any order, M >= 1 (e.g. a stock list).

    Returns
    -------
    ndarray of float, same shape as ``values``
    """
    allowed = np.unique(np.asarray(allowed, dtype=float))
    if allowed.size == 0:
        raise InvalidParameter("the list of allowed values is empty", field="stock")
    _check_positive(allowed, field="stock")
    v = np.asarray(values, dtype=float)
    out = np.full(v.shape, np.nan)
    ok = np.isfinite(v) & (v > 0)
    if ok.any():
        x = np.log(v[ok])
        la = np.log(allowed)
        hi = np.clip(np.searchsorted(la, x), 1, max(allowed.size - 1, 1))
        lo = hi - 1
        if allowed.size == 1:
            out[ok] = allowed[0]
        else:
            pick = np.where(np.abs(x - la[lo]) <= np.abs(la[hi] - x), lo, hi)
            out[ok] = allowed[pick]
    return out
