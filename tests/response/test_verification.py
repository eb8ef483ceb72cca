"""The verifier against an independent dense evaluation, and its rules (stability, tolerance, tails, roll-off).

The reference worst margin of each segment is found from scipy.signal's own
frequency response (`freqs_zpk`) on a dense log grid
(2,000 per decade) with every sampled extremum that could be the worst polished by a bounded scalar minimisation
(scipy.optimize.minimize_scalar), plus the value at infinity for stopbands
that run there -- a different method (sampling) and a different evaluator
from the verifier's interval bounds on its own root products.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as ss
from scipy.optimize import minimize_scalar

from service.circuit.roots import RootSet
from service.response.verification import Band, Criteria, DelayLimit, LossLimit, verify

TWO_PI = 2 * math.pi


def _gain_db(z, p, k, f):
    """20 log10 |H(j 2 pi f)| from scipy.signal.freqs_zpk (reference library)."""
    _, h = ss.freqs_zpk(z, p, k, worN=TWO_PI * np.atleast_1d(np.asarray(f, dtype=float)))
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.abs(h))


def _extreme(z, p, k, lo, hi, highest):
    """Largest (or smallest) gain (dB) on [lo, hi] Hz: dense sampling + polishing of every sampled extremum."""
    if lo == 0:
        grid = np.concatenate([[0.0], np.geomspace(max(hi * 1e-6, 1e-9), hi, 12001)])
    else:
        grid = np.geomspace(lo, hi, max(200, int(2000 * math.log10(hi / lo))))
    g = _gain_db(z, p, k, grid)
    sign = -1.0 if highest else 1.0
    best = (sign * g).min()
    # polish the sampled local extrema that could hold the segment's extreme (within 0.05 dB of the best)
    sg = sign * g
    idx = np.flatnonzero((sg[1:-1] <= np.minimum(sg[:-2], sg[2:])) & (sg[1:-1] <= best + 0.05)) + 1
    idx = idx[np.argsort(sg[idx])][:24]            # flat stretches sample as many tiny extrema: the best 24
    for i in idx:
        r = minimize_scalar(lambda x: sign * _gain_db(z, p, k, [x])[0], bounds=(grid[i - 1], grid[i + 1]),
                            method="bounded", options={"xatol": grid[i] * 1e-12})
        best = min(best, r.fun)
    return sign * best


def _reference_margins(z, p, k, limits):
    """Per segment the worst margin (dB), reference = largest passband gain."""
    ref = max(_extreme(z, p, k, lim.start_hz, lim.stop_hz, True) for lim in limits if lim.band is Band.PASSBAND)
    out = []
    for lim in limits:
        stop = lim.stop_hz
        if lim.band is Band.PASSBAND:
            out.append(lim.limit_db - (ref - _extreme(z, p, k, lim.start_hz, stop, False)))
            continue
        top = stop
        extra = -np.inf
        if not math.isfinite(stop):
            top = 1e4 * max(np.abs(np.concatenate([z, p]))) / TWO_PI
            if len(z) == len(p):
                extra = 20 * math.log10(abs(k))
        g = max(_extreme(z, p, k, lim.start_hz, top, True), extra)
        out.append(ref - g - lim.limit_db)
    return out


def _random_case(rng):
    family = rng.choice(["butter", "cheby1", "cheby2", "ellip", "bessel"])
    btype = rng.choice(["lowpass", "highpass", "bandpass", "bandstop"])
    n = int(rng.integers(2, 7))
    f0 = 10 ** rng.uniform(1, 5)
    rp, rs = float(rng.uniform(0.1, 1.0)), float(rng.uniform(30, 70))
    wn = TWO_PI * f0 if btype in ("lowpass", "highpass") else TWO_PI * f0 * np.array([1.0, 10 ** rng.uniform(0.1, 0.4)])
    kw = dict(analog=True, output="zpk", btype=btype)
    if family == "butter":
        z, p, k = ss.butter(n, wn, **kw)
    elif family == "cheby1":
        z, p, k = ss.cheby1(n, rp, wn, **kw)
    elif family == "cheby2":
        z, p, k = ss.cheby2(n, rs, wn, **kw)
    elif family == "ellip":
        z, p, k = ss.ellip(n, rp, rs, wn, **kw)
    else:
        z, p, k = ss.bessel(n, wn, norm="mag", **kw)
    edges = np.atleast_1d(wn) / TWO_PI
    return z, p, k, btype, edges


def _limits(btype, edges, rng):
    """Segments around the filter's own edges: passband inside, stopband outside its transition."""
    lo, hi = edges[0], edges[-1]
    pb, sb = Band.PASSBAND, Band.STOPBAND
    s = rng.uniform(1.5, 4.0)
    if btype == "lowpass":
        return [LossLimit(pb, 0, lo * 0.6, 1.0), LossLimit(sb, lo * s, math.inf, 20.0, open_end=True)]
    if btype == "highpass":
        return [LossLimit(sb, 0, lo / s, 20.0), LossLimit(pb, lo / 0.6, lo * 20, 1.0, open_end=True)]
    if btype == "bandpass":
        c = math.sqrt(lo * hi)
        w = hi / lo
        return [LossLimit(sb, 0, lo / s, 20.0), LossLimit(pb, c / w ** 0.2, c * w ** 0.2, 1.0),
                LossLimit(sb, hi * s, math.inf, 20.0, open_end=True)]
    c = math.sqrt(lo * hi)
    return [LossLimit(pb, 0, lo / s, 1.0), LossLimit(sb, c * 0.995, c / 0.995, 10.0),
            LossLimit(pb, hi * s, hi * s * 10, 1.0, open_end=True)]


def _padded(rs: RootSet, extra: int = 3) -> RootSet:
    """The same transfer function with ``extra`` absent roots (NaN slots) among its zeros and poles, as a
    cascade of stages with different root counts has them."""
    nan = np.full((rs.trials, extra), np.nan + 0j)
    return RootSet(np.hstack([nan[:, :1], rs.zeros, nan]), np.hstack([rs.poles, nan]), rs.log_gain,
                   np.concatenate([rs.pole_group, np.zeros(extra, dtype=int)]))


@pytest.mark.parametrize("padded", [False, True], ids=["plain", "nan-padded"])
@pytest.mark.parametrize("seed", range(40))
def test_worst_margins_match_a_dense_independent_check(seed, padded):
    # source: scipy.signal (reference library) -- freqs_zpk sampled densely and polished
    rng = np.random.default_rng(seed)
    z, p, k, btype, edges = _random_case(rng)
    limits = _limits(btype, edges, rng)
    ref = _reference_margins(z, p, k, limits)
    # move every limit so the true worst margin sits within +-0.02 dB of zero: the hard cases
    shifted = []
    for lim, m in zip(limits, ref):
        d = m - rng.uniform(-0.02, 0.02)
        shifted.append(LossLimit(lim.band, lim.start_hz, lim.stop_hz,
                                 lim.limit_db - d if lim.band is Band.PASSBAND else lim.limit_db + d,
                                 open_end=lim.open_end))
    want = _reference_margins(z, p, k, shifted)
    roots = RootSet.from_zpk(z, p, k)
    v = verify(_padded(roots) if padded else roots, Criteria(tuple(shifted))).verdict()
    got = [s.margin_db for s in v.segments]
    assert v.proved
    np.testing.assert_allclose(got, want, atol=2e-6)
    assert v.meets == all(m >= -1e-9 for m in want)


def test_a_miss_of_a_hundredth_of_a_db_between_grid_points_is_found():
    # source: scipy.signal (reference library) -- elliptic ripple peaks of 0.2 dB; limit 0.19 dB
    z, p, k = ss.ellip(7, 0.2, 60, TWO_PI * 1000, analog=True, output="zpk")
    v = verify(RootSet.from_zpk(z, p, k), Criteria((LossLimit(Band.PASSBAND, 0, 1000, 0.19),))).verdict()
    assert v.status == "misses"
    assert v.segments[0].margin_db == pytest.approx(-0.01, abs=1e-9)


def test_margins_within_the_numerical_tolerance_are_zero_and_met():
    # source: scipy.signal (reference library) -- an equiripple passband touching its limit exactly
    z, p, k = ss.cheby1(6, 0.5, TWO_PI * 1000, analog=True, output="zpk")
    v = verify(RootSet.from_zpk(z, p, k), Criteria((LossLimit(Band.PASSBAND, 0, 1000, 0.5),))).verdict()
    assert v.segments[0].margin_db == 0.0
    assert v.meets and v.proved


def test_stopband_open_to_infinity_includes_the_value_at_infinity():
    # source: scipy.signal (reference library) -- an even-order elliptic lowpass keeps its stopband level at
    # infinite frequency (as many finite zeros as poles)
    z, p, k = ss.ellip(4, 0.5, 40, TWO_PI * 1000, analog=True, output="zpk")
    rs = RootSet.from_zpk(z, p, k)
    for att, meets in ((39.9, True), (40.0, True), (40.1, False)):
        crit = Criteria((LossLimit(Band.PASSBAND, 0, 1000, 0.5),
                         LossLimit(Band.STOPBAND, 2000, math.inf, att, open_end=True)))
        v = verify(rs, crit).verdict()
        assert v.meets is meets, att
        assert v.proved
        assert v.segments[1].margin_db == pytest.approx(40.0 - att, abs=1e-9)


def test_a_pole_in_the_right_half_plane_is_unstable_and_meets_nothing():
    rs = RootSet.from_zpk([], [complex(10, 6000), complex(10, -6000)], 3.6e7)
    v = verify(rs, Criteria((LossLimit(Band.PASSBAND, 0, 500, 1.0),))).verdict()
    assert v.status == "unstable" and not v.meets
    assert v.segments == () and v.reference_gain_db is None
    assert v.unstable_poles[0].frequency_hz == pytest.approx(abs(complex(10, 6000)) / TWO_PI)


def test_a_pole_on_the_imaginary_axis_is_not_called_stable():
    rs = RootSet.from_zpk([], [complex(0, 6000), complex(0, -6000)], 3.6e7)
    assert verify(rs, Criteria((LossLimit(Band.PASSBAND, 0, 500, 1.0),))).verdict().status == "unstable"


def test_open_passband_ends_with_an_opamp_rolloff_only_when_allowed():
    # a Chebyshev highpass with one more pole at 100 kHz (a finite op-amp bandwidth); common practice (no source):
    # the band a real highpass passes ends where its op-amp rolls off
    z, p, k = ss.cheby1(4, 0.5, TWO_PI * 1000, btype="highpass", analog=True, output="zpk")
    rs = RootSet.from_zpk(z, np.concatenate([p, [-TWO_PI * 1e5]]), k * TWO_PI * 1e5)
    strict = Criteria((LossLimit(Band.PASSBAND, 1100, 30000, 0.6, open_end=True),))
    lenient = Criteria((LossLimit(Band.PASSBAND, 1100, 30000, 0.6, open_end=True, ends_with_rolloff=True),))
    v_strict = verify(rs, strict).verdict()
    v_lenient = verify(rs, lenient).verdict()
    assert v_strict.status == "misses"
    end = v_lenient.segments[0].ended_hz
    assert v_lenient.meets and 5000 < end < 30000
    # at the end the loss equals the allowed ripple (reference: the largest passband gain, scipy)
    ref = _extreme(z, np.concatenate([p, [-TWO_PI * 1e5]]), k * TWO_PI * 1e5, 1100, end, True)
    g_end = _gain_db(z, np.concatenate([p, [-TWO_PI * 1e5]]), k * TWO_PI * 1e5, [end])[0]
    assert ref - g_end == pytest.approx(0.6, abs=1e-6)
    # the roll-off may not end the band below rolloff_from_hz: there the ripple must hold, and it does not
    held = Criteria((LossLimit(Band.PASSBAND, 1100, 30000, 0.6, open_end=True, ends_with_rolloff=True,
                               rolloff_from_hz=2 * end),))
    v_held = verify(rs, held).verdict()
    assert v_held.status == "misses" and v_held.segments[0].ended_hz is None
    assert v_held.worst_margin_db == pytest.approx(v_strict.worst_margin_db, abs=1e-6)
    later = Criteria((LossLimit(Band.PASSBAND, 1100, 30000, 0.6, open_end=True, ends_with_rolloff=True,
                                rolloff_from_hz=0.5 * end),))
    assert verify(rs, later).verdict().segments[0].ended_hz == pytest.approx(end, rel=1e-9)


def test_group_delay_deviation_of_a_bessel_lowpass():
    # source: scipy.signal (reference library) -- group delay from the phase of freqs_zpk, differentiated
    z, p, k = ss.bessel(5, TWO_PI * 1000, norm="delay", analog=True, output="zpk")
    f = np.linspace(0, 2000, 200001)
    _, h = ss.freqs_zpk(z, p, k, worN=TWO_PI * f)
    tau = -np.gradient(np.unwrap(np.angle(h)), TWO_PI * f)
    dev = 100 * np.max(np.abs(tau - tau[0])) / tau[0]
    for limit in (dev * 0.99, dev * 1.01):
        v = verify(RootSet.from_zpk(z, p, k), Criteria((), DelayLimit(2000, limit))).verdict()
        assert v.delay.deviation_pct == pytest.approx(dev, rel=1e-4)
        assert v.meets is bool(limit > dev)
