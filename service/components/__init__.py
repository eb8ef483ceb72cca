"""Preferred-number series (IEC 60063) and value snapping.

Public surface: :data:`SERIES`, :func:`series_mantissas`,
:func:`series_values_in_range`, :func:`nearest_preferred`,
:func:`snap_to_series`, :func:`snap_to_values`, :class:`NearestValues`,
:class:`UnknownSeries`.
"""

from service.components.nearest import NearestValues, nearest_preferred, snap_to_series, snap_to_values
from service.components.series import (
    SERIES,
    SERIES_TOLERANCE,
    UnknownSeries,
    normalize_series,
    series_mantissas,
    series_values_in_range,
)

__all__ = [
    "SERIES", "SERIES_TOLERANCE", "NearestValues", "UnknownSeries", "nearest_preferred",
    "normalize_series", "series_mantissas", "series_values_in_range", "snap_to_series", "snap_to_values",
]
