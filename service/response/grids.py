"""Frequency and time grids of a response request, with their size limits.

The limits are passed in by the caller (the api layer reads them from
:mod:`service.config`); the defaults equal the configured defaults.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.errors import LimitExceeded
from service.response.errors import InvalidGrid

DEFAULT_MAX_FREQUENCY_POINTS = 10_000
DEFAULT_MAX_TIME_POINTS = 10_000
#: Most points of an automatic time grid (a step response is smooth; the
#: metrics are refined on the exact continuous response between samples).
AUTOMATIC_TIME_POINTS = 2_000
MIN_AUTOMATIC_TIME_POINTS = 200


def _check_points(points: int, limit: int, *, what: str, limit_name: str, setting: str, field: str) -> None:
    if points > limit:
        raise LimitExceeded(
            f"{field}: {points} {what} points requested, at most {limit} allowed",
            limit=limit_name, value=limit, setting=setting, field=field)


@dataclass(frozen=True)
class FrequencyGrid:
    """Evenly spaced frequencies (Hz) from ``start_hz`` to ``stop_hz`` inclusive.

    Parameters
    ----------
    start_hz, stop_hz : float
        Ends in Hz; ``start_hz > 0`` for log spacing, >= 0 for linear.
    points : int
        Number of points (>= 2).
    spacing : {"log", "linear"}
    """

    start_hz: float
    stop_hz: float
    points: int
    spacing: str = "log"

    def __post_init__(self):
        if self.spacing not in ("log", "linear"):
            raise InvalidGrid("spacing must be 'log' or 'linear'", field="spacing")
        if isinstance(self.points, bool) or int(self.points) != self.points or self.points < 2:
            raise InvalidGrid("points must be an integer >= 2", field="points")
        s, e = float(self.start_hz), float(self.stop_hz)
        if not (math.isfinite(s) and math.isfinite(e)):
            raise InvalidGrid("start_hz and stop_hz must be finite", field="start_hz")
        if self.spacing == "log" and s <= 0:
            raise InvalidGrid("start_hz must be > 0 for log spacing", field="start_hz")
        if s < 0:
            raise InvalidGrid("start_hz must be >= 0", field="start_hz")
        if not e > s:
            raise InvalidGrid("stop_hz must be above start_hz", field="stop_hz")

    def frequencies(self, max_points: int = DEFAULT_MAX_FREQUENCY_POINTS) -> np.ndarray:
        """The grid, float64 array of shape (points,), Hz."""
        _check_points(int(self.points), max_points, what="frequency", limit_name="max_frequency_points",
                      setting="ROLLOFF_MAX_FREQUENCY_POINTS", field="points")
        if self.spacing == "log":
            return np.geomspace(self.start_hz, self.stop_hz, int(self.points))
        return np.linspace(self.start_hz, self.stop_hz, int(self.points))


def resolve_frequencies(frequencies, max_points: int = DEFAULT_MAX_FREQUENCY_POINTS) -> np.ndarray:
    """A :class:`FrequencyGrid` or an explicit sequence -> float64 array (Hz).

    An explicit list must be finite, >= 0 and strictly increasing.

    Raises
    ------
    InvalidGrid, LimitExceeded
    """
    if isinstance(frequencies, FrequencyGrid):
        return frequencies.frequencies(max_points)
    try:
        f = np.asarray(frequencies, dtype=float)
    except (TypeError, ValueError):
        raise InvalidGrid("frequency_hz must be a list of numbers (Hz)", field="frequency_hz") from None
    if f.ndim != 1 or f.size == 0:
        raise InvalidGrid("frequency_hz must be a non-empty list of numbers (Hz)", field="frequency_hz")
    _check_points(f.size, max_points, what="frequency", limit_name="max_frequency_points",
                  setting="ROLLOFF_MAX_FREQUENCY_POINTS", field="frequency_hz")
    if not np.all(np.isfinite(f)) or np.any(f < 0):
        raise InvalidGrid("frequency_hz must be finite frequencies >= 0 (Hz)", field="frequency_hz")
    if f.size > 1 and np.any(np.diff(f) <= 0):
        raise InvalidGrid("frequency_hz must be strictly increasing", field="frequency_hz")
    return f


@dataclass(frozen=True)
class TimeGrid:
    """Uniform time grid from 0 (s) for step and impulse responses.

    Parameters
    ----------
    stop_s : float, optional
        End time (s). None: automatic, long enough for the slowest pole's
        mode to decay by ~1e-5.
    points : int, optional
        Number of samples (>= 2). None: automatic, resolving the fastest
        pole, at most :data:`AUTOMATIC_TIME_POINTS`.
    """

    stop_s: float | None = None
    points: int | None = None

    def __post_init__(self):
        if self.stop_s is not None and not (math.isfinite(self.stop_s) and self.stop_s > 0):
            raise InvalidGrid("stop_s must be a positive time (s)", field="stop_s")
        if self.points is not None and (isinstance(self.points, bool) or int(self.points) != self.points
                                        or self.points < 2):
            raise InvalidGrid("time points must be an integer >= 2", field="time_points")

    def times(self, auto_stop_s: float, auto_dt_s: float, max_points: int = DEFAULT_MAX_TIME_POINTS,
              automatic_points: int = AUTOMATIC_TIME_POINTS) -> np.ndarray:
        """The grid (s), float64 of shape (N,), given the automatic span and step."""
        stop = float(self.stop_s) if self.stop_s is not None else auto_stop_s
        if self.points is not None:
            n = int(self.points)
            _check_points(n, max_points, what="time", limit_name="max_time_points",
                          setting="ROLLOFF_MAX_TIME_POINTS", field="time_points")
        else:
            n = int(math.ceil(stop / auto_dt_s)) + 1
            n = max(min(n, automatic_points, max_points), min(MIN_AUTOMATIC_TIME_POINTS, max_points))
        return np.linspace(0.0, stop, max(n, 2))
