"""Real-coefficient polynomials and their ratios on the imaginary axis, element by element.

A polynomial ``p(sigma) = sum_k c_k sigma^k`` with real ``c_k``, evaluated at
``sigma = j x`` (``x = omega / w_ref``, real), splits into its even and odd
parts (``j^2 = -1``):

    Re p(jx) = E(v) = sum_m c_{2m} v^m,    Im p(jx) = x O(v),  O(v) = sum_m c_{2m+1} v^m,

with ``v = -x^2``.  ``E`` and ``O`` are evaluated by Horner's scheme in the
real variable ``v`` (D. E. Knuth, *The Art of Computer Programming*,
vol. 2, 3rd ed., 1997, sec. 4.6.4, "Evaluation of polynomials", which also
splits a polynomial into its even and odd parts): half the steps of a complex
Horner recurrence in ``sigma``, with real multiplications and additions only.  A quotient ``N/D`` is ``N conj(D) / |D|^2``, written as
``(a + jb)(c - jd)/(c^2 + d^2)`` with the factors ``c/|D|^2`` and
``d/|D|^2`` formed first so that no intermediate exceeds ``|N|/|D|``; points
where ``|D|^2`` leaves the safe range of float64 fall back to numpy's complex
division (Smith's algorithm) one element at a time.

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


def _split(coef: np.ndarray) -> np.ndarray:
    """(Tb, n) ascending coefficients -> (L, Tb, 2, 1): ``[m, :, 0]`` = c_{2m}, ``[m, :, 1]`` = c_{2m+1} (zero padded)."""
    tb, n = coef.shape
    half = (n + 1) // 2
    out = np.zeros((half, tb, 2, 1))
    out[:, :, 0, 0] = coef[:, 0::2].T
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

    def planar(self, coef: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        """Planar values (T, 2, F) of the polynomials in the rows of ``coef`` (T, n), ascending powers of sigma."""
        if out is None:
            out = np.empty((coef.shape[0], 2, self.size))
        c = _split(coef)
        half = c.shape[0]
        if half == 1:
            out[...] = c[0]
        else:
            np.multiply(c[half - 1], self.v, out=out)
            out += c[half - 2]
            for m in range(half - 3, -1, -1):
                out *= self.v
                out += c[m]
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
        """Write ``N(sigma)/D(sigma)`` into ``out`` (T, F) complex; ``num`` (T, n) and ``den`` (T, d) coefficients."""
        t = den.shape[0]
        nb = min(t, self.block)
        dbuf = np.empty((nb, 2, self.size))
        nbuf = np.empty((nb, 2, self.size)) if num.shape[1] > 1 else None
        tmp = np.empty((4, nb, self.size))
        for t0 in range(0, t, self.block):
            t1 = min(t, t0 + self.block)
            k = t1 - t0
            d = self.planar(den[t0:t1], dbuf[:k])
            n = num[t0:t1, :1] if nbuf is None else self.planar(num[t0:t1], nbuf[:k])
            o = out[t0:t1]
            quotient(n, d, o.real, o.imag, tmp[:, :k])
        return out


def multiply(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Product of two planar values (broadcasting), planar: ``(a0 b0 - a1 b1, a0 b1 + a1 b0)``."""
    shape = np.broadcast_shapes(a.shape, b.shape)
    out = np.empty(shape)
    np.multiply(a[:, 0], b[:, 0], out=out[:, 0])
    out[:, 0] -= a[:, 1] * b[:, 1]
    np.multiply(a[:, 0], b[:, 1], out=out[:, 1])
    out[:, 1] += a[:, 1] * b[:, 0]
    return out


def quotient(n: np.ndarray, d: np.ndarray, out_re: np.ndarray, out_im: np.ndarray,
             tmp: np.ndarray | None = None) -> None:
    """``N/D`` into ``out_re``, ``out_im`` (T, F); ``N`` planar or real (T, 1), ``D`` planar (T, 2, F).

    ``tmp`` is optional scratch of shape (4, T, F).  See the module notes.
    """
    c, e = d[:, 0], d[:, 1]
    if tmp is None:
        tmp = np.empty((4,) + c.shape)
    mag2, p, q, w = tmp
    np.multiply(c, c, out=mag2)
    np.multiply(e, e, out=p)
    mag2 += p
    safe = bool(mag2.min() > SAFE_MIN) and bool(mag2.max() < SAFE_MAX)
    with contextlib.nullcontext() if safe else np.errstate(all="ignore"):
        if n.ndim == 2:                      # real numerator a: c (a/|D|^2) + j e (-a/|D|^2)
            np.divide(-n, mag2, out=p)
            np.multiply(e, p, out=out_im)
            np.negative(p, out=p)
            np.multiply(c, p, out=out_re)
        else:                                # (a + jb)(c - je)/|D|^2 = (a p + b q) + j (b p - a q)
            np.divide(c, mag2, out=p)
            np.divide(e, mag2, out=q)
            a, b = n[:, 0], n[:, 1]
            np.multiply(a, p, out=out_re)
            np.multiply(b, q, out=w)
            out_re += w
            np.multiply(b, p, out=out_im)
            np.multiply(a, q, out=w)
            out_im -= w
    if not safe:
        bad = ~((mag2 > SAFE_MIN) & (mag2 < SAFE_MAX))
        nc = np.broadcast_to(n, bad.shape)[bad] + 0j if n.ndim == 2 else n[:, 0][bad] + 1j * n[:, 1][bad]
        h = nc / (c[bad] + 1j * e[bad])
        out_re[bad] = h.real
        out_im[bad] = h.imag


__all__ = ["GridEvaluator", "multiply", "quotient", "BLOCK_BYTES", "SAFE_MIN", "SAFE_MAX"]
