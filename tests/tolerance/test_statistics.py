"""Percentiles by selection against numpy's sort and percentile; the parts a run computes."""

from __future__ import annotations

import numpy as np
import pytest

from service.tolerance import Outputs
from service.tolerance.statistics import (column_order_statistics, column_percentiles, percentile_ranks,
                                          row_percentiles, sorted_percentiles)
from tests.tolerance.conftest import run_tolerance

from .conftest import GRID

#: numpy.percentile's "linear" method is Hyndman and Fan (1996) definition 7, the levels' definition.
LEVELS = [0.0, 0.135, 2.5, 50.0, 97.5, 99.865, 100.0]


def _columns(n: int, f: int, dtype, rng) -> np.ndarray:
    """(n, f) trials of columns shaped like Monte Carlo figures (normal, per-column mean and spread) with
    the awkward ones mixed in: lopsided, constant, ties, few distinct values, subnormal, NaN, infinities,
    spans beyond the range, -0.0 against 0.0, and values from 1e-30 to 1e30."""
    x = rng.standard_normal((n, f)) * np.logspace(-3, 2, f) + np.linspace(-80, 40, f)
    odd = [
        lambda: rng.lognormal(0.0, 2.0, n),                                   # lopsided
        lambda: np.full(n, 5.0),                                              # constant
        lambda: np.where(rng.random(n) < 0.5, 1.0, rng.standard_normal(n)),   # half ties
        lambda: rng.integers(0, 3, n).astype(float),                          # few distinct values
        lambda: np.where(rng.random(n) < 0.5, 0.0, -0.0),                     # signed zeros
        lambda: np.where(rng.random(n) < 0.1, np.finfo(dtype).tiny / 4, 0.0), # subnormal span
        lambda: np.where(rng.random(n) < 0.01, np.nan, rng.standard_normal(n)),
        lambda: np.where(rng.random(n) < 0.01, np.inf, rng.standard_normal(n)),
        lambda: np.where(rng.random(n) < 0.01, -np.inf, rng.standard_normal(n)),
        lambda: np.full(n, np.nan),
        lambda: rng.choice([np.finfo(dtype).max, -np.finfo(dtype).max, 0.0], n),   # span beyond the range
        lambda: np.sign(rng.standard_normal(n)) * 10.0 ** rng.uniform(-30, 30, n),  # 1e-30 .. 1e30
        lambda: rng.uniform(0, 1, n) ** 8,                                    # piled up against 0
        lambda: rng.standard_t(2, n),                                         # heavy tails
    ]
    for j, make in enumerate(odd[:max(0, f - 2)]):
        x[:, 1 + 3 * j % max(1, f - 1)] = make()
    return x.astype(dtype)


def _ranks(n: int, rng) -> list[np.ndarray]:
    """The named levels' ranks, every rank of a short column, and a scatter of ranks (unsorted, repeated)."""
    out = [percentile_ranks(n)]
    out.append(np.arange(n) if n <= 100 else rng.integers(0, n, 40))
    return out


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
@pytest.mark.parametrize("n, f", [(1, 1), (2, 5), (3, 7), (7, 3), (100, 40), (3000, 17), (10000, 1),
                                  (10000, 64), (10000, 600), (20000, 40)])
def test_column_order_statistics_are_the_sorted_columns_bit_for_bit(n, f, dtype):
    # source: numpy.sort (reference library): the selected order statistics are the sorted columns' rows
    rng = np.random.default_rng(n * 1000 + f)
    x = _columns(n, f, dtype, rng)
    expected = np.sort(x, axis=0)
    for ranks in _ranks(n, rng):
        got = column_order_statistics(x, ranks)
        assert got.dtype == x.dtype and got.shape == (len(ranks), f)
        assert np.array_equal(got, expected[ranks], equal_nan=True)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
@pytest.mark.parametrize("layout", ["trial-major", "column-major"])
def test_every_path_of_the_selection_gives_the_sorted_bits(monkeypatch, dtype, layout):
    # small slabs with a ragged end and a transposition step that does not divide the trials (trial-major),
    # or the columns read in place (column-major)
    # source: numpy.sort (reference library)
    import service.tolerance.statistics as st

    monkeypatch.setattr(st, "SLAB_VALUES", 7 * 10007)
    monkeypatch.setattr(st, "TRANSPOSE_ROWS", 300)
    rng = np.random.default_rng(11)
    x = _columns(10007, 20, dtype, rng)
    if layout == "column-major":
        x = np.asfortranarray(x)
    expected = np.sort(x, axis=0)
    for ranks in (percentile_ranks(10007), rng.integers(0, 10007, 30), np.array([0, 1, 5000, 10005, 10006])):
        assert np.array_equal(column_order_statistics(x, ranks), expected[ranks], equal_nan=True)


def test_any_trial_order_gives_the_same_bits():
    # sorted, reversed or clustered trials: the same order statistics
    # source: numpy.sort (reference library)
    rng = np.random.default_rng(8)
    x = _columns(6000, 50, np.float32, rng)
    ranks = percentile_ranks(6000)
    expected = np.sort(x, axis=0)[ranks]
    for arranged in (np.sort(x, axis=0), np.sort(x, axis=0)[::-1], np.roll(np.sort(x, axis=0), 2500, axis=0)):
        assert np.array_equal(column_order_statistics(arranged, ranks), expected, equal_nan=True)


def test_column_percentiles_equal_the_sorted_percentiles_bit_for_bit():
    # source: numpy.sort (reference library), then the same interpolation as sorted_percentiles
    rng = np.random.default_rng(4)
    for n, f in ((1, 3), (2, 3), (137, 20), (10000, 501)):
        x = _columns(n, f, np.float32, rng)[:, 2 * (f > 20):]    # without the NaN columns
        x = x[:, np.isfinite(x).all(axis=0)]
        with np.errstate(invalid="ignore", over="ignore"):
            assert np.array_equal(column_percentiles(x), sorted_percentiles(np.sort(x, axis=0).T))


def test_column_percentiles_match_numpy_percentile():
    # source: numpy.percentile, method "linear" (reference library) = Hyndman and Fan (1996) definition 7
    rng = np.random.default_rng(3)
    x = (rng.standard_normal((10000, 300)) * np.linspace(0.1, 3, 300) - np.linspace(0, 60, 300)).astype(np.float32)
    x[:, 5] = rng.lognormal(0.0, 1.0, 10000)
    expected = np.percentile(x.astype(np.float64), LEVELS, axis=0, method="linear")
    assert np.allclose(column_percentiles(x), expected, rtol=0, atol=1e-12)


def test_row_percentiles_are_the_column_percentiles_of_the_transpose():
    rng = np.random.default_rng(5)
    rows = rng.standard_normal((30, 4000)).astype(np.float32)
    assert np.array_equal(row_percentiles(rows), column_percentiles(rows.T.copy()))


def test_working_memory_stays_below_one_copy_of_the_store():
    # no copy of a whole (10000, 501) float32 store (20 MB), let alone an int64 one: the columns are copied
    # a slab at a time and selected slab by slab
    import tracemalloc

    rng = np.random.default_rng(6)
    x = (rng.standard_normal((10000, 501)) * np.linspace(0.1, 3, 501)).astype(np.float32)
    tracemalloc.start()
    column_percentiles(x)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < x.nbytes


def test_bad_ranks_are_refused():
    x = np.zeros((10, 3), dtype=np.float32)
    with pytest.raises(ValueError):
        column_order_statistics(x, [10])
    with pytest.raises(ValueError):
        column_order_statistics(x[0], [0])


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
