"""Real-coefficient polynomials and their ratios on the imaginary axis, a trial's arithmetic its own.

A polynomial ``p(sigma) = sum_k c_k sigma^k`` with real ``c_k``, at
``sigma = j x`` (``x = omega / w_ref``, real), splits into its even and odd
parts (``j^2 = -1``; e.g. D. E. Knuth, *The Art of Computer Programming*,
vol. 2, 3rd ed., 1997, sec. 4.6.4):

    Re p(jx) = sum_m c_{2m} v^m,    Im p(jx) = sum_m c_{2m+1} x v^m,    v = -x^2,

so each part is a real matrix product of the coefficient rows with a table
of the grid's powers, ``(T, K/2) @ (K/2, F)``: half the work of a complex
Vandermonde product, and no imaginary part to add up.

Layout independence.  A matrix product's rounding can depend on where a row
sits in the batch and on the batch's shape (BLAS kernels switch with the
size: vector kernels for one row, small-matrix kernels, edge kernels for a
partial block of rows, threads above a size).  Here every product has one
fixed shape: :data:`TILE_ROWS` rows (a partial tile is padded with zero
rows) times at most :data:`PRODUCT_COLUMNS` columns (the grid split in fixed
column blocks), so every trial goes through the same kernel, each output
being one chain of multiply-adds over ``k`` in its own SIMD lane.  A trial's
numbers then do not depend on the other trials, their number, or the
chunking (the tests check this bit for bit, a trial alone against the same
trial in batches).  The products stay at or below OpenBLAS's threading
threshold (``m n k <= 4 * 65536``, :data:`PRODUCT_WORK`; OpenBLAS
interface/gemm.c, from memory), so they run on one thread whatever the BLAS
thread setting (the benchmarks measure both settings).  An element-by-element
Horner recurrence gives the same independence with numpy ufuncs only, but
measured 1.7-1.9x slower for the evaluation here (1.3-1.5x for a whole engine
call): one pass over memory per multiply and per add.

A quotient ``N/D`` is ``N conj(D) / |D|^2``: ``conj(D)`` is evaluated
directly (the odd part's sign flipped).  A constant numerator is folded into
the denominator's coefficients (``a/D = 1/(D/a)``) and the result is
``conj(D)`` divided by ``c^2 + d^2``; otherwise ``r = 1/(c^2 + d^2)`` once,
and the numerator's parts are scaled by ``r`` before they meet ``conj(D)``,
so no intermediate exceeds ``|N|/|D|``.  Points where ``|D|^2``
leaves the safe range of float64 fall back to numpy's complex division
(Smith's algorithm) one element at a time.  These steps are element-wise
numpy operations (correctly rounded, the same for every element).
"""

from __future__ import annotations

import contextlib
import math

import numpy as np

from . import polarkernels

TILE_ROWS = 64
"""Rows (trials) of every coefficient-times-powers product; partial tiles are padded.  Any fixed value keeps a
trial's bits independent of its batch; 64 measured 1.4x faster than 16 for the parts of a (1024, 560) chunk
(fewer, larger products; the same bits here)."""

PRODUCT_WORK = 4 * 65536
"""Bound on rows x columns x inner size of one product: OpenBLAS runs smaller products on one thread."""

PRODUCT_COLUMNS = 2048
"""Widest column block of one product (multiple of 8; narrower for high degrees, see PRODUCT_WORK)."""

BLOCK_BYTES = 1 << 20
"""Target size of one block of planar values (a whole number of tiles); the blocking never changes a value."""

SAFE_MIN = 1e-290
SAFE_MAX = 1e290
"""Range of ``|D|^2`` where the real-arithmetic quotient is exact to rounding; outside, complex division."""

NARROW_MIN = 1e-60
NARROW_MAX = 1e60
"""Range of ``|D|^2`` where the phase of ``D`` may be taken in float32 (its parts then lie between 1e-30 and
1e30 in magnitude, well inside float32's normal range)."""

_BOUNDS = np.array([SAFE_MIN, SAFE_MAX, NARROW_MIN, NARROW_MAX])
"""The ranges above as the compiled kernels take them (:mod:`.polarkernels`)."""


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
        self.w_ref = float(w_ref)
        self.size = self.x.size
        tiles = max(1, BLOCK_BYTES // (16 * max(1, self.size) * TILE_ROWS))
        self.block = tiles * TILE_ROWS
        self._tables: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self._scratch: dict[str, np.ndarray] = {}
        self._reference: tuple[np.ndarray, np.ndarray] | None = None     # (reference array, its unit phasors)

    def _buffer(self, name: str, shape: tuple[int, ...]) -> np.ndarray:
        """A scratch array of ``shape`` (float64, uninitialized), kept between calls.

        The blocks here are a few hundred kB: allocated afresh on every call they would be mapped and unmapped
        by the C allocator each time (its mmap threshold), a page fault per 4 kB page -- measured to cost
        more than the arithmetic they hold.  An evaluator serves one thread at a time.
        """
        size = math.prod(shape)
        buf = self._scratch.get(name)
        if buf is None or buf.size < size:
            buf = self._scratch[name] = np.empty(size)
        return buf[:size].reshape(shape)

    def _unit_phasors(self, reference: np.ndarray) -> np.ndarray:
        """:func:`unit_phasors` of ``reference``, kept for the next call with the same array object (a caller
        evaluating chunk after chunk against one reference; an array changed in place in between is not
        seen)."""
        if self._reference is None or self._reference[0] is not reference:
            self._reference = (reference, unit_phasors(reference))
        return self._reference[1]

    def _table(self, half: int) -> tuple[np.ndarray, np.ndarray]:
        """Powers of the grid for ``half`` even and odd coefficients: ``v^m`` and ``x v^m``, each (half, F)."""
        if half not in self._tables:
            m = np.arange(half)[:, None]
            sign = np.where(m % 2 == 0, 1.0, -1.0)
            even = sign * self.x[None, :] ** (2 * m)
            odd = sign * self.x[None, :] ** (2 * m + 1)
            self._tables[half] = (even, odd)
        return self._tables[half]

    def planar(self, coef: np.ndarray, out: np.ndarray | None = None, conjugate: bool = False) -> np.ndarray:
        """Planar values (T, 2, F) of the polynomials in the rows of ``coef`` (T, n), ascending powers of sigma.

        With ``conjugate``, the values of the complex conjugates.
        """
        if out is None:
            out = np.empty((coef.shape[0], 2, self.size))
        self.parts(coef, out[:, 0], out[:, 1], conjugate)
        return out

    def parts(self, coef: np.ndarray, re: np.ndarray, im: np.ndarray, conjugate: bool = False) -> None:
        """Real and imaginary parts of the polynomials in the rows of ``coef`` (T, n) into ``re``, ``im`` (T, F)."""
        t, n = coef.shape
        half = (n + 1) // 2
        even = coef[:, 0::2]
        odd = np.zeros((t, half))
        odd[:, : n // 2] = -coef[:, 1::2] if conjugate else coef[:, 1::2]
        self._products(even, odd, re, im)

    def slopes(self, coef: np.ndarray, d_re: np.ndarray, d_im: np.ndarray, scale: float = 1.0) -> None:
        """Derivatives in ``x`` of the real and imaginary parts of ``p(jx)`` into ``d_re``, ``d_im`` (T, F).

        With ``Re p(jx) = sum_m c_2m (-1)^m x^2m`` and ``Im p(jx) = sum_m c_2m+1 (-1)^m x^(2m+1)``:
        ``d Re/dx = sum_m -(2m+2) c_2m+2 (-1)^m x^(2m+1)`` (the odd table) and
        ``d Im/dx = sum_m (2m+1) c_2m+1 (-1)^m x^2m`` (the even table), the same fixed-shape products
        as :meth:`parts`; every derivative is multiplied by ``scale`` (on the coefficients).
        """
        t, n = coef.shape
        half = (n + 1) // 2
        m = np.arange(half)
        d_even = np.zeros((t, half))                  # multiplies the even table: d Im/dx
        d_even[:, : n // 2] = coef[:, 1::2] * ((2 * m[: n // 2] + 1) * scale)
        d_odd = np.zeros((t, half))                   # multiplies the odd table: d Re/dx
        k = (n - 1) // 2
        d_odd[:, :k] = coef[:, 2::2] * (-(2.0 * m[:k] + 2.0) * scale)
        self._products(d_even, d_odd, d_im, d_re)

    def _products(self, even: np.ndarray, odd: np.ndarray, re: np.ndarray, im: np.ndarray) -> None:
        """``re = even @ (even table)``, ``im = odd @ (odd table)`` for rows (T, half), in fixed-shape tiles."""
        t, half = even.shape
        te, to = self._table(half)
        width = max(8, min(PRODUCT_COLUMNS, PRODUCT_WORK // (TILE_ROWS * half)) // 8 * 8)
        ce = np.zeros((TILE_ROWS, half))
        co = np.zeros((TILE_ROWS, half))
        pad = self._buffer("pad", (2, TILE_ROWS, self.size))
        for t0 in range(0, t, TILE_ROWS):
            t1 = min(t, t0 + TILE_ROWS)
            k = t1 - t0
            ce[:k], ce[k:] = even[t0:t1], 0.0
            co[:k], co[k:] = odd[t0:t1], 0.0
            dr, di = (re[t0:t1], im[t0:t1]) if k == TILE_ROWS else (pad[0], pad[1])
            for f0 in range(0, self.size, width):
                f1 = min(self.size, f0 + width)
                np.matmul(ce, te[:, f0:f1], out=dr[:, f0:f1])
                np.matmul(co, to[:, f0:f1], out=di[:, f0:f1])
            if k < TILE_ROWS:
                re[t0:t1], im[t0:t1] = pad[0, :k], pad[1, :k]

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
        const, den, zero = _fold_constant(num, den)
        nb = min(t, self.block)
        dbuf = self._buffer("den", (2, nb, self.size))   # parts in separate planes: the quotient runs contiguous
        nbuf = None if const else self._buffer("num", (nb, 2, self.size))
        tmp = self._buffer("tmp", (4, nb, self.size))
        for t0 in range(0, t, self.block):
            t1 = min(t, t0 + self.block)
            k = t1 - t0
            self.parts(den[t0:t1], dbuf[0, :k], dbuf[1, :k], conjugate=True)
            n = None if const else self.planar(num[t0:t1], nbuf[:k])
            o = out[t0:t1]
            _by_conjugate(n, dbuf[0, :k], dbuf[1, :k], o.real, o.imag, tmp[:, :k])
        if zero is not None:
            out[zero] = 0.0
        return out


    def ratio_polar(self, num: np.ndarray, den: np.ndarray, power: np.ndarray, phase: np.ndarray | None = None,
                    delay: np.ndarray | None = None, reference: np.ndarray | None = None) -> None:
        """``H = N(sigma)/D(sigma)`` on the grid as ``|H|^2``, the principal ``arg H`` and the group delay.

        Parameters
        ----------
        num, den : ndarray, shapes (T, n) and (T, d)
            Coefficients, ascending powers of sigma.
        power : ndarray, shape (T, F), float64
            Written: ``|H|^2`` = ``|N|^2 / |D|^2``.
        phase : ndarray, shape (T, F), optional
            Written when given: ``arg H`` in (-pi, pi] (rad) as ``arg(N conj D)``; for a constant ``N``
            computed in the array's own dtype (float32: numpy's vectorized arctangent, for a float32
            store) when ``|D|`` lies in float32's comfortable range (:data:`NARROW_MIN`), otherwise in
            float64 and rounded once.
        delay : ndarray, shape (T, F), optional
            Written when given: the group delay ``-d arg H / d omega`` (s) in closed form from the
            polynomials' derivatives, ``(Re(D'/D) - Re(N'/N)) / w_ref`` (:func:`_log_slope`); 0 where
            ``H`` is identically 0.
        reference : ndarray, shape (F,), complex, optional
            When given, ``phase`` is the principal ``arg(H conj r)`` of the phase relative to these
            phasors (their unit phasors ``r``; :func:`unit_phasors`): the parts the arctangent reads are
            turned by ``conj r`` in float64 first, so it gives the relative phase in (-pi, pi] directly.

        Notes
        -----
        No quotient ``N/D`` is formed: the power is one division, the phase one arctangent, the delay
        four products of numbers already at hand.  The parts of ``N`` and ``D`` and their derivatives are
        the fixed-shape products of :meth:`parts` and :meth:`slopes`; the element-wise steps after them are
        one compiled loop per block (:mod:`.polarkernels`: the bits of the numpy expressions of
        :meth:`_numpy_polar_block`, which the tests check), the arctangent numpy's.  A block where some
        ``|D|^2`` (or, for the delay, some nonzero ``|N|^2``) leaves the safe range of float64 is done by
        :meth:`_numpy_polar_block`, whose complex division handles those points.  Each trial's numbers
        depend on its own coefficients and the grid only.
        """
        t = den.shape[0]
        const, den, zero = _fold_constant(num, den)
        nb = min(t, self.block)
        dbuf = self._buffer("den", (2, nb, self.size))
        nbuf = None if const else self._buffer("num", (2, nb, self.size))
        slope = None if delay is None else self._buffer("slope", (2 if const else 4, nb, self.size))
        tmp = self._buffer("tmp", (4, nb, self.size))
        rot = None if reference is None or phase is None else self._unit_phasors(reference)
        for t0 in range(0, t, self.block):
            t1 = min(t, t0 + self.block)
            k = t1 - t0
            c, ec = dbuf[0, :k], dbuf[1, :k]                     # conj D = c + j ec
            self.parts(den[t0:t1], c, ec, conjugate=True)
            n = None if const else (nbuf[0, :k], nbuf[1, :k])
            if n is not None:
                self.parts(num[t0:t1], n[0], n[1])
            if delay is not None:                                  # derivatives in x, scaled by 1/w_ref
                self.slopes(den[t0:t1], slope[0, :k], slope[1, :k], 1.0 / self.w_ref)
                if n is not None:
                    self.slopes(num[t0:t1], slope[2, :k], slope[3, :k], 1.0 / self.w_ref)
            p = power[t0:t1]
            ph = None if phase is None else phase[t0:t1]
            dl = None if delay is None else delay[t0:t1]
            sl = None if slope is None else slope[:, :k]
            if not self._compiled_polar_block(n, c, ec, sl, p, ph, dl, tmp[:, :k], rot):
                self._numpy_polar_block(n, c, ec, den[t0:t1], None if const else num[t0:t1], p, ph, dl,
                                        tmp[:, :k], rot)
        if zero is not None:
            power[zero] = 0.0
            for arr in (phase, delay):
                if arr is not None:
                    arr[zero] = 0.0

    def _compiled_polar_block(self, n, c, ec, slope, power, phase, delay, tmp, rot) -> bool:
        """One block of :meth:`ratio_polar` by the compiled kernels and numpy's arctangent; False (outputs
        untrusted) when some ``|D|^2`` or nonzero ``|N|^2`` lies outside the kernels' range.

        ``n`` (``N``'s parts, (k, F) each) or None for a folded constant; ``c, ec`` (k, F) the parts of
        ``conj D``; ``slope`` (2 or 4, k, F) the derivatives of ``D`` (and ``N``) or None; ``tmp`` (4, k, F)
        scratch; ``rot`` (2, F) the unit reference phasors (cosine, sine) or None."""
        with_delay = delay is not None
        rotate = rot is not None
        r2 = rot if rotate else _NO_ROTATION
        sd = (slope[0], slope[1]) if with_delay else (c, c)       # unread placeholders keep one signature
        dl = delay if with_delay else c
        if n is None:
            wide = phase is not None and phase.dtype != np.float32
            parts32 = phase is not None and not wide
            k, f = c.shape
            f32 = self._buffer("f32", (k * f,)).view(np.float32)      # two float32 planes in one float64 buffer
            c32, ec32 = f32[: k * f].reshape(k, f), f32[k * f:].reshape(k, f)
            safe, narrow = polarkernels.polar_constant(c, ec, sd[0], sd[1], power, c32, ec32, dl, r2, _BOUNDS,
                                                       parts32, with_delay, rotate)
            if safe and phase is not None:                             # arg H = arg conj D
                if parts32 and narrow:                                 # float32: |D| between 1e-30 and 1e30
                    np.arctan2(ec32, c32, out=phase)
                else:
                    x, y = _rotated(c, ec, rot, tmp[2], tmp[3]) if rotate else (c, ec)
                    np.arctan2(y, x, out=phase, dtype=np.float64 if (wide or not narrow) else phase.dtype)
            return safe
        with_phase = phase is not None
        u, v = (tmp[2], tmp[3]) if with_phase else (c, c)
        sn = (slope[2], slope[3]) if with_delay else (c, c)
        safe = polarkernels.polar_general(c, ec, n[0], n[1], sd[0], sd[1], sn[0], sn[1], power, u, v, dl, r2,
                                          _BOUNDS, with_phase, with_delay, rotate)
        if safe and with_phase:
            np.arctan2(v, u, out=phase)                                # arg(N conj D), in float64
        return safe

    def _numpy_polar_block(self, n, c, ec, den, num, p, ph, delay, tmp, rot) -> None:
        """One block of :meth:`ratio_polar` by numpy passes, complex division where ``|D|^2`` (or ``|N|^2``)
        leaves the safe range: the fallback of :meth:`_compiled_polar_block` (the same bits elsewhere).

        ``n`` (``N``'s parts) or None, ``c, ec`` the parts of ``conj D``, ``den``, ``num`` the block's
        coefficients (``num`` None for a folded constant), ``tmp`` (4, k, F) scratch, ``rot`` the reference
        phasors or None."""
        const = n is None
        k = c.shape[0]
        mag2, r, u, v = tmp
        np.multiply(c, c, out=mag2)
        np.multiply(ec, ec, out=r)
        mag2 += r
        lo, hi = float(mag2.min()), float(mag2.max())
        safe = lo > SAFE_MIN and hi < SAFE_MAX
        slope = None if ph is None and delay is None else np.empty((2, k, self.size))
        with contextlib.nullcontext() if safe else np.errstate(all="ignore"):
            if const:                                          # |H|^2 = 1/|D|^2 (the folded D)
                np.divide(1.0, mag2, out=p)
                r = p
            else:
                np.divide(1.0, mag2, out=r)                    # 1/|D|^2
                np.multiply(n[0], n[0], out=p)
                np.multiply(n[1], n[1], out=u)
                p += u
                p *= r
            if ph is not None:
                if const:                                      # arg H = arg conj D
                    # in the output's dtype when |D| suits it (float32: between 1e-30 and 1e30)
                    narrow = ph.dtype != np.float64 and not (NARROW_MIN < lo and hi < NARROW_MAX)
                    x, y = (c, ec) if rot is None else _rotated(c, ec, rot, np.empty(c.shape), np.empty(c.shape))
                    np.arctan2(y, x, out=ph, dtype=np.float64 if narrow else ph.dtype)
                else:                                          # arg(N conj D), in float64: |N D| may be huge
                    np.multiply(n[0], c, out=u)
                    np.multiply(n[1], ec, out=v)
                    u -= v
                    np.multiply(n[0], ec, out=v)
                    w = slope[0]
                    np.multiply(n[1], c, out=w)
                    v += w
                    if rot is not None:
                        u, v = _rotated(u, v, rot, np.empty(u.shape), np.empty(u.shape))
                    np.arctan2(v, u, out=ph)
            if delay is not None:                              # derivatives in x, scaled by 1/w_ref
                d_re, d_im = slope[0], slope[1]
                self.slopes(den, d_re, d_im, 1.0 / self.w_ref)
                np.multiply(c, d_im, out=u)                    # Re(D'/D) |D|^2 = c d_im + ec d_re
                np.multiply(ec, d_re, out=v)
                u += v
                if const:
                    np.multiply(u, r, out=delay, casting="same_kind")
                else:
                    u *= r
                    nn = tmp[0]                                # |N|^2 (|D|^2 no longer needed)
                    np.multiply(n[0], n[0], out=nn)
                    np.multiply(n[1], n[1], out=v)
                    nn += v
                    self.slopes(num, d_re, d_im, 1.0 / self.w_ref)
                    _log_slope(n[0], n[1], d_re, d_im, nn, v, tmp[1])
                    np.subtract(u, v, out=delay, casting="same_kind")   # Re(D'/D) - Re(N'/N)
        if not safe:
            self._unsafe_polar(n, c, ec, den, num, p, ph, delay, rot)

    def _unsafe_polar(self, n, c, ec, den, num, power, phase, delay, rot=None) -> None:
        """:meth:`ratio_polar` at the points where ``|D|^2`` left the safe range, by complex arithmetic."""
        mag2 = c * c + ec * ec
        bad = ~((mag2 > SAFE_MIN) & (mag2 < SAFE_MAX))
        with np.errstate(all="ignore"):
            d = c[bad] - 1j * ec[bad]                              # D
            nv = 1.0 if n is None else n[0][bad] + 1j * n[1][bad]
            h = nv / d
            power[bad] = h.real ** 2 + h.imag ** 2
            if phase is not None:
                if rot is not None:
                    r = np.broadcast_to(rot[:, None, :], (2,) + c.shape)[:, bad]
                    h = h * (r[0] - 1j * r[1])                     # the phase relative to the reference
                phase[bad] = np.angle(h)
            if delay is not None:
                d_re, d_im = np.empty(c.shape), np.empty(c.shape)
                self.slopes(den, d_re, d_im)
                tau = ((d_im[bad] - 1j * d_re[bad]) / d).real      # Re(D'/D)
                if n is not None:
                    self.slopes(num, d_re, d_im)
                    nz = nv != 0
                    tau = tau - np.where(nz, ((d_im[bad] - 1j * d_re[bad]) / np.where(nz, nv, 1.0)).real, 0.0)
                delay[bad] = tau / self.w_ref


_NO_ROTATION = np.zeros((2, 1))
"""Placeholder of the kernels' reference phasors when there is none (never read)."""


def unit_phasors(reference: np.ndarray) -> np.ndarray:
    """The unit phasors ``r/|r|`` of complex ``reference`` (F,), as (2, F) float64 (cosine row, sine row); ``1``
    where ``r`` is 0 or not finite (no direction: phases there are taken as they are)."""
    r = np.asarray(reference, dtype=complex)
    m = np.abs(r)
    ok = (m > 0) & np.isfinite(m)
    unit = np.where(ok, r / np.where(ok, m, 1.0), 1.0)
    return np.ascontiguousarray(np.stack([unit.real, unit.imag]))


def _rotated(px: np.ndarray, py: np.ndarray, rot: np.ndarray, x: np.ndarray, y: np.ndarray
             ) -> tuple[np.ndarray, np.ndarray]:
    """The parts of ``(px + j py) conj r`` into ``x``, ``y`` (T, F) -- ``px*cr + py*sr`` and ``py*cr - px*sr``,
    ``rot = (cr, sr)`` (2, F) -- the operations and rounding of the kernels' turn; returns ``(x, y)``."""
    cr, sr = rot[0], rot[1]
    np.multiply(px, cr, out=x)
    x += py * sr
    np.multiply(py, cr, out=y)
    y -= px * sr
    return x, y


def _fold_constant(num: np.ndarray, den: np.ndarray) -> tuple[bool, np.ndarray, np.ndarray | None]:
    """``(constant, den, zero)``: with a constant numerator ``a`` (one column) the denominator divided by it
    (``a/D = 1/(D/a)``) and the rows where ``a = 0`` (None when there are none); otherwise ``den`` as is."""
    if num.shape[1] != 1:
        return False, den, None
    a = num[:, 0]
    zero = a == 0
    den = den / np.where(zero, 1.0, a)[:, None]
    return True, den, (zero if zero.any() else None)


def _log_slope(p_re: np.ndarray, p_im: np.ndarray, d_re: np.ndarray, d_im: np.ndarray, mag2: np.ndarray,
               out: np.ndarray, tmp: np.ndarray) -> None:
    """``Re(P'(sigma)/P(sigma))`` at ``sigma = jx`` into ``out`` (T, F), ``P' = dP/dsigma``.

    ``P(jx) = p_re + j p_im``, ``dP(jx)/dx = d_re + j d_im = j P'(jx)``, ``mag2 = |P|^2``; then
    ``Re(P'/P) = (p_re d_im - p_im d_re) / |P|^2`` -- with ``P = D`` the group delay of ``1/D`` in
    units of ``1/w_ref`` (e.g. A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*,
    3rd ed., 2010, sec. 5.1.2, the delay as the derivative of the phase; here in closed form for a
    polynomial).  ``tmp`` is scratch of the same shape.  0 where ``P = 0`` and its parts' cross
    product vanishes (a zero on the axis: the phase jumps by pi, a delta the grid cannot hold);
    numpy's complex division (Smith's algorithm) where ``|P|^2`` leaves the safe range.
    """
    np.multiply(p_re, d_im, out=out)
    np.multiply(p_im, d_re, out=tmp)
    out -= tmp
    safe = bool(mag2.min() > SAFE_MIN) and bool(mag2.max() < SAFE_MAX)
    if safe:
        out /= mag2
        return
    bad = ~((mag2 > SAFE_MIN) & (mag2 < SAFE_MAX))
    with np.errstate(all="ignore"):
        np.divide(out, mag2, out=out, where=~bad)
        p = p_re[bad] + 1j * p_im[bad]
        q = (d_im[bad] - 1j * d_re[bad]) / np.where(p == 0, 1.0, p)
    out[bad] = np.where(p == 0, 0.0, q.real)


def _by_conjugate(n: np.ndarray | None, c: np.ndarray, ec: np.ndarray, out_re: np.ndarray, out_im: np.ndarray,
                  tmp: np.ndarray) -> bool:
    """``N/D`` with ``conj(D) = c + j ec`` (T, F) and ``N`` planar (T, 2, F) or None (``N = 1``); see the module notes.

    ``N = 1``: ``(c + j ec)/|D|^2``.  Otherwise ``N conj(D) r`` with
    ``r = 1/|D|^2``, the numerator's parts scaled by ``r`` first:
    ``(a r c - b r ec) + j (a r ec + b r c)``.  ``tmp[0]`` keeps ``|D|^2``; returns whether every
    ``|D|^2`` was in the safe range.
    """
    mag2, r, ar, br = tmp
    np.multiply(c, c, out=mag2)
    np.multiply(ec, ec, out=r)
    mag2 += r
    safe = bool(mag2.min() > SAFE_MIN) and bool(mag2.max() < SAFE_MAX)
    with contextlib.nullcontext() if safe else np.errstate(all="ignore"):
        if n is None:                        # conj(D)/|D|^2
            np.divide(c, mag2, out=out_re)
            np.divide(ec, mag2, out=out_im)
        else:
            np.divide(1.0, mag2, out=r)
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
    return safe


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


__all__ = ["GridEvaluator", "multiply", "quotient", "unit_phasors", "TILE_ROWS", "PRODUCT_WORK", "BLOCK_BYTES", "SAFE_MIN",
           "SAFE_MAX"]
