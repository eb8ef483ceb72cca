"""Normalized lowpass prototypes of every family.

Each prototype is returned in its family's *natural* normalization, with
frequencies in rad/s of the normalized variable (edge at 1 rad/s):

============== ==============================================================
family         the frequency 1 rad/s is ...
============== ==============================================================
butterworth    the -3.01 dB (half-power) point
chebyshev1     the edge of the ripple band (loss = passband ripple)
chebyshev2     the stopband edge (loss = stopband attenuation)
elliptic       the edge of the ripple band (loss = passband ripple)
bessel         the -3.01 dB point
legendre       the -3.01 dB point
linkwitz_riley the crossover point (-6.02 dB)
============== ==============================================================

Gain normalization: the passband peak of ``|H(j w)|`` is 1 (0 dB) for every
family.  For even-order Chebyshev I and elliptic prototypes the DC gain is
therefore ``10**(-ripple/20)``.

References
----------
.. [1] S. Butterworth, "On the theory of filter amplifiers", Wireless
       Engineer 7, 1930 (pole positions on the unit circle).
.. [2] A. Antoniou, Digital Filters: Analysis, Design, and Applications,
       2nd ed., McGraw-Hill 1993, sec. 5.3-5.4 (Chebyshev and inverse
       Chebyshev pole and zero formulas).
.. [3] A. Papoulis, "Optimum filters with monotonic response", Proc. IRE
       46(3), 1958, pp. 606-609; and "On monotonic response filters",
       Proc. IRE 47, 1959 (the optimum-L polynomial, odd and even orders).
.. [4] W. E. Thomson, "Delay networks having maximally flat frequency
       characteristics", Proc. IEE 96 (III), 1949 (Bessel polynomials).
.. [5] S. H. Linkwitz, "Active crossover networks for noncoincident
       drivers", J. Audio Eng. Soc. 24(1), 1976 (squared Butterworth).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

import numpy as np
from numpy.polynomial import polynomial as nppoly

from .types import Family


@dataclass(frozen=True, eq=False)
class Prototype:
    """A normalized lowpass prototype (natural normalization, see module docstring).

    Attributes
    ----------
    zeros : ndarray of complex, shape (nz,)
        Finite zeros, rad/s (normalized).
    poles : ndarray of complex, shape (n,)
        Poles, rad/s (normalized), all in the open left half plane.
    gain : float
        Gain ``k`` of ``H(s) = k * prod(s - z) / prod(s - p)``.
    """

    zeros: np.ndarray
    poles: np.ndarray
    gain: float


def _frozen(a) -> np.ndarray:
    a = np.atleast_1d(np.asarray(a, dtype=complex)).copy()
    a.setflags(write=False)
    return a


def _dc_gain_for(zeros: np.ndarray, poles: np.ndarray, dc: float) -> float:
    """Gain ``k`` that makes ``|H(0)| = dc`` (zeros must not be at the origin)."""
    return float(dc * np.real(np.prod(-poles) / np.prod(-zeros)))


def butterworth(n: int) -> Prototype:
    """Butterworth poles ``exp(j*pi*(2k + n - 1)/(2n))``, k = 1..n [1]_; -3 dB at 1 rad/s."""
    k = np.arange(1, n + 1)
    p = np.exp(1j * np.pi * (2 * k + n - 1) / (2 * n))
    p = np.where(np.abs(p.imag) < 1e-15, p.real + 0j, p)
    return Prototype(_frozen([]), _frozen(p), 1.0)


def _cheb_poles(n: int, eps: float) -> np.ndarray:
    """Chebyshev I poles, ripple-band edge at 1 rad/s (Antoniou [2]_, eq. 5.23)."""
    mu = np.arcsinh(1.0 / eps) / n
    theta = np.pi * (2 * np.arange(1, n + 1) - 1) / (2 * n)
    p = -np.sinh(mu) * np.sin(theta) + 1j * np.cosh(mu) * np.cos(theta)
    return np.where(np.abs(np.cos(theta)) < 1e-15, p.real + 0j, p)


def chebyshev1(n: int, ripple_db: float) -> Prototype:
    """Chebyshev type I: equiripple passband of ``ripple_db`` up to 1 rad/s [2]_."""
    eps = np.sqrt(10.0 ** (ripple_db / 10.0) - 1.0)
    p = _cheb_poles(n, eps)
    dc = 1.0 if n % 2 else 1.0 / np.sqrt(1.0 + eps * eps)
    return Prototype(_frozen([]), _frozen(p), float(dc * np.real(np.prod(-p))))


def chebyshev2(n: int, attenuation_db: float) -> Prototype:
    """Inverse Chebyshev: monotonic passband, equiripple stopband from 1 rad/s [2]_.

    Zeros ``j/cos(theta_k)``; poles are the reciprocals of the Chebyshev I poles
    of ``eps = 1/sqrt(10**(A/10) - 1)``.
    """
    eps = 1.0 / np.sqrt(10.0 ** (attenuation_db / 10.0) - 1.0)
    p = 1.0 / _cheb_poles(n, eps)
    p = np.where(np.abs(p.imag) < 1e-15 * np.abs(p), p.real + 0j, p)
    theta = np.pi * (2 * np.arange(1, n + 1) - 1) / (2 * n)
    c = np.cos(theta)
    c = c[np.abs(c) > 1e-12]
    z = 1j / c
    return Prototype(_frozen(z), _frozen(p), _dc_gain_for(z, p, 1.0))


def elliptic(n: int, ripple_db: float, attenuation_db: float) -> Prototype:
    """Cauer (elliptic) prototype: ripple band edge at 1 rad/s.

    Uses scipy.signal.ellipap (Jacobi elliptic functions); the stopband edge is
    ``1/k`` with ``k`` from the degree equation (see ``order.elliptic_selectivity``).
    """
    from scipy.signal import ellipap

    z, p, k = ellipap(n, ripple_db, attenuation_db)
    z = 1j * np.abs(np.imag(z)) * np.sign(np.imag(z))
    return Prototype(_frozen(z), _frozen(p), float(np.real(k)))


def bessel(n: int) -> Prototype:
    """Bessel-Thomson prototype [4]_ normalized to -3.01 dB at 1 rad/s, DC gain 1.

    Poles from scipy.signal.besselap (``norm='mag'``).
    """
    from scipy.signal import besselap

    _, p, _ = besselap(n, norm="mag")
    p = np.where(np.abs(p.imag) < 1e-14 * np.abs(p), p.real + 0j, p)
    return Prototype(_frozen([]), _frozen(p), float(np.real(np.prod(-p))))


def _legendre_power_series(m: int) -> list[list[Fraction]]:
    """Legendre polynomials P_0..P_m as exact power series in x (Bonnet's recursion)."""
    polys = [[Fraction(1)], [Fraction(0), Fraction(1)]]
    for i in range(1, m):
        a = [Fraction(0)] + [Fraction(2 * i + 1, i + 1) * c for c in polys[i]]
        b = [Fraction(i, i + 1) * c for c in polys[i - 1]] + [Fraction(0), Fraction(0)]
        polys.append([x - y for x, y in zip(a, b)])
    return polys[: m + 1]


def _padd(a: list, b: list) -> list:
    m = max(len(a), len(b))
    return [(a[i] if i < len(a) else 0) + (b[i] if i < len(b) else 0) for i in range(m)]


def _pmul(a: list, b: list) -> list:
    r = [Fraction(0)] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            r[i + j] += x * y
    return r


@lru_cache(maxsize=None)
def legendre_polynomial_exact(n: int) -> tuple[Fraction, ...]:
    """Papoulis' optimum-L polynomial ``L_n(u)``, ``u = w**2``, exact, lowest power first.

    ``|H(j w)|**2 = 1 / (1 + L_n(w**2))`` with ``L_n(0) = 0``, ``L_n(1) = 1``,
    ``dL_n/du >= 0`` and the steepest slope at ``u = 1`` of all such polynomials [3]_:

    - n = 2k + 1: ``L_n = c * integral_{-1}^{2u-1} (sum_{i=0}^{k} (2i+1) P_i(x))**2 dx``;
    - n = 2k + 2: ``L_n = c * integral_{-1}^{2u-1} (x + 1) (sum_i (2i+1) P_i(x))**2 dx``,
      the sum over the i of the parity of k only;

    with ``c`` such that ``L_n(1) = 1``.  Computed in rational arithmetic: the
    float route (Legendre series, then ``x = 2u - 1``) loses 5 digits by order 20
    through cancellation.
    """
    if n < 1:
        raise ValueError("order must be >= 1")
    if n % 2:
        k = (n - 1) // 2
        idx = range(k + 1)
    else:
        k = (n - 2) // 2
        idx = [i for i in range(k + 1) if i % 2 == k % 2]
    polys = _legendre_power_series(k)
    s = [Fraction(0)]
    for i in idx:
        s = _padd(s, [(2 * i + 1) * c for c in polys[i]])
    sq = _pmul(s, s)
    if n % 2 == 0:
        sq = _pmul(sq, [Fraction(1), Fraction(1)])
    integ = [Fraction(0)] + [c / (i + 1) for i, c in enumerate(sq)]
    integ[0] -= sum(c * (-1) ** i for i, c in enumerate(integ))    # lower bound x = -1
    pu = [Fraction(0)]
    term = [Fraction(1)]
    for c in integ:                                                  # x = 2u - 1
        pu = _padd(pu, [c * t for t in term])
        term = _pmul(term, [Fraction(-1), Fraction(2)])
    total = sum(pu)
    return tuple(c / total for c in pu)


def legendre_polynomial(n: int) -> tuple[float, ...]:
    """:func:`legendre_polynomial_exact` rounded to float (powers of u, lowest first)."""
    return tuple(float(c) for c in legendre_polynomial_exact(n))


def legendre(n: int) -> Prototype:
    """Optimum-L (Legendre-Papoulis) prototype [3]_, -3.01 dB at 1 rad/s, DC gain 1.

    The poles are the left-half-plane roots of ``1 + L_n(-s**2)``, found as the
    roots ``u_i`` of ``1 + L_n(u)`` (degree n, better conditioned than the
    degree-2n polynomial in s) and ``s_i = -sqrt(-u_i)`` taken in the left half
    plane, then refined by Newton steps on ``1 + L_n(-s**2)``.
    """
    c = np.array(legendre_polynomial(n))
    c1 = c.copy()
    c1[0] += 1.0
    u = nppoly.polyroots(c1)
    s = np.sqrt(-u.astype(complex))
    s = np.where(s.real > 0, -s, s)
    # Newton polish on f(s) = 1 + L(-s^2)
    dc1 = nppoly.polyder(c1)
    for _ in range(3):
        uu = -s * s
        f = nppoly.polyval(uu, c1)
        df = nppoly.polyval(uu, dc1) * (-2.0 * s)
        s = s - f / df
    s = np.where(np.abs(s.imag) < 1e-14 * np.abs(s), s.real + 0j, s)
    return Prototype(_frozen([]), _frozen(s), float(np.real(np.prod(-s))))


def linkwitz_riley(n: int) -> Prototype:
    """Linkwitz-Riley [5]_: the square of Butterworth of order n/2 (n even), -6.02 dB at 1 rad/s."""
    half = butterworth(n // 2)
    p = np.concatenate([half.poles, half.poles])
    return Prototype(_frozen([]), _frozen(p), 1.0)


@lru_cache(maxsize=512)
def prototype(family: Family, n: int, ripple_db: float | None = None,
              attenuation_db: float | None = None) -> Prototype:
    """The natural-normalized prototype of ``family`` and order ``n`` (cached; pure).

    Parameters
    ----------
    family : Family
    n : int
        Prototype order (>= 1; even for Linkwitz-Riley).
    ripple_db : float, optional
        Passband ripple (dB), Chebyshev I and elliptic.
    attenuation_db : float, optional
        Stopband attenuation (dB), Chebyshev II and elliptic.
    """
    if family is Family.BUTTERWORTH:
        return butterworth(n)
    if family is Family.CHEBYSHEV1:
        return chebyshev1(n, ripple_db)
    if family is Family.CHEBYSHEV2:
        return chebyshev2(n, attenuation_db)
    if family is Family.ELLIPTIC:
        return elliptic(n, ripple_db, attenuation_db)
    if family is Family.BESSEL:
        return bessel(n)
    if family is Family.LEGENDRE:
        return legendre(n)
    if family is Family.LINKWITZ_RILEY:
        return linkwitz_riley(n)
    raise ValueError(f"unknown family {family!r}")
