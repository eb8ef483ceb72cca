"""Real-coefficient polynomials and their ratios on the imaginary axis, element by element.

A polynomial ``p(sigma) = sum_k c_k sigma^k`` with real ``c_k``, evaluated at
``sigma = j x`` (``x = omega / w_ref``, real), splits into its even and odd
parts (``j^2 = -1``):

    Re p(jx) = E(v) = sum_m c_{2m} v^m,    Im p(jx) = x O(v),  O(v) = sum_m c_{2m+1} v^m,

with ``v = -x^2``.  ``E`` and ``O`` are evaluated by Horner's scheme in the
real variable ``v`` (D. E. Knuth, *The Art of Computer Programming*,
vol. 2, 3rd ed., 1997, sec. 4.6.4, "Evaluation of polynomials", which also
splits a polynomial into its even and odd parts): half the steps of a complex
Horner recurrence in ``sigma``, with real multiplications and additions only.

A quotient ``N/D`` is ``N conj(D) / |D|^2``: ``conj(D)`` is evaluated directly
(the odd coefficients negated), ``r = 1/(c^2 + d^2)`` once, and the
numerator's parts are scaled by ``r`` before they meet ``conj(D)``, so no
intermediate exceeds ``|N|/|D|``; a constant numerator is folded into the
denominator's coefficients (``a/D = 1/(D/a)``).  Points where ``|D|^2``
leaves the safe range of float64 fall back to numpy's complex division
(Smith's algorithm) one element at a time.

Every output element is computed by the same sequence of correctly rounded
IEEE 754 operations on its own trial's coefficients and its own frequency, so
a trial's value does not depend on the other trials of the batch, on their
number, or on how the batch is split into blocks (unlike a matrix product,
whose summation order depends on the position of a row in the BLAS kernel's
blocking).  Work is done in blocks of trials small enough to stay in cache.
"""

from __future__ import annotations

import contextlib

import numpy as np

BLOCK_BYTES = 1 << 19
"""Target size of one block's Horner buffer (both parts, float64); the blocking never changes a value."""

SAFE_MIN = 1e-290
SAFE_MAX = 1e290
"""Range of ``|D|^2`` where the real-arithmetic quotient is exact to rounding; outside, complex division."""


def _split(coef: np.ndarray, conjugate: bool = False) -> np.ndarray:
    """(Tb, n) ascending coefficients -> (L, Tb, 2, 1): ``[m, :, 0]`` = c_{2m}, ``[m, :, 1]`` = +-c_{2m+1} (zero padded).

    With ``conjugate`` the odd coefficients change sign: the planar value is
    then that of ``conj(p(jx)) = p(-jx)``.
    """
    tb, n = coef.shape
    half = (n + 1) // 2
    out = np.zeros((half, tb, 2, 1))
    out[:, :, 0, 0] = coef[:, 0::2].T
    if conjugate:
        np.negative(coef[:, 1::2].T, out=out[: n // 2, :, 1, 0])
    else:
        out[: n // 2, :, 1, 0] = coef[:, 1::2].T
    return out


class GridEvaluator:
    """Evaluate real-coefficient polynomials and ratios in ``sigma = j*omega/w_ref`` on a fixed grid.

    Parameters
    ----------
    omega : ndarray, shape (F,)
        Angular frequencies, rad/s (>= 0).
    w_ref : float
        Scaling frequency of the polynomial variable, rad/s (> 0).

    Notes
    -----
    "Planar" values are float64 arrays of shape (T, 2, F) (or (T, 2, 1) for
    a value constant in frequency): ``[:, 0]`` the real part, ``[:, 1]`` the
    imaginary part.
    """

    def __init__(self, omega: np.ndarray, w_ref: float):
        self.x = np.asarray(omega, dtype=float) / w_ref
        self.v = -(self.x * self.x)
        self.size = self.x.size
        self.block = max(1, BLOCK_BYTES // (16 * max(1, self.size)))
        self._v_block = None

    def _tiles(self, rows: int) -> tuple[np.ndarray, np.ndarray]:
        """``v`` repeated to (rows, 2, F) and ``x`` to (rows, F), so that the Horner products run contiguous.

        For more rows than a block, the broadcast originals (same values, same arithmetic).
        """
        if rows > self.block:
            return self.v, self.x
        if self._v_block is None:
            self._v_block = np.broadcast_to(self.v, (self.block, 2, self.size)).copy()
            self._x_block = np.broadcast_to(self.x, (self.block, self.size)).copy()
        return self._v_block[:rows], self._x_block[:rows]

    def planar(self, coef: np.ndarray, out: np.ndarray | None = None, conjugate: bool = False) -> np.ndarray:
        """Planar values (T, 2, F) of the polynomials in the rows of ``coef`` (T, n), ascending powers of sigma.

        With ``conjugate``, the values of the complex conjugates.
        """
        if out is None:
            out = np.empty((coef.shape[0], 2, self.size))
        c = _split(coef, conjugate)
        half = c.shape[0]
        out[...] = c[half - 1]
        if half > 1:
            v, x = self._tiles(out.shape[0])
            for m in range(half - 2, -1, -1):
                out *= v
                out += c[m]
            out[:, 1] *= x
        else:
            out[:, 1] *= self.x
        return out

    def values(self, coef: np.ndarray) -> np.ndarray:
        """Complex values, shape (T, F), of the polynomials in the rows of ``coef`` (T, n)."""
        t = coef.shape[0]
        out = np.empty((t, self.size), dtype=complex)
        buf = np.empty((min(t, self.block), 2, self.size))
        for t0 in range(0, t, self.block):
            t1 = min(t, t0 + self.block)
            b = self.planar(coef[t0:t1], buf[: t1 - t0])
            out.real[t0:t1] = b[:, 0]
            out.imag[t0:t1] = b[:, 1]
        return out

    def ratio(self, num: np.ndarray, den: np.ndarray, out: np.ndarray) -> np.ndarray:
        """Write ``N(sigma)/D(sigma)`` into ``out`` (T, F) complex; ``num`` (T, n) and ``den`` (T, d) coefficients.

        A constant numerator ``a`` is folded into the denominator
        (``N/D = 1/(D/a)``, ``0`` where ``a = 0``).
        """
        t = den.shape[0]
        const = num.shape[1] == 1
        zero = None
        if const:
            a = num[:, 0]
            zero = a == 0
            den = den / np.where(zero, 1.0, a)[:, None]
            zero = zero if zero.any() else None
        nb = min(t, self.block)
        dbuf = np.empty((nb, 2, self.size))
        nbuf = None if const else np.empty((nb, 2, self.size))
        tmp = np.empty((4, nb, self.size))
        for t0 in range(0, t, self.block):
            t1 = min(t, t0 + self.block)
            k = t1 - t0
            d = self.planar(den[t0:t1], dbuf[:k], conjugate=True)
            n = None if const else self.planar(num[t0:t1], nbuf[:k])
            o = out[t0:t1]
            _by_conjugate(n, d[:, 0], d[:, 1], o.real, o.imag, tmp[:, :k])
        if zero is not None:
            out[zero] = 0.0
        return out


def _by_conjugate(n: np.ndarray | None, c: np.ndarray, ec: np.ndarray, out_re: np.ndarray, out_im: np.ndarray,
                  tmp: np.ndarray) -> None:
    """``N/D`` with ``conj(D) = c + j ec`` (T, F) and ``N`` planar (T, 2, F) or None (``N = 1``); see the module notes.

    ``N conj(D) r`` with ``r = 1/|D|^2``, the numerator's parts scaled by ``r``
    first: ``(a r c - b r ec) + j (a r ec + b r c)``.
    """
    mag2, r, ar, br = tmp
    np.multiply(c, c, out=mag2)
    np.multiply(ec, ec, out=r)
    mag2 += r
    safe = bool(mag2.min() > SAFE_MIN) and bool(mag2.max() < SAFE_MAX)
    with contextlib.nullcontext() if safe else np.errstate(all="ignore"):
        np.divide(1.0, mag2, out=r)
        if n is None:
            np.multiply(c, r, out=out_re)
            np.multiply(ec, r, out=out_im)
        else:
            np.multiply(n[:, 0], r, out=ar)
            np.multiply(n[:, 1], r, out=br)
            np.multiply(ar, c, out=out_re)
            np.multiply(br, ec, out=r)
            out_re -= r
            np.multiply(ar, ec, out=out_im)
            np.multiply(br, c, out=r)
            out_im += r
    if not safe:
        bad = ~((mag2 > SAFE_MIN) & (mag2 < SAFE_MAX))
        nc = 1.0 if n is None else np.broadcast_to(n[:, 0], bad.shape)[bad] + 1j * np.broadcast_to(n[:, 1], bad.shape)[bad]
        h = nc / (c[bad] - 1j * ec[bad])
        out_re[bad] = h.real
        out_im[bad] = h.imag


def multiply(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Product of two planar values (broadcasting), planar: ``(a0 b0 - a1 b1, a0 b1 + a1 b0)``."""
    shape = np.broadcast_shapes(a.shape, b.shape)
    out = np.empty(shape)
    np.multiply(a[:, 0], b[:, 0], out=out[:, 0])
    out[:, 0] -= a[:, 1] * b[:, 1]
    np.multiply(a[:, 0], b[:, 1], out=out[:, 1])
    out[:, 1] += a[:, 1] * b[:, 0]
    return out


def quotient(n: np.ndarray, d: np.ndarray) -> np.ndarray:
    """Planar ``N/D`` (T, 2, F) of planar values ``N`` (T, 2, F or 1) and ``D`` (T, 2, F)."""
    out = np.empty(d.shape)
    n = np.broadcast_to(n, d.shape)
    _by_conjugate(n, d[:, 0], -d[:, 1], out[:, 0], out[:, 1], np.empty((4,) + d[:, 0].shape))
    return out


__all__ = ["GridEvaluator", "multiply", "quotient", "BLOCK_BYTES", "SAFE_MIN", "SAFE_MAX"]
