"""Order selection against closed forms and scipy.signal's order functions."""

import math

import numpy as np
import pytest
from scipy import signal
from scipy.optimize import brentq

from service.approximation import Family, ResponseType, design_by_requirement
from service.approximation.evaluate import loss_db, zpk_response
from service.approximation.order import (butterworth_order, chebyshev_order, elliptic_order,
                                         elliptic_selectivity, frequency_at_loss)
from service.approximation.prototypes import prototype

CASES = [  # (selectivity, ripple dB, attenuation dB)
    (1.5, 0.5, 40.0), (2.0, 1.0, 60.0), (1.1, 0.1, 50.0), (3.0, 3.0, 20.0),
    (1.02, 0.01, 80.0), (5.0, 0.001, 150.0), (1.3, 2.0, 30.0),
]


@pytest.mark.parametrize("sel,ap,as_", CASES)
def test_closed_forms_by_hand(sel, ap, as_):
    # source: A. Antoniou, Digital Filters, 2nd ed., 1993, eqs. 5.13 and 5.29
    d = (10 ** (as_ / 10) - 1) / (10 ** (ap / 10) - 1)
    assert math.isclose(butterworth_order(sel, ap, as_), math.log10(d) / (2 * math.log10(sel)), rel_tol=1e-12)
    assert math.isclose(chebyshev_order(sel, ap, as_), math.acosh(math.sqrt(d)) / math.acosh(sel), rel_tol=1e-12)


@pytest.mark.parametrize("sel,ap,as_", CASES)
def test_integer_orders_match_scipy_order_functions(sel, ap, as_):
    # source: scipy.signal (reference library) — buttord/cheb1ord/cheb2ord/ellipord, analog=True
    wp, ws = 1.0, sel
    refs = {
        Family.BUTTERWORTH: signal.buttord(wp, ws, ap, as_, analog=True)[0],
        Family.CHEBYSHEV1: signal.cheb1ord(wp, ws, ap, as_, analog=True)[0],
        Family.CHEBYSHEV2: signal.cheb2ord(wp, ws, ap, as_, analog=True)[0],
        Family.ELLIPTIC: signal.ellipord(wp, ws, ap, as_, analog=True)[0],
    }
    for fam, n_ref in refs.items():
        if n_ref > 20:
            continue
        a = design_by_requirement("lowpass", fam, 1000.0, 1000.0 * sel, ap, as_)
        assert a.order == n_ref, (fam, a.order, n_ref)


def test_elliptic_degree_equation_independent_of_scipy_signal():
    # source: R. W. Daniels, Approximation Methods for Electronic Filter Design, 1974, ch. 5,
    # degree equation n = K(k)K'(k1)/(K'(k)K(k1)); K by the arithmetic-geometric mean
    # (Abramowitz & Stegun 17.6), independent of scipy.special
    def agm_k(b):          # K of the modulus whose complement is b: pi / (2 AGM(1, b))
        a = 1.0
        for _ in range(40):
            a, b = (a + b) / 2, math.sqrt(a * b)
        return math.pi / (2 * a)

    for sel, ap, as_ in CASES:
        k, k1 = 1 / sel, math.sqrt((10 ** (ap / 10) - 1) / (10 ** (as_ / 10) - 1))
        K = agm_k(math.sqrt(1 - k * k))
        Kp = agm_k(k)
        K1 = agm_k(math.sqrt(1 - k1 * k1))
        K1p = agm_k(k1)
        n = K * K1p / (Kp * K1)
        assert math.isclose(elliptic_order(sel, ap, as_), n, rel_tol=1e-8)


@pytest.mark.parametrize("n", [1, 2, 3, 5, 8, 12])
@pytest.mark.parametrize("ap,as_", [(0.1, 40.0), (1.0, 80.0), (0.01, 120.0)])
def test_elliptic_stopband_edge_is_where_the_loss_reaches_the_attenuation(n, ap, as_):
    # the theta-function inverse of the degree equation against a root of the actual response
    # source: scipy.signal (reference library) — ellipap response, root by brentq
    proto = prototype(Family.ELLIPTIC, n, ap, as_)
    ws = 1.0 / elliptic_selectivity(n, ap, as_)

    def f(w):
        return loss_db(zpk_response(proto.zeros, proto.poles, proto.gain, np.array([w])))[0] - as_

    zero1 = np.min(np.abs(proto.zeros.imag)) if proto.zeros.size else 10 * ws
    root = brentq(f, 1.0 + 1e-12, zero1 * (1 - 1e-9) if proto.zeros.size else 10 * ws)
    assert math.isclose(ws, root, rel_tol=1e-8)


@pytest.mark.parametrize("family", [Family.BUTTERWORTH, Family.CHEBYSHEV1, Family.CHEBYSHEV2,
                                    Family.BESSEL, Family.LEGENDRE, Family.LINKWITZ_RILEY])
@pytest.mark.parametrize("n", [2, 4, 6])
def test_frequency_at_loss_inverts_the_response(family, n):
    rp, rs = 0.5, 45.0
    proto = prototype(family, n, rp if family is Family.CHEBYSHEV1 else None,
                      rs if family is Family.CHEBYSHEV2 else None)
    for loss in (rp, 3.0103, 20.0, rs):
        w = frequency_at_loss(family, n, loss, rp if family is Family.CHEBYSHEV1 else None,
                              rs if family is Family.CHEBYSHEV2 else None)
        got = loss_db(zpk_response(proto.zeros, proto.poles, proto.gain, np.array([w])))[0]
        assert abs(got - loss) <= 1e-9 * max(loss, 1.0)


@pytest.mark.parametrize("family", [Family.BESSEL, Family.LEGENDRE])
def test_searched_order_is_minimal(family):
    # an order-by-order search: order n meets the requirement, order n-1 does not
    sel, ap, as_ = 8.0, 1.0, 40.0
    a = design_by_requirement("lowpass", family, 1000.0, 1000.0 * sel, ap, as_)
    n = a.order
    for m, ok in ((n, True), (n - 1, False)):
        w_p = frequency_at_loss(family, m, ap)
        w_s = frequency_at_loss(family, m, as_)
        assert (w_s / w_p <= sel) is ok     # the achieved transition fits the required one


def test_linkwitz_riley_order_is_even_and_minimal():
    a = design_by_requirement(ResponseType.LOWPASS, Family.LINKWITZ_RILEY, 100.0, 400.0, 1.0, 60.0)
    assert a.order == 8     # log(D)/log(4) = 6.50 -> 7 -> next even
    assert a.order % 2 == 0
    # order n-2 would not suffice: |H| = 1/(1 + w^n), its transition ratio is wider than 4
    m = a.order - 2
    if m >= 2:
        wp = (10 ** (1.0 / 20) - 1) ** (1 / m)
        ws = (10 ** (60.0 / 20) - 1) ** (1 / m)
        assert ws / wp > 4.0
