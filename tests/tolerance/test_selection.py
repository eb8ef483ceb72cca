"""The compiled row order-statistic selection against numpy's sort, bit for bit, on awkward rows."""

from __future__ import annotations

import numpy as np
import pytest

from service.tolerance import selection
from service.tolerance.selection import row_order_statistics
from service.tolerance.statistics import column_percentiles, percentile_ranks, row_percentiles, sorted_percentiles

#: numpy.percentile's "linear" method is Hyndman and Fan (1996) definition 7, the levels' definition.
LEVELS = [0.0, 0.135, 2.5, 50.0, 97.5, 99.865, 100.0]


def _assert_sorted_bits(got: np.ndarray, x: np.ndarray, ranks: np.ndarray) -> None:
    """``got`` is ``np.sort(x, axis=1)[:, ranks]`` (source: numpy.sort, the reference library): equal values
    (NaN equal to NaN), and the same bits wherever the value is not a zero (equal zeros may differ in sign,
    as they may in two sorts of the same row)."""
    ref = np.sort(x, axis=1)[:, ranks]
    assert got.dtype == x.dtype and got.shape == ref.shape
    assert np.array_equal(got, ref, equal_nan=True)
    bits = {4: np.uint32, 8: np.uint64}[x.dtype.itemsize]
    nonzero = ref != 0
    assert np.array_equal(got.view(bits)[nonzero], ref.view(bits)[nonzero])


def _cases(dtype, rng) -> dict[str, np.ndarray]:
    """Rows of 10,000 values (one row per case a Monte Carlo store may hold) and short rows."""
    n = 10000
    big = np.finfo(dtype).max
    cases = {
        "normal, spreads 1e-3 .. 1e2": rng.standard_normal((32, n)) * np.logspace(-3, 2, 32)[:, None],
        "ties (few distinct values)": rng.integers(0, 7, (16, n)),
        "ties (rounded normal)": np.round(rng.standard_normal((16, n)) * 20),
        "constant": np.full((4, n), 3.25),
        "subnormal span": rng.integers(0, 5, (8, n)) * float(np.finfo(dtype).smallest_subnormal),
        "span past the range": rng.choice(np.array([-big, big, 0.0, 1.0]), (8, n)),
        "values 1e-30 .. 1e30": np.sign(rng.standard_normal((8, n))) * 10.0 ** rng.uniform(-30, 30, (8, n)),
        "heavy tails": rng.standard_t(2, (8, n)),
    }
    lop = rng.lognormal(0.0, 3.0, (16, n))
    lop[::4, 0] = 1e30 if dtype == np.float32 else 1e300    # one outlier: nearly every value in bucket 0
    lop[1::4, :9000] = 5.0                                  # 90 % of a row equal
    lop[2::4] = rng.uniform(0, 1, n) ** 12                  # piled up against 0
    cases["lopsided"] = lop
    nan = rng.standard_normal((12, n))
    nan[::3, rng.integers(0, n, 5)] = np.nan
    nan[1::3, :] = np.nan
    cases["NaN rows"] = nan
    inf = rng.standard_normal((8, n))
    inf[::2, 7] = np.inf
    inf[1::4, 9] = -np.inf
    inf[3, :] = np.inf
    cases["infinities"] = inf
    zeros = np.where(rng.random((4, n)) < 0.5, 0.0, -0.0)
    zeros[2:, 17] = 1.0
    cases["signed zeros"] = zeros
    for small in (1, 2, 3, 17):
        cases[f"n = {small}"] = rng.standard_normal((10, small))
    cases["n = 17 with ties"] = rng.integers(0, 3, (10, 17))
    return {k: np.ascontiguousarray(v, dtype=dtype) for k, v in cases.items()}


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_row_order_statistics_are_the_sorted_rows_bit_for_bit(dtype):
    # source: numpy.sort (reference library)
    rng = np.random.default_rng(7)
    for x in _cases(dtype, rng).values():
        n = x.shape[1]
        every = np.arange(n) if n <= 17 else rng.integers(0, n, 40)   # unsorted, repeated ranks
        for ranks in (percentile_ranks(n), every):
            with np.errstate(invalid="ignore", over="ignore"):
                _assert_sorted_bits(row_order_statistics(x, ranks), x, ranks)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
@pytest.mark.parametrize("buckets", [2, 4, 1024, 65536])
def test_any_number_of_buckets_gives_the_sorted_bits(dtype, buckets):
    # few buckets: thousands of values in each wanted bucket; many: most buckets empty
    # source: numpy.sort (reference library)
    rng = np.random.default_rng(buckets)
    x = np.concatenate([_cases(dtype, rng)[k] for k in ("normal, spreads 1e-3 .. 1e2", "lopsided",
                                                         "ties (rounded normal)")])
    for ranks in (percentile_ranks(x.shape[1]), np.array([0, 1, 2, 4999, 5000, 9997, 9998, 9999])):
        _assert_sorted_bits(row_order_statistics(x, ranks, buckets=buckets), x, ranks)


def test_the_kernel_selects_finite_rows_and_leaves_the_others_to_the_sort():
    # the compiled path is taken for finite rows (not everything handed to np.sort), the others flagged
    rng = np.random.default_rng(9)
    x = rng.standard_normal((6, 1000)).astype(np.float32)
    x[1, 3] = np.nan
    x[2, 4] = np.inf
    x[3] = rng.choice(np.array([-3e38, 3e38], dtype=np.float32), 1000)      # span past float32's range
    x[4] = rng.integers(0, 3, 1000) * np.float32(1e-45)                       # subnormal span: scale overflows
    ranks = percentile_ranks(1000).astype(np.int64)
    out = np.full((6, ranks.size), -1.0, dtype=np.float32)
    flagged = np.empty(6, dtype=np.bool_)
    selection._row_order_statistics(x, ranks, selection.BUCKETS, out, flagged)
    assert flagged.tolist() == [False, True, True, True, True, False]
    expected = np.sort(x, axis=1)[:, ranks]
    assert np.array_equal(out[[0, 5]], expected[[0, 5]])


def test_other_layouts_and_types_are_accepted():
    # a strided view, a read-only array, integers (as float64): the same as numpy's sort of the same values
    rng = np.random.default_rng(10)
    x = rng.standard_normal((40, 3001)).astype(np.float32)
    ranks = percentile_ranks(1500)
    view = x[::2, ::2]
    _assert_sorted_bits(row_order_statistics(view, ranks), np.ascontiguousarray(view), ranks)
    frozen = x.copy()
    frozen.flags.writeable = False
    _assert_sorted_bits(row_order_statistics(frozen, [0, 7, 3000]), x, np.array([0, 7, 3000]))
    ints = rng.integers(-50, 50, (5, 101))
    assert np.array_equal(row_order_statistics(ints, [0, 50, 100]), np.sort(ints, axis=1)[:, [0, 50, 100]])


def test_bad_arguments_are_refused():
    x = np.zeros((3, 10), dtype=np.float32)
    for ranks in ([10], [-1]):
        with pytest.raises(ValueError):
            row_order_statistics(x, ranks)
    with pytest.raises(ValueError):
        row_order_statistics(x[0], [0])
    with pytest.raises(ValueError):
        row_order_statistics(x, [0], buckets=1)
    assert row_order_statistics(x, []).shape == (3, 0)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_row_percentiles_are_those_of_the_sorted_rows(dtype):
    # source: numpy.sort (reference library) then the levels' interpolation: the same bits; and
    # numpy.percentile, method "linear" (reference library) = Hyndman and Fan (1996) definition 7, which
    # interpolates from the other end above a fraction of 1/2: equal to rounding
    rng = np.random.default_rng(12)
    rows = np.ascontiguousarray(rng.standard_normal((64, 10000)) * np.logspace(-2, 1, 64)[:, None]
                                - np.linspace(0, 60, 64)[:, None], dtype=dtype)
    rows[5] = rng.lognormal(0.0, 2.0, 10000)
    rows[6] = np.round(rows[6])
    got = row_percentiles(rows)
    assert np.array_equal(got, sorted_percentiles(np.sort(rows, axis=1)))
    expected = np.percentile(rows.astype(np.float64), LEVELS, axis=1, method="linear")
    assert np.allclose(got, expected, rtol=1e-14, atol=1e-12)


def test_the_warm_up_is_registered_and_runs():
    from service import compiled

    assert selection._warm in compiled._WARMERS
    selection._warm()


def test_the_warm_up_compiles_every_type_the_percentiles_call_with():
    # after the warm-up, percentiles of float32 and float64 stores in either layout (and a one-column store)
    # compile nothing more: no request waits for the compiler
    selection._warm()
    known = len(selection._row_order_statistics.signatures)
    x = np.random.default_rng(13).standard_normal((2000, 9)).astype(np.float32)
    for store in (x, x.astype(np.float64), np.asfortranarray(x), x[:, :1]):
        column_percentiles(store)
        row_percentiles(np.ascontiguousarray(store.T))
    assert len(selection._row_order_statistics.signatures) == known == 2
