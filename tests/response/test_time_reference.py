"""Step and impulse responses and their metrics against scipy.signal and closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as ss

from service.response import TimeGrid, ZpkSystem, analyze

W0 = 2 * math.pi * 1000.0


def _step_partial_fractions(z, p, k, t):
    """Step response k*prod(s-z)/(s*prod(s-p)) by residues at 50 digits (distinct poles only)."""
    import mpmath

    mpmath.mp.dps = 50
    zs = [mpmath.mpc(complex(v)) for v in z]
    ps = [mpmath.mpc(complex(v)) for v in p]
    kk = mpmath.mpf(float(k))

    def h(s):
        num = kk
        for v in zs:
            num *= s - v
        return num

    dc = h(0)
    for v in ps:
        dc /= -v
    out = []
    for tt in t:
        acc = dc
        for i, pi in enumerate(ps):
            den = pi
            for j, pj in enumerate(ps):
                if j != i:
                    den *= pi - pj
            acc += h(pi) / den * mpmath.exp(pi * mpmath.mpf(float(tt)))
        out.append(float(mpmath.re(acc)))
    return np.array(out)


@pytest.mark.parametrize("proto", [ss.buttap(8), ss.cheb1ap(5, 1.0), ss.ellipap(6, 0.5, 60.0),
                                   ss.besselap(4, "delay"), ss.cheb2ap(5, 40.0)])
@pytest.mark.parametrize("transform", ["lp", "hp", "bp", "bs"])
def test_step_and_impulse_match_scipy(proto, transform):
    if transform == "lp":
        z, p, k = ss.lp2lp_zpk(*proto, W0)
    elif transform == "hp":
        z, p, k = ss.lp2hp_zpk(*proto, W0)
    elif transform == "bp":
        z, p, k = ss.lp2bp_zpk(*proto, W0, W0 / 3)
    else:
        z, p, k = ss.lp2bs_zpk(*proto, W0, W0 / 2)
    r = analyze(ZpkSystem(z, p, k), [100.0, 1000.0], time=TimeGrid(stop_s=0.02, points=3001))
    t = r.step.time_s
    # source: scipy.signal (reference library) -- step / impulse (lsim, matrix exponential).
    # scipy goes through one companion-form state space, which loses digits at
    # order 16-20, hence the looser tolerance here and the 50-digit check below.
    _, y = ss.step((z, p, k), T=t)
    _, yi = ss.impulse((z, p, k), T=t)
    np.testing.assert_allclose(r.step.value, y, atol=2e-6 * max(1.0, np.max(np.abs(y))))
    np.testing.assert_allclose(r.impulse.value, yi, atol=1e-5 * np.max(np.abs(yi)))
    # source: partial-fraction expansion evaluated with mpmath at 50 digits
    # (A. V. Oppenheim, A. S. Willsky, Signals and Systems, 2nd ed., sec. 9.4 / appendix)
    ts = t[::100]
    ref = _step_partial_fractions(z, p, k, ts)
    np.testing.assert_allclose(r.step.value[::100], ref, atol=1e-10 * max(1.0, np.max(np.abs(ref))))
    # the delta of the impulse response is the direct feedthrough H(inf)
    assert r.impulse.dirac_weight == pytest.approx(k if len(z) == len(p) else 0.0, abs=1e-12)


def test_repeated_poles_step_matches_lsim():
    # Linkwitz-Riley 4th order: the 2nd-order Butterworth squared (double poles)
    z, p, k = ss.buttap(2)
    z2, p2, k2 = ss.lp2lp_zpk(np.zeros(0), np.concatenate([p, p]), k * k, W0)
    r = analyze(ZpkSystem(z2, p2, k2), [1000.0], time=TimeGrid(stop_s=0.01, points=2001))
    # source: scipy.signal (reference library) -- lsim of the tf with a unit step
    b, a = ss.zpk2tf(z2, p2, k2)
    _, y, _ = ss.lsim((b, a), np.ones(2001), r.step.time_s)
    np.testing.assert_allclose(r.step.value, y, atol=1e-8)


@pytest.mark.parametrize("q", [0.55, 0.7071067811865476, 1.0, 2.0, 5.0, 10.0])
def test_second_order_overshoot_closed_form(q):
    w0 = 2 * math.pi * 500.0
    poles = np.roots([1.0, w0 / q, w0 * w0])
    r = analyze(ZpkSystem([], poles, w0 * w0), [100.0])
    zeta = 1.0 / (2.0 * q)
    # source: K. Ogata, Modern Control Engineering, 5th ed., eq. (5-21): Mp = exp(-zeta*pi/sqrt(1-zeta^2))
    expected = 100.0 * math.exp(-math.pi * zeta / math.sqrt(1.0 - zeta * zeta))
    assert r.metrics.overshoot_pct == pytest.approx(expected, rel=1e-7)


def test_butterworth_second_order_overshoot_is_4_3_pct():
    z, p, k = ss.lp2lp_zpk(*ss.buttap(2), W0)
    r = analyze(ZpkSystem(z, p, k), [100.0])
    # source: K. Ogata, Modern Control Engineering, 5th ed., sec. 5-3 (zeta = 0.707 gives 4.3 %) (from memory)
    assert r.metrics.overshoot_pct == pytest.approx(4.32, abs=0.005)


def test_first_order_rise_and_settling_closed_forms():
    tau = 1e-3
    r = analyze(ZpkSystem([], [-1.0 / tau], 1.0 / tau), [10.0])
    m = r.metrics
    # source: K. Ogata, Modern Control Engineering, 5th ed., sec. 5-2 (first-order system:
    # y = 1 - exp(-t/T)): rise 10-90 % = T ln 9, settling to 1 % = T ln 100, to 0.1 % = T ln 1000
    assert m.rise_time_s == pytest.approx(tau * math.log(9.0), rel=1e-9)
    assert m.settling_time_1pct_s == pytest.approx(tau * math.log(100.0), rel=1e-9)
    assert m.settling_time_01pct_s == pytest.approx(tau * math.log(1000.0), rel=1e-9)
    assert m.overshoot_pct == 0.0


def test_highpass_step_metrics_defined_against_the_peak():
    tau = 2e-3
    # first-order highpass s/(s + 1/tau): step = exp(-t/tau), peak 1 at t = 0, settles to 0
    r = analyze(ZpkSystem([0.0], [-1.0 / tau], 1.0), [10.0])
    m = r.metrics
    assert m.overshoot_pct is None and "overshoot_pct" in m.unavailable
    assert m.rise_time_s is None and "rise_time_s" in m.unavailable
    # closed form exp(-t/tau) = 0.01 -> t = tau ln 100 (common practice (no source): settling of a
    # response whose final value is 0 is taken relative to its largest magnitude)
    assert m.settling_time_1pct_s == pytest.approx(tau * math.log(100.0), rel=1e-9)


def test_automatic_time_grid_covers_settling_and_respects_limit():
    z, p, k = ss.lp2lp_zpk(*ss.cheb1ap(8, 0.5), W0)
    r = analyze(ZpkSystem(z, p, k), [100.0])
    assert r.metrics.settling_time_01pct_s is not None
    assert r.step.time_s[-1] > r.metrics.settling_time_01pct_s
    assert r.step.value[-1] == pytest.approx(10 ** (-0.5 / 20), abs=1e-3)


def test_step_final_value_is_dc_gain():
    z, p, k = ss.lp2lp_zpk(*ss.cheb1ap(4, 1.0), W0)
    r = analyze(ZpkSystem(z, p, k), [100.0], time=TimeGrid(stop_s=0.05))
    # even-order Chebyshev: DC gain is -ripple; the step ends there
    assert r.step.value[-1] == pytest.approx(10 ** (-1.0 / 20), rel=1e-6)
