"""Batched refinement of extrema, bracket pruning, and the partial-fraction step response.

The metrics refine the extremes of a response in one bracketed search and
skip brackets that cannot win; these tests hold it against the plain method --
every sampled local minimum refined on its own --, hold the whole-band
verifier against that same plain sampled-and-refined check of every segment,
and the partial-fraction step metrics against the exact state-space method.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as ss

from service.approximation import design_by_requirement
from service.circuit.roots import RootSet
from service.response import ZpkSystem
from service.response import zpk as _zpk
from service.response.grids import TimeGrid
from service.response.verification import Band, Criteria, LossLimit, TOLERANCE_DB, verify
from service.workflows import Requirement
from service.response.metrics import ResponseMetrics, step_metrics
from service.response.modal import modal_step
from service.response.refine import (analysis_grid_hz, critical_frequencies_hz, local_minima_brackets,
                                     promising_minima, refine_extrema, refine_minimum, zoom_minimize)
from service.response.timeresp import automatic_span, simulate

W0 = 2 * math.pi * 1000.0


def _sequential_refine(func, x, y):
    """Every sampled local minimum refined, none skipped (the method before batching)."""
    idx, lo, hi = local_minima_brackets(x, y)
    xs, vals = zoom_minimize(lambda u: func(np.exp(u)), np.log(lo), np.log(hi))
    allx = np.concatenate([np.exp(xs), x[idx]])
    ally = np.concatenate([vals, y[idx]])
    k = int(np.argmin(ally))
    return float(allx[k]), float(ally[k])


#: An open stopband is sampled up to this many decades above the highest critical frequency.
INFINITE_EDGE_DECADES = 4.0


def _sequential_mask_check(criteria, gain_db, z, p):
    """Worst margin (dB) per segment, one segment and one margin function at a time, on samples refined."""
    crit = critical_frequencies_hz(z, p)
    top = crit[-1] * 10.0 ** INFINITE_EDGE_DECADES
    edges = [e for s in criteria.limits for e in (s.start_hz, s.stop_hz) if math.isfinite(e) and e > 0]
    base = analysis_grid_hz(z, p, extra_hz=edges)

    def seg_grid(seg):
        a = seg.start_hz
        b = seg.stop_hz if math.isfinite(seg.stop_hz) else max(top, a * 10.0)
        g = base[(base > a) & (base < b)]
        return np.concatenate([[a] if a > 0 else [], g, [b]]), a

    if criteria.reference_gain_db is not None:
        ref = criteria.reference_gain_db
    else:
        peaks = []
        for seg in criteria.limits:
            if seg.band is Band.PASSBAND:
                g, a = seg_grid(seg)
                peaks.append(-_sequential_refine(lambda f: -gain_db(f), g, -gain_db(g))[1])
                if a == 0.0:
                    peaks.append(float(gain_db(np.zeros(1))[0]))
        ref = max(peaks)
    worst = []
    for seg in criteria.limits:
        g, a = seg_grid(seg)

        def margin(f, seg=seg):
            loss = ref - gain_db(f)
            return seg.limit_db - loss if seg.band is Band.PASSBAND else loss - seg.limit_db

        _, m = _sequential_refine(margin, g, margin(g))
        if a == 0.0:
            m = min(m, float(margin(np.zeros(1))[0]))
        worst.append(m)
    return ref, worst


SYSTEMS = {
    # source: scipy.signal (reference library) -- prototypes scaled to 1 kHz / 40 kHz
    "chebyshev1_7": ss.lp2lp_zpk(*ss.cheb1ap(7, 1.0), W0),
    "elliptic_6": ss.lp2lp_zpk(*ss.ellipap(6, 0.5, 60.0), W0),
    "butterworth_12": ss.lp2lp_zpk(*ss.buttap(12), W0),
    "bandpass_4": ss.lp2bp_zpk(*ss.buttap(4), 2 * math.pi * 40e3, 2 * math.pi * 10e3),
    "elliptic_hp_5": ss.lp2hp_zpk(*ss.ellipap(5, 0.2, 50.0), W0),
}
PB, SB, INF = Band.PASSBAND, Band.STOPBAND, math.inf


def _requirement(response, pb, sb, rip, att):
    return Requirement(response=response, passband_hz=pb, stopband_hz=sb, passband_ripple_db=rip,
                       stopband_attenuation_db=att).criteria(finite_opamps=False)


MASKS = {
    "lowpass": _requirement("lowpass", 1000.0, 3000.0, 1.0, 40.0),
    "tight": Criteria((LossLimit(PB, 0.0, 1000.0, 0.95), LossLimit(SB, 3000.0, INF, 40.0, open_end=True))),
    "two_bounds": Criteria((LossLimit(PB, 0.0, 1200.0, 3.0), LossLimit(SB, 0.0, 1200.0, -0.5),
                            LossLimit(SB, 1500.0, 1e5, 20.0))),
    "fixed_reference": Criteria((LossLimit(PB, 10.0, 900.0, 1.5),), reference_gain_db=0.3),
    "bandpass": _requirement("bandpass", [35e3, 45e3], [25e3, 60e3], 1.0, 30.0),
    "highpass": Criteria(tuple(lim if lim.band is SB else LossLimit(PB, lim.start_hz, 1e5, lim.limit_db)
                               for lim in _requirement("highpass", 1000.0, 400.0, 1.0, 40.0).limits)),
}


@pytest.mark.parametrize("system", sorted(SYSTEMS))
@pytest.mark.parametrize("mask", sorted(MASKS))
def test_verifier_finds_the_sequential_worst_margin(system, mask):
    # the whole-band verifier against every sampled local extreme of each segment refined on its own
    z, p, k = SYSTEMS[system]

    def gain_db(f):
        return _zpk.magnitude_db(_zpk.freqresp(z, p, k, 2 * math.pi * np.asarray(f, dtype=float)))

    m = MASKS[mask]
    got = verify(RootSet.from_zpk(z, p, k), m).verdict()
    ref, worst = _sequential_mask_check(m, gain_db, z, p)
    if ref < -300.0:
        pytest.skip("the plain check floors magnitudes at -400 dB; this system is far below that in the mask")
    assert got.reference_gain_db == pytest.approx(ref, abs=1e-9)
    for seg, want in zip(got.segments, worst):
        # the verifier locates a margin away from 0 to its precision (1e-6 dB); open stopbands: the plain check
        # stops 4 decades above the roots, the verifier goes to infinity
        tol = 1.5e-6
        if math.isfinite(seg.worst_hz) and float(gain_db(np.array([seg.worst_hz]))[0]) <= -399.0:
            continue  # the plain check floors magnitudes at -400 dB; the verifier does not
        assert seg.margin_db == pytest.approx(want, abs=tol)
        assert seg.met == (want >= -TOLERANCE_DB) or abs(want) < tol
        # the reported frequency really has the reported margin
        f = seg.worst_hz
        if math.isfinite(f):
            loss = got.reference_gain_db - float(gain_db(np.array([f]))[0])
            at = seg.limit.limit_db - loss if seg.limit.band is PB else loss - seg.limit.limit_db
            assert at == pytest.approx(seg.margin_db, abs=1e-8)


def test_pruning_keeps_a_deeper_valley_whose_samples_sit_higher():
    # two valleys; the narrow one is deeper but its nearest sample lands high on its wall
    def f(x):
        u = np.log(x)
        return np.minimum(0.5 + (u - 0.0) ** 2, 1500.0 * (u - 1.02) ** 2)

    x = np.exp(np.linspace(-1.0, 2.0, 61))  # step 0.05 in ln x
    y = f(x)
    idx, _, _ = local_minima_brackets(x, y)
    assert idx.size == 2
    deep = int(np.argmin(np.abs(np.log(x[idx]) - 1.02)))
    assert y[idx[deep]] > y[idx[1 - deep]]  # the sampled values point at the wrong valley
    assert promising_minima(np.log(x), y, idx).all()
    # without the parabolic allowance the deeper valley would be skipped
    assert not promising_minima(np.log(x), y, idx, safety=0.0)[deep]
    xm, ym = refine_minimum(f, x, y)
    # the true minimum is 0 at ln x = 1.02 (closed form of the test function)  # common practice (no source)
    assert ym == pytest.approx(0.0, abs=1e-9) and math.log(xm) == pytest.approx(1.02, abs=1e-5)


def test_pruning_drops_rounding_plateaus_without_moving_the_extreme():
    z, p, k = SYSTEMS["butterworth_12"]

    def neg_gain(f):
        return -_zpk.magnitude_db(_zpk.freqresp(z, p, k, 2 * math.pi * np.asarray(f, dtype=float)))

    g = analysis_grid_hz(z, p, extra_hz=[1000.0])
    g = np.concatenate([g[g < 1000.0], [1000.0]])
    y = neg_gain(g)
    idx, _, _ = local_minima_brackets(g, y)
    keep = promising_minima(np.log(g), y, idx, tolerance=1e-12)
    # a maximally flat passband: hundreds of rounding-level "minima", almost all skipped
    assert idx.size > 50 and keep.sum() <= 5
    assert keep[int(np.argmin(y[idx]))]
    _, full = _sequential_refine(neg_gain, g, y)
    _, fast = refine_extrema(neg_gain, [(g, y, 1.0)], tolerance=1e-12)[0]
    assert fast == pytest.approx(full, abs=1e-12)
    # source: S. Butterworth, "On the theory of filter amplifiers", Wireless Engineer 7, 1930:
    # the largest gain of the maximally flat response is its DC gain, 0 dB
    assert -fast == pytest.approx(0.0, abs=1e-12)


def test_one_search_for_many_curves_equals_one_search_each():
    sysm = ZpkSystem(*SYSTEMS["elliptic_6"])

    def gain_db(f):
        return _zpk.magnitude_db(sysm.evaluate(np.asarray(f, dtype=float)))

    grid = analysis_grid_hz(sysm.zeros, sysm.poles, extra_hz=[1000.0, 1500.0])
    pieces = [grid[(grid > 1.0) & (grid < 1000.0)], grid[(grid > 1500.0) & (grid < 1e5)],
              grid[(grid > 200.0) & (grid < 2000.0)]]
    curves = [(g, gain_db(g), s) for g in pieces for s in (1.0, -1.0)]
    together = refine_extrema(gain_db, curves)
    for (g, y, s), (f_b, v_b) in zip(curves, together):
        f_1, v_1 = refine_minimum(lambda f, s=s: s * gain_db(f), g, s * y)
        assert v_b == pytest.approx(s * v_1, abs=1e-12)
        assert float(gain_db(np.array([f_b]))[0]) == pytest.approx(v_b, abs=1e-12)
    # source: scipy.signal (reference library) -- ellipap: equiripple passband 0 .. -0.5 dB,
    # stopband lobes at -60 dB
    assert together[0][1] == pytest.approx(-0.5, abs=1e-9) and together[1][1] == pytest.approx(0.0, abs=1e-9)
    assert together[3][1] == pytest.approx(-60.0, abs=1e-7)


def _designs():
    reqs = [("lowpass", 1e4, 2.56e4, 0.1, 80.0), ("bandpass", [35e3, 45e3], [25e3, 60e3], 1.0, 30.0),
            ("highpass", 1000.0, 400.0, 1.0, 40.0), ("bandstop", [40.0, 70.0], [49.0, 61.0], 1.0, 40.0)]
    out = []
    for req in reqs:
        for fam in ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "legendre"):
            out.append((req, fam))
    return out


@pytest.mark.parametrize("req, family", _designs())
def test_partial_fraction_step_metrics_equal_the_state_space_ones(req, family):
    a = design_by_requirement(req[0], family, *req[1:])
    z, p, k = np.asarray(a.zeros, dtype=complex), np.asarray(a.poles, dtype=complex), float(np.real(a.gain))
    stop, dt = automatic_span(p)
    t = TimeGrid().times(stop, dt, automatic_points=400)
    exact = simulate(z, p, k, t)
    exact.final_value = float(np.real(_zpk.dc_gain(z, p, k)))
    modal = modal_step(z, p, k, t)
    assert modal is not None
    # source: the exact ZOH state-space response (Franklin, Powell & Workman, Digital Control of
    # Dynamic Systems, 3rd ed., sec. 4.3.3) as computed by service.response.timeresp
    np.testing.assert_allclose(modal.step, exact.step, rtol=0, atol=1e-11 * np.max(np.abs(exact.step)))
    assert modal.final_value == pytest.approx(exact.final_value, rel=1e-12, abs=1e-15)
    m1, m2 = ResponseMetrics(), ResponseMetrics()
    step_metrics(exact, m1)
    step_metrics(modal, m2)
    for name in ("overshoot_pct", "rise_time_s", "settling_time_1pct_s", "settling_time_01pct_s"):
        v1, v2 = getattr(m1, name), getattr(m2, name)
        assert (v1 is None) == (v2 is None), name
        if v1 is not None:
            assert v2 == pytest.approx(v1, rel=1e-9, abs=1e-15), name
    assert m1.unavailable == m2.unavailable


def test_partial_fractions_match_scipy_step_and_decline_repeated_poles():
    z, p, k = ss.lp2lp_zpk(*ss.cheb1ap(5, 0.5), W0)
    t = np.linspace(0.0, 5e-3, 501)
    r = modal_step(z, p, k, t)
    _, y_ref = ss.step((z, p, k), T=t)
    # source: scipy.signal (reference library) -- step() of the same zpk system
    np.testing.assert_allclose(r.step, y_ref, atol=1e-9)
    # Linkwitz-Riley: every Butterworth pole twice -- no simple partial fractions
    zb, pb, kb = ss.lp2lp_zpk(*ss.buttap(4), W0)
    assert modal_step(zb, np.concatenate([pb, pb]), kb * kb, t) is None
    # two poles 1e-9 apart: residues of 1e9 would cancel to rounding noise
    close = np.array([-W0, -W0 * (1 + 1e-9)], dtype=complex)
    assert modal_step([], close, W0 * W0, t) is None


def test_decimation_keeps_each_chunks_extremes_and_the_ends():
    from service.response.plotting import decimate

    rng = np.random.default_rng(7)
    for n in (2001, 2999, 10_000):
        x = np.arange(n, dtype=float)
        y = rng.normal(size=n)
        xd, yd = decimate(x, y, limit=2000)
        assert xd.size <= 2002 and np.all(np.diff(xd) > 0)
        assert xd[0] == 0 and xd[-1] == n - 1
        edges = np.linspace(0, n, 1001).astype(int)
        kept = set(xd.astype(int).tolist())
        for a, b in zip(edges[:-1], edges[1:]):  # the chunk loop the vectorised form replaces
            assert a + int(np.argmin(y[a:b])) in kept and a + int(np.argmax(y[a:b])) in kept
        np.testing.assert_array_equal(yd, y[xd.astype(int)])
    x = np.arange(10.0)
    assert decimate(x, x**2)[0] is x


def test_response_figure_has_every_panel_and_labelled_units():
    z, p, k = SYSTEMS["chebyshev1_7"]
    from service.response import FrequencyGrid, analyze

    r = analyze(ZpkSystem(z, p, k), FrequencyGrid(10, 1e5, 2000),
                verdict=verify(RootSet.from_zpk(z, p, k), _requirement("lowpass", 1000, 3000, 1.0, 40.0)).verdict())
    svg = r.svg().decode()
    for text in ("Magnitude", "Phase", "Group delay", "Step response", "gain (dB)", "phase (deg)",
                 "group delay (ms)", "step response (V/V)", "frequency (Hz)", "time (ms)"):
        assert text in svg, text
    assert 'width="576pt"' in svg  # 8 in at 72 pt/in: 800 px at 100 dpi
