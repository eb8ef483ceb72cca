"""Per-trial figures: the view-based readings give the same numbers as the point-by-point definitions."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation.types import ResponseType
from tests.tolerance.conftest import requirement_criteria
from service.tolerance import figures as fig
from service.tolerance.grids import build_grids

from .conftest import GRID


@pytest.mark.parametrize("response,mask", [
    ("lowpass", requirement_criteria("lowpass", 1000.0, 2500.0, 0.5, 40.0)),
    ("bandstop", requirement_criteria("bandstop", [300.0, 3000.0], [800.0, 1250.0], 1.0, 30.0)),
    ("bandpass", requirement_criteria("bandpass", [850.0, 1150.0], [300.0, 3000.0], 3.0, 15.0)),
])
def test_ripple_and_reference_equal_the_pointwise_definitions(response, mask):
    rt = ResponseType(response)
    grids = build_grids(GRID, rt, mask, [], 0.0, np.zeros(0))
    rng = np.random.default_rng(3)
    g = rng.normal(-20.0, 15.0, (300, grids.metric_hz.size))       # gains, dB
    p = 10.0 ** (g / 10.0)                                          # the powers the figures read
    ref = fig.reference_gain(p, grids)
    assert np.allclose(ref, g[:, grids.passband_columns].max(axis=1), rtol=0, atol=1e-12)
    gp = g[:, grids.passband_columns]
    assert np.allclose(fig.ripple(p, grids), gp.max(axis=1) - gp.min(axis=1), rtol=0, atol=1e-12)


@pytest.mark.parametrize("response", ["lowpass", "highpass"])
def test_f3db_from_powers_is_the_crossing_of_the_gain_in_db(response):
    """The half-power crossing read from |H|^2 against a point-by-point search of the dB gain, with the
    interpolation in log frequency done by numpy.interp on each trial alone."""
    rt = ResponseType(response)
    grids = build_grids(GRID, rt, None, [], 0.0, np.zeros(0))
    f = grids.metric_hz[grids.metric_hz > 0]
    rng = np.random.default_rng(5)
    fc = 1000.0 * np.exp(rng.normal(0.0, 0.05, 50))
    x = (f[None, :] / fc[:, None]) ** (1 if rt is ResponseType.LOWPASS else -1)
    p_pos = 1.0 / (1.0 + x ** 8)                                    # 4th-order Butterworth magnitude squared
    p = np.concatenate([np.ones((50, grids.metric_hz.size - f.size)), p_pos], axis=1)
    ref = fig.reference_gain(p, grids)
    got = fig.f3db(p, ref, grids)
    g = 10.0 * np.log10(p_pos)
    for i in range(50):
        level = ref[i] - fig.HALF_POWER_DB
        below = np.flatnonzero(g[i] < level)
        k = below[0] if rt is ResponseType.LOWPASS else below[-1] + 1
        a, b = (k - 1, k) if rt is ResponseType.LOWPASS else (k - 1, k)
        t = (level - g[i, a]) / (g[i, b] - g[i, a])
        want = np.exp(np.log(f[a]) + t * (np.log(f[b]) - np.log(f[a])))
        assert got[i] == pytest.approx(want, rel=1e-12)
        assert got[i] == pytest.approx(fc[i], rel=2e-3)             # the grid's interpolation error


def test_columns_are_views_for_runs_and_masks_otherwise():
    sel = np.zeros(10, dtype=bool)
    sel[3:7] = True
    assert fig.columns(sel) == slice(3, 7)
    sel[9] = True
    assert fig.columns(sel) is sel
    assert fig.columns(np.zeros(4, dtype=bool)).sum() == 0


def test_gain_floor_applies_only_below_it():
    h = np.array([[1.0, 1e-200, 0.0, 10.0]], dtype=complex)
    g = fig.gain_db(h)
    assert np.array_equal(g, 20 * np.log10(np.maximum(np.abs(h), fig.MAGNITUDE_FLOOR)))
    assert g[0, 1] == g[0, 2] == -3000.0


def test_the_magnitude_store_keeps_powers_outside_float32s_range():
    """log10 |H|^2 is stored in float32: powers float32 cannot hold (underflow, overflow, an exact zero) are
    taken in float64 with the engine's floor (1e-300, -3000 dB) instead of becoming -inf or a subnormal."""
    from service.tolerance.montecarlo import _log_power
    p = np.array([[1.0, 1e-20, 1e-45, 1e-300, 0.0, 1e45, 0.5]])
    out = np.empty(p.shape, np.float32)
    _log_power(p, out)
    want = np.log10(np.maximum(p, fig.POWER_FLOOR))
    assert np.allclose(out, want, rtol=1e-6, atol=0)
    assert out[0, 4] == np.float32(-300.0)


def _crossings_by_mask(p, ref_db, grids):
    """The half-power crossings by their definition on a boolean mask of the metric points (in metric order):
    lowpass the first point below the level, highpass the last, bandpass the nearest on either side of the
    peak, bandstop the first and the last; the gain interpolated linearly in log frequency (numpy.interp on
    each trial alone)."""
    pos = grids.metric_hz > 0
    f, pp = grids.metric_hz[pos], p[:, pos]
    g = 10.0 * np.log10(pp)
    out = []
    for i in range(p.shape[0]):
        level = ref_db[i] - fig.HALF_POWER_DB
        below = np.flatnonzero(pp[i] < 10.0 ** (level / 10.0))

        def at(a, b):
            t = (level - g[i, a]) / (g[i, b] - g[i, a])
            return float(np.exp(np.log(f[a]) + t * (np.log(f[b]) - np.log(f[a]))))

        rt = grids.response
        if rt is ResponseType.BANDPASS:
            kp = int(np.argmax(pp[i]))
            lo, hi = below[below < kp], below[below > kp]
            out.append([at(lo[-1], lo[-1] + 1) if lo.size else np.nan, at(hi[0] - 1, hi[0]) if hi.size else np.nan])
        else:                                                  # bandstop
            ok = below.size and below[0] > 0 and below[-1] < f.size - 1
            out.append([at(below[0] - 1, below[0]), at(below[-1], below[-1] + 1)] if ok else [np.nan, np.nan])
    return np.array(out)


@pytest.mark.parametrize("response", ["bandpass", "bandstop"])
def test_band_crossings_read_through_a_layout_match_their_definition(response):
    """Band responses: the compiled scan of the columns of ``p`` in an evaluation layout (a permutation of the
    metric points) gives the crossings of the definition on the metric grid, NaN where a trial has none."""
    rt = ResponseType(response)
    grids = build_grids(GRID, rt, None, [], 0.0, np.zeros(0))
    f = grids.metric_hz
    rng = np.random.default_rng(11)
    f0 = 1000.0 * np.exp(rng.normal(0.0, 0.05, 40))
    fp = np.where(f > 0, f, 1.0)                                   # the DC point is set below
    x = np.abs(fp[None, :] / f0[:, None] - f0[:, None] / fp[None, :]) / 0.5
    p = 1.0 / (1.0 + x ** 4) if rt is ResponseType.BANDPASS else x ** 4 / (1.0 + x ** 4)
    p[:, f == 0] = 0.0 if rt is ResponseType.BANDPASS else 1.0
    p[0] = 1.0 if rt is ResponseType.BANDSTOP else p[0]           # a trial with no crossing at all
    layout = rng.permutation(f.size)
    evaluated = np.empty_like(p)
    evaluated[:, layout] = p                                       # column layout[k] holds metric point k
    ref = fig.reference_gain(p, grids)
    got = fig.f3db(evaluated, ref, grids, layout)
    want = _crossings_by_mask(p, ref, grids)
    assert np.array_equal(np.isnan(got), np.isnan(want))
    assert np.allclose(got[~np.isnan(got)], want[~np.isnan(want)], rtol=1e-12, atol=0)
    assert np.isnan(got[0]).all() == (rt is ResponseType.BANDSTOP)


def test_chunked_brackets_interpolate_to_the_same_bits():
    """The Monte Carlo gathers the brackets chunk by chunk and interpolates once: the same bits as f3db of
    the whole array."""
    grids = build_grids(GRID, ResponseType.LOWPASS, None, [], 0.0, np.zeros(0))
    f = grids.metric_hz
    rng = np.random.default_rng(2)
    fc = 1000.0 * np.exp(rng.normal(0.0, 0.05, 100))
    p = 1.0 / (1.0 + (f[None, :] / fc[:, None]) ** 12)
    ref = fig.reference_gain(p, grids)
    whole = fig.f3db(p, ref, grids)
    parts = [fig.half_power_brackets(p[a:a + 33], ref[a:a + 33], grids) for a in range(0, 100, 33)]
    joined = fig.HalfPowerBrackets(*(np.concatenate([getattr(b, n) for b in parts])
                                     for n in ("lower", "upper", "p_lower", "p_upper", "found")))
    assert np.array_equal(fig.interpolated_f3db(joined, ref, grids), whole)
