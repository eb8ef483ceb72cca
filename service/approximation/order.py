"""Order equations and the loss-to-frequency inverse of each prototype.

All frequencies are of the normalized lowpass prototype (rad/s, the family's
natural edge at 1), and every requirement is first reduced to the lowpass
selectivity ``omega_s = (stopband edge)/(passband edge) > 1`` (see
``transforms.normalize_requirement``).

References
----------
.. [1] A. Antoniou, Digital Filters: Analysis, Design, and Applications, 2nd
       ed., McGraw-Hill 1993, eqs. 5.13 (Butterworth order), 5.29 (Chebyshev
       order), 5.49 (elliptic degree equation).
.. [2] R. W. Daniels, Approximation Methods for Electronic Filter Design,
       McGraw-Hill 1974, ch. 5 (degree equation
       ``n = K(k) K'(k1) / (K'(k) K(k1))``, nome and theta-function inverse).
.. [3] M. Abramowitz, I. A. Stegun, Handbook of Mathematical Functions, 1964,
       16.38.5, 16.38.7 (``k = theta_2(q)**2 / theta_3(q)**2``).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy.optimize import brentq
from scipy.special import ellipk, ellipkm1

from .evaluate import group_delay_s, loss_db, zpk_response
from .prototypes import legendre_polynomial, prototype
from .types import Family

HALF_POWER_DB = 10.0 * np.log10(2.0)   # 3.0103 dB


def _pow_m1(db: float, per: float = 10.0) -> float:
    """``10**(db/per) - 1`` without cancellation for small ``db``."""
    return float(np.expm1(db / per * np.log(10.0)))


# ---------------------------------------------------------------- order equations
def butterworth_order(selectivity: float, ripple_db: float, attenuation_db: float) -> float:
    """Real-valued Butterworth order [1]_ eq. 5.13:
    ``n = log10(D) / (2 log10 omega_s)``, ``D = (10**(As/10)-1)/(10**(Ap/10)-1)``."""
    d = _pow_m1(attenuation_db) / _pow_m1(ripple_db)
    return float(np.log10(d) / (2.0 * np.log10(selectivity)))


def chebyshev_order(selectivity: float, ripple_db: float, attenuation_db: float) -> float:
    """Real-valued Chebyshev (I and II) order [1]_ eq. 5.29:
    ``n = acosh(sqrt(D)) / acosh(omega_s)``."""
    d = _pow_m1(attenuation_db) / _pow_m1(ripple_db)
    return float(np.arccosh(np.sqrt(d)) / np.arccosh(selectivity))


def elliptic_order(selectivity: float, ripple_db: float, attenuation_db: float) -> float:
    """Real-valued elliptic order from the degree equation [2]_:

    ``n = K(k) K'(k1) / (K'(k) K(k1))`` with ``k = 1/omega_s`` and
    ``k1 = sqrt((10**(Ap/10)-1)/(10**(As/10)-1))``; ``K`` is the complete
    elliptic integral of the first kind (scipy.special.ellipk, parameter
    ``m = k**2``) and ``K'(k) = K(sqrt(1-k**2))`` (ellipkm1 for accuracy).
    """
    m = 1.0 / selectivity ** 2
    m1 = _pow_m1(ripple_db) / _pow_m1(attenuation_db)
    return float(ellipk(m) * ellipkm1(m1) / (ellipkm1(m) * ellipk(m1)))


def linkwitz_riley_order(selectivity: float, ripple_db: float, attenuation_db: float) -> float:
    """Real-valued Linkwitz-Riley order: ``|H| = 1/(1 + w**n)`` gives
    ``n = log((10**(As/20)-1)/(10**(Ap/20)-1)) / log(omega_s)``."""
    d = _pow_m1(attenuation_db, 20.0) / _pow_m1(ripple_db, 20.0)
    return float(np.log(d) / np.log(selectivity))


@lru_cache(maxsize=1024)
def elliptic_selectivity(n: int, ripple_db: float, attenuation_db: float) -> float:
    """Selectivity ``k = w_p / w_s`` of the order-n elliptic prototype.

    Inverse of the degree equation through the nome [2]_, [3]_:
    ``q = exp(-pi K'(k1) / (n K(k1)))``, ``k = (theta_2(q) / theta_3(q))**2``.
    The prototype's stopband edge is ``1/k`` rad/s.
    """
    m1 = _pow_m1(ripple_db) / _pow_m1(attenuation_db)
    q = float(np.exp(-np.pi * ellipkm1(m1) / (n * ellipk(m1))))
    j = np.arange(0, 40)
    num = 2.0 * q ** 0.25 * np.sum(q ** (j * (j + 1.0)))
    den = 1.0 + 2.0 * np.sum(q ** (j[1:] ** 2.0))
    return float((num / den) ** 2)


# ---------------------------------------------------------------- loss -> frequency
def _proto_loss(proto, w: float) -> float:
    return float(loss_db(zpk_response(proto.zeros, proto.poles, proto.gain, np.array([w])))[0])


def _bracket_root(f, lo: float, hi: float) -> float:
    while f(hi) < 0.0:
        lo, hi = hi, hi * 2.0
    return brentq(f, lo, hi, xtol=1e-15, rtol=8.9e-16, maxiter=200)


@lru_cache(maxsize=4096)
def frequency_at_loss(family: Family, n: int, loss: float, ripple_db: float | None = None,
                      attenuation_db: float | None = None) -> float:
    """Prototype frequency (rad/s, natural normalization) where the loss is ``loss`` dB.

    The loss must lie in the monotonic part of the response: for Chebyshev I
    and elliptic ``loss >= ripple``; for Chebyshev II ``loss <= attenuation``;
    for elliptic also ``loss <= attenuation`` (transition band). Closed forms for
    Butterworth, Chebyshev I/II and Linkwitz-Riley; a bracketed root (Brent)
    of the exact response for the others.
    """
    if family is Family.BUTTERWORTH:
        return float(_pow_m1(loss) ** (1.0 / (2 * n)))
    if family is Family.LINKWITZ_RILEY:
        return float(_pow_m1(loss, 20.0) ** (1.0 / n))
    if family is Family.CHEBYSHEV1:
        d = np.sqrt(_pow_m1(loss) / _pow_m1(ripple_db))
        return float(np.cosh(np.arccosh(max(d, 1.0)) / n))
    if family is Family.CHEBYSHEV2:
        d = np.sqrt(_pow_m1(attenuation_db) / _pow_m1(loss))
        return float(1.0 / np.cosh(np.arccosh(max(d, 1.0)) / n))
    if family is Family.ELLIPTIC:
        if loss <= ripple_db:
            return 1.0
        ws = 1.0 / elliptic_selectivity(n, ripple_db, attenuation_db)
        if loss >= attenuation_db:
            return ws
        proto = prototype(family, n, ripple_db, attenuation_db)
        return brentq(lambda w: _proto_loss(proto, w) - loss, 1.0, ws, xtol=1e-15, rtol=8.9e-16)
    if family is Family.LEGENDRE:
        c = np.array(legendre_polynomial(n))
        target = _pow_m1(loss)
        return float(np.sqrt(_bracket_root(lambda u: np.polynomial.polynomial.polyval(u, c) - target,
                                           0.0, 1.0)))
    if family is Family.BESSEL:
        proto = prototype(family, n)
        return _bracket_root(lambda w: _proto_loss(proto, w) - loss, 0.0, 1.0)
    raise ValueError(f"unknown family {family!r}")


@lru_cache(maxsize=1024)
def bessel_delay_deviation_frequency(n: int, deviation_pct: float) -> float:
    """Prototype frequency (rad/s, -3 dB normalization) where the group delay has
    fallen ``deviation_pct`` percent below its DC value (Bessel delay is monotonic)."""
    proto = prototype(Family.BESSEL, n)
    tau0 = float(group_delay_s(proto.poles, proto.zeros, [0.0])[0])
    target = 1.0 - deviation_pct / 100.0

    def f(w):
        return target - float(group_delay_s(proto.poles, proto.zeros, [w])[0]) / tau0

    return _bracket_root(f, 0.0, 1.0)


def bessel_delay_deviation_pct(n: int, w: float) -> float:
    """Group-delay deviation (percent below the DC delay) of the Bessel prototype at ``w`` rad/s."""
    proto = prototype(Family.BESSEL, n)
    t = group_delay_s(proto.poles, proto.zeros, [0.0, w])
    return float(100.0 * (1.0 - t[1] / t[0]))
