"""Percentiles by selection against numpy's sort and percentile; the parts a run computes."""

from __future__ import annotations

import numpy as np
import pytest

from service.tolerance import Outputs
from service.tolerance.statistics import (order_statistics, percentile_ranks, row_percentiles,
                                          sorted_percentiles)
from tests.tolerance.conftest import run_tolerance

from .conftest import GRID


def _rows(n: int, dtype, rng) -> np.ndarray:
    """Rows of several shapes of distribution, ties, extremes and non-finite values."""
    a = rng.standard_normal((16, n)) * np.logspace(-9, 4, 16)[:, None] + rng.uniform(-200, 200, 16)[:, None]
    a[1] = 5.0                                      # constant
    a[2, : n // 2] = 1.0                            # half ties
    a[3] = rng.integers(0, 3, n)                    # few distinct values
    a[4] = rng.lognormal(0.0, 4.0, n)               # lopsided
    if n > 2:
        a[5, 0] = np.nan                            # sorted NaN last, as numpy does
        a[6, 1] = np.inf
        a[7, 0] = -np.inf
        a[8, 0], a[8, 1:] = np.finfo(dtype).tiny / 4, 0.0    # subnormal span
        a[9, 0], a[9, 1] = np.finfo(dtype).max, -np.finfo(dtype).max   # span beyond the range
    return a.astype(dtype)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
@pytest.mark.parametrize("n", [1, 2, 3, 14, 101, 2000, 10000])
def test_order_statistics_are_the_sorted_rows_bit_for_bit(n, dtype):
    # source: numpy.sort (reference library): the selected order statistics are the sorted rows' entries
    rng = np.random.default_rng(n)
    a = _rows(n, dtype, rng)
    ranks = percentile_ranks(n)
    assert np.array_equal(order_statistics(a, ranks), np.sort(a, axis=1)[:, ranks], equal_nan=True)
    all_ranks = np.arange(n) if n <= 101 else np.unique(rng.integers(0, n, 50))
    assert np.array_equal(order_statistics(a, all_ranks, buckets=64, row_block=3),
                          np.sort(a, axis=1)[:, all_ranks], equal_nan=True)
    with np.errstate(invalid="ignore"):
        assert np.array_equal(row_percentiles(a), sorted_percentiles(np.sort(a, axis=1)), equal_nan=True)


def test_row_percentiles_match_numpy_percentile():
    # source: numpy.percentile, method "linear" (reference library) = Hyndman and Fan (1996) definition 7
    rng = np.random.default_rng(3)
    a = rng.standard_normal((40, 10000)).astype(np.float32)
    levels = [0.0, 0.135, 2.5, 50.0, 97.5, 99.865, 100.0]
    expected = np.percentile(a.astype(np.float64), levels, axis=1, method="linear")
    assert np.allclose(row_percentiles(a), expected, rtol=0, atol=1e-12)


def test_ranks_read_by_the_named_levels():
    # h = (n - 1) p: 10,000 trials read ranks 13/14, 249/250, 4999/5000, 9749/9750, 9985/9986 and the ends
    assert percentile_ranks(10000).tolist() == [0, 13, 14, 249, 250, 4999, 5000, 9749, 9750, 9985, 9986, 9999]
    assert percentile_ranks(1).tolist() == [0]


def test_a_reply_without_some_parts_computes_the_same_numbers(butter8_sk, lowpass_mask):
    # csv (percentile table) and svg (magnitude envelope and yield) compute less, never other numbers
    kw = dict(trials=600, seed=5, frequencies_hz=GRID, mask=lowpass_mask)
    full = run_tolerance(butter8_sk, **kw)
    table = run_tolerance(butter8_sk, outputs=Outputs(figures=False, yield_=False, sensitivity=False), **kw)
    figure = run_tolerance(butter8_sk, outputs=Outputs(phase=False, figures=False, sensitivity=False), **kw)
    for part in (table, figure):
        assert np.array_equal(part.magnitude_db, full.magnitude_db)
        assert np.array_equal(part.nominal_magnitude_db, full.nominal_magnitude_db)
        assert part.metrics == {} and part.sensitivity == [] and part.worst_case == [] and part.trials == []
    for key, value in table.table().items():
        assert np.array_equal(value, full.table()[key])
    assert table.yield_ is None
    assert figure.yield_ == full.yield_
    assert np.isnan(figure.phase_deg).all() and np.isnan(figure.group_delay_s).all()
    assert figure.svg().lstrip().startswith(b"<?xml")


def test_reply_lists_pass_through_and_other_values_are_serialized(butter8_sk):
    # the reply's number lists are Python floats already (ndarray.tolist); the schema keeps the grid exact and
    # rounds the figures to 6 significant digits; anything else (numpy scalars, ints) is serialized as floats
    from service.api.formats import round_figure
    from service.api.schemas.tolerance import ToleranceSchema

    r = run_tolerance(butter8_sk, trials=50, frequencies_hz=GRID[::25])
    d = r.as_dict()
    assert all(type(x) is float for x in d["frequency_hz"] + d["magnitude_db_percentiles"]["p50"])
    out = ToleranceSchema().dump(d)
    assert out["frequency_hz"] == d["frequency_hz"]
    assert out["magnitude_db_percentiles"]["p50"] == [round_figure(x) for x in d["magnitude_db_percentiles"]["p50"]]
    mixed = dict(d, frequency_hz=[np.float64(1.5), 2], nominal_magnitude_db=np.array([0.25, -3.0]).tolist())
    mixed["phase_deg_percentiles"] = {"min": [np.float32(1.0), 3]}
    out = ToleranceSchema().dump(mixed)
    assert out["frequency_hz"] == [1.5, 2.0] and all(type(x) is float for x in out["frequency_hz"])
    assert out["phase_deg_percentiles"] == {"min": [1.0, 3.0]}
