"""Preferred-number series against IEC 60063 (service/components)."""

from __future__ import annotations

import numpy as np
import pytest

from service.components import (
    SERIES, UnknownSeries, nearest_preferred, series_mantissas, series_values_in_range,
    snap_to_series, snap_to_values,
)
from service.errors import InvalidParameter

# source: IEC 60063:2015, Table 1 (E3, E6, E12, E24; values with two significant figures)
IEC_E24 = [1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
           3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1]
IEC_E12 = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2]
IEC_E6 = [1.0, 1.5, 2.2, 3.3, 4.7, 6.8]
IEC_E3 = [1.0, 2.2, 4.7]
# source: IEC 60063:2015, Table 2 (E48, E96, E192; three significant figures)
IEC_E96 = [
    1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, 1.33, 1.37, 1.40, 1.43,
    1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, 1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10,
    2.15, 2.21, 2.26, 2.32, 2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
    3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12, 4.22, 4.32, 4.42, 4.53,
    4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49, 5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65,
    6.81, 6.98, 7.15, 7.32, 7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
]
IEC_E192_LAST_DECADE_TAIL = [8.87, 8.98, 9.09, 9.20, 9.31, 9.42, 9.53, 9.65, 9.76, 9.88]


@pytest.mark.parametrize("name, listed", [("E3", IEC_E3), ("E6", IEC_E6), ("E12", IEC_E12),
                                          ("E24", IEC_E24), ("E96", IEC_E96)])
def test_series_equal_the_standard_tables(name, listed):
    assert list(series_mantissas(name)) == listed


def test_e24_lists_values_that_differ_from_the_rounded_formula():
    # source: IEC 60063:2015, Table 1 — these eight values are not round(10**(i/24), 1)
    formula = [round(10 ** (i / 24), 1) for i in range(24)]
    differing = sorted(v for v, f in zip(series_mantissas("E24"), formula) if v != f)
    assert differing == [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2]


def test_e192_lists_9_20_not_the_formula_9_19():
    # source: IEC 60063:2015, Table 2 (the one E192 value that departs from the rounded formula)
    e192 = series_mantissas("E192")
    assert len(e192) == 192
    assert list(e192[-10:]) == IEC_E192_LAST_DECADE_TAIL
    assert 9.19 not in e192


def test_each_series_contains_the_coarser_ones_of_its_family():
    # source: IEC 60063:2015, clause 4 (E(n) contains every other value of E(2n))
    for fine, coarse in [("E6", "E3"), ("E12", "E6"), ("E24", "E12"), ("E96", "E48"), ("E192", "E96")]:
        assert set(series_mantissas(coarse)) <= set(series_mantissas(fine))
    assert len(series_mantissas("E48")) == 48


@pytest.mark.parametrize("value, series, nearest, below, above", [
    (4870.0, "E24", 4700.0, 4700.0, 5100.0),
    (9.2, "E192", 9.2, 9.2, 9.2),
    (9.19, "E192", 9.2, 9.09, 9.2),
    (1.0e-9, "E12", 1.0e-9, 1.0e-9, 1.0e-9),
    (9.9e-9, "E12", 1.0e-8, 8.2e-9, 1.0e-8),    # wraps into the next decade
    (10037.2, "E96", 10000.0, 10000.0, 10200.0),
    (3.05, "E24", 3.0, 3.0, 3.3),
])
def test_nearest_below_above(value, series, nearest, below, above):
    found = nearest_preferred(value, series)
    assert (found.nearest, found.below, found.above) == (nearest, below, above)
    assert found.nearest_error == pytest.approx((nearest - value) / value)


def test_nearest_is_by_ratio_not_by_difference():
    # 1.45 lies nearer 1.5 by difference (0.05 vs 0.25) and by ratio (1.034 vs 1.208):
    # 1.2 * 1.5 = 1.8, so the ratio midpoint between 1.2 and 1.5 is sqrt(1.8) = 1.3416
    assert nearest_preferred(1.34, "E12").nearest == 1.2
    assert nearest_preferred(1.35, "E12").nearest == 1.5   # arithmetic midpoint 1.35 would tie


def test_snap_vectorized_agrees_with_scalar_lookup():
    rng = np.random.default_rng(1)
    values = 10 ** rng.uniform(-12, 7, size=500)
    snapped = snap_to_series(values, "E96")
    assert np.array_equal(snapped, [nearest_preferred(v, "E96").nearest for v in values])


def test_snap_passes_nan_and_uses_lists():
    out = snap_to_series(np.array([np.nan, 4870.0]), "E24")
    assert np.isnan(out[0]) and out[1] == 4700.0
    assert list(snap_to_values([3.0, 50.0, 0.1], [1.0, 10.0, 100.0])) == [1.0, 100.0, 1.0]


def test_values_in_range_span_decades():
    v = series_values_in_range("E12", 100e-12, 1e-9)
    assert v[0] == 100e-12 and v[-1] == 1e-9 and len(v) == 13
    assert series_values_in_range("E6", 5.0, 6.0).size == 0


def test_bad_input_is_named():
    with pytest.raises(UnknownSeries, match="E13"):
        series_mantissas("E13")
    with pytest.raises(InvalidParameter):
        nearest_preferred(-1.0, "E24")
    with pytest.raises(InvalidParameter):
        series_values_in_range("E12", 2.0, 1.0)
    assert set(SERIES) == {"E3", "E6", "E12", "E24", "E48", "E96", "E192"}
