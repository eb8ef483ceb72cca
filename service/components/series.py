"""IEC 60063 preferred-number series E3 ... E192.

The values are the ones the standard *lists*, not the rounded formula
``10**(i/n)``: for E3 to E24 eight of the listed values differ from the
rounded formula (E24 lists 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2), and
E192 lists 9.20 where the formula rounds to 9.19.

References
----------
.. [1] IEC 60063:2015, "Preferred number series for resistors and
       capacitors", Tables 1-3 (E3-E24 with two significant figures,
       E48-E192 with three).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from service.errors import InvalidParameter

#: Series names, scarcest first.
SERIES: tuple[str, ...] = ("E3", "E6", "E12", "E24", "E48", "E96", "E192")

_E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
        3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)


def _three_figure_series(n: int) -> tuple[float, ...]:
    """E48/E96/E192: 10**(i/n) rounded to three significant figures [1]_.

    The one value the standard lists differently from the rounded formula is
    E192's 9.20 (the formula gives 9.19).
    """
    values = [round(10 ** (i / n), 2) for i in range(n)]
    if n == 192:
        values[values.index(9.19)] = 9.20
    return tuple(values)


_LISTED: dict[str, tuple[float, ...]] = {
    "E3": (1.0, 2.2, 4.7),
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": _E24,
    "E48": _three_figure_series(48),
    "E96": _three_figure_series(96),
    "E192": _three_figure_series(192),
}

#: Relative tolerance the standard associates with each series (for defaults).
SERIES_TOLERANCE: dict[str, float] = {
    "E3": 0.4, "E6": 0.2, "E12": 0.1, "E24": 0.05, "E48": 0.02, "E96": 0.01, "E192": 0.005,
}


class UnknownSeries(InvalidParameter):
    """The series name is not one of :data:`SERIES`."""


def normalize_series(name: str) -> str:
    """Return the canonical series name (``"e96"`` -> ``"E96"``) or raise :class:`UnknownSeries`."""
    key = str(name).strip().upper()
    if key not in _LISTED:
        raise UnknownSeries(
            f"unknown series {name!r}: expected one of {', '.join(SERIES)} (IEC 60063)",
            field="series",
        )
    return key


def series_mantissas(name: str) -> tuple[float, ...]:
    """The listed values of one decade of a series, ascending, in [1, 10).

    Parameters
    ----------
    name : str
        ``"E3"`` ... ``"E192"`` (case-insensitive).

    Returns
    -------
    tuple of float
        ``n`` values for series ``En``.
    """
    return _LISTED[normalize_series(name)]


_DECADE_MIN, _DECADE_MAX = -30, 20


@lru_cache(maxsize=16)
def decade_table(name: str) -> np.ndarray:
    """Every value of a series from 1e-30 to 1e20 as the float its decimal spelling names.

    Returns
    -------
    ndarray of float, shape (51, n)
        Row ``d + 30`` holds ``mantissa * 10**d`` for the ``n`` mantissas, each
        built as ``float("4.7e-9")`` (correctly rounded) rather than by
        multiplying, which can give 8.199999999999999e-09 for 8.2 nF.
    """
    mant = _LISTED[normalize_series(name)]
    table = np.array([[float(f"{m!r}e{d}") for m in mant] for d in range(_DECADE_MIN, _DECADE_MAX + 1)])
    table.setflags(write=False)
    return table


def series_value(name: str, index: np.ndarray, decade: np.ndarray) -> np.ndarray:
    """Value of mantissa ``index`` in ``decade`` of series ``name``, vectorized.

    Parameters
    ----------
    name : str
    index : ndarray of int, shape (N,)
        Position in :func:`series_mantissas`; ``n`` means the next decade's 1.0.
    decade : ndarray of int, shape (N,)
        Power of ten, -30 ... 19.

    Returns
    -------
    ndarray of float, shape (N,)
    """
    table = decade_table(name)
    index = np.asarray(index, dtype=int)
    decade = np.asarray(decade, dtype=int)
    wrap = index >= table.shape[1]
    index = np.where(wrap, 0, index)
    decade = np.clip(decade + wrap, _DECADE_MIN, _DECADE_MAX)
    return table[decade - _DECADE_MIN, index]


@lru_cache(maxsize=256)
def _values_in_range(name: str, low: float, high: float) -> np.ndarray:
    table = decade_table(name)
    first = max(int(np.floor(np.log10(low))) - 1, _DECADE_MIN)
    last = min(int(np.floor(np.log10(high))) + 1, _DECADE_MAX)
    values = table[first - _DECADE_MIN:last - _DECADE_MIN + 1].ravel()
    slack = 1e-9
    keep = (values >= low * (1 - slack)) & (values <= high * (1 + slack))
    out = values[keep]
    out.setflags(write=False)
    return out


def series_values_in_range(name: str, low: float, high: float) -> np.ndarray:
    """Every value of a series between ``low`` and ``high`` (inclusive), ascending.

    Parameters
    ----------
    name : str
        Series name, ``"E3"`` ... ``"E192"``.
    low, high : float
        Range in the component's SI unit (ohm, farad, ...), ``0 < low <= high``.

    Returns
    -------
    ndarray of float, shape (M,)
        Read-only; empty when no value of the series falls in the range.
    """
    key = normalize_series(name)
    if not (np.isfinite(low) and np.isfinite(high) and 0 < low <= high):
        raise InvalidParameter(
            f"range must satisfy 0 < low <= high, got [{low!r}, {high!r}]", field="range"
        )
    return _values_in_range(key, float(low), float(high))
