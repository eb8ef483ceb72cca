"""Compiled element-wise steps of the polar evaluation (:meth:`.polyeval.GridEvaluator.ratio_polar`).

Each kernel is one loop over a block that does, element by element, the IEEE operations of the numpy
expressions it replaces, in their order and with their rounding points (the kernels are compiled without
``fastmath``, so no multiply-add is fused and no operation reordered; see :mod:`service.compiled`): the
same bits, from one pass over memory instead of one pass per operation.  The arctangent stays numpy's
(its vectorized float32 arctangent is faster than the C library's ``atan2f`` in a loop and gives other
bits); the kernels write the operands it needs -- turned by a reference phasor when the caller wants the
phase relative to a reference (the Monte Carlo's, relative to the nominal response), so that the
arctangent gives the principal relative phase directly, with no subtraction and wrapping pass after it.

The polar kernels also count how many ``|D|^2`` lie in the ranges where the real-arithmetic quotient is
exact to rounding (and, for a float32 phase, where ``D``'s parts fit float32); a block with an element
outside is redone by the numpy path, whose complex division handles it.  The bounds are arguments (they
are defined in :mod:`.polyeval`), so a compiled kernel never holds a stale copy.

Shapes: every 2-D array is (T, F) -- trials by frequencies -- and may be a strided view (a column block of
a wider array, or a transposed view of a frequency-major store).
"""

from __future__ import annotations

import numpy as np

from service.compiled import kernel, warms


@kernel
def polar_constant(c, ec, d_re, d_im, power, c32, ec32, delay, rot, bounds, with_parts32, with_delay, rotate):
    """``H = 1/D`` (a constant numerator folded into ``D``): ``|H|^2``, the float32 parts of ``conj D`` for a
    float32 arctangent, and the group delay.

    Parameters
    ----------
    c, ec : (T, F) float64
        ``conj D(jx) = c + j ec``.
    d_re, d_im : (T, F) float64
        ``dD(jx)/dx`` times ``1/w_ref`` (read only with ``with_delay``).
    power : (T, F) float64
        Written: ``1/|D|^2`` = ``1.0 / (c*c + ec*ec)``.
    c32, ec32 : (T, F) float32
        Written with ``with_parts32``: ``c``, ``ec`` rounded to float32 (the operands of numpy's float32
        ``arctan2(ec, c)``); with ``rotate``, the parts of ``conj D conj r`` instead, ``c*cr + ec*sr`` and
        ``ec*cr - c*sr`` (the phase relative to the reference phasor ``r = cr + j sr``).
    delay : (T, F) float32 or float64
        Written with ``with_delay``: ``((c*d_im + ec*d_re) * power)`` rounded to its dtype (s).
    rot : (2, F) float64
        The unit reference phasor ``r`` at each frequency (cosine row, sine row); read with ``rotate``.
    bounds : (4,) float64
        ``SAFE_MIN, SAFE_MAX, NARROW_MIN, NARROW_MAX``.

    Returns
    -------
    (bool, bool)
        Whether every ``|D|^2`` lies strictly inside (SAFE_MIN, SAFE_MAX), and inside (NARROW_MIN, NARROW_MAX).
        Outputs are untrusted when the first is False.
    """
    t, f = c.shape
    lo, hi, nlo, nhi = bounds[0], bounds[1], bounds[2], bounds[3]
    safe = 0
    narrow = 0
    for i in range(t):
        for j in range(f):
            a = c[i, j]
            e = ec[i, j]
            m = a * a + e * e
            safe += (m > lo) & (m < hi)              # integer counts: no branch, NaN counts as outside
            narrow += (m > nlo) & (m < nhi)
            r = 1.0 / m
            power[i, j] = r
            if with_parts32:
                if rotate:
                    c32[i, j] = np.float32(a * rot[0, j] + e * rot[1, j])
                    ec32[i, j] = np.float32(e * rot[0, j] - a * rot[1, j])
                else:
                    c32[i, j] = np.float32(a)
                    ec32[i, j] = np.float32(e)
            if with_delay:
                u = a * d_im[i, j] + e * d_re[i, j]  # Re(D'/D) |D|^2
                delay[i, j] = u * r
    return safe == t * f, narrow == t * f


@kernel
def polar_general(c, ec, n_re, n_im, sd_re, sd_im, sn_re, sn_im, power, u, v, delay, rot, bounds, with_phase,
                  with_delay, rotate):
    """``H = N/D``: ``|H|^2``, the parts of ``N conj D`` (for numpy's ``arctan2``) and the group delay.

    Parameters
    ----------
    c, ec : (T, F) float64
        ``conj D(jx) = c + j ec``.
    n_re, n_im : (T, F) float64
        ``N(jx)``.
    sd_re, sd_im, sn_re, sn_im : (T, F) float64
        ``dD(jx)/dx``, ``dN(jx)/dx`` times ``1/w_ref`` (read only with ``with_delay``).
    power : (T, F) float64
        Written: ``(n_re*n_re + n_im*n_im) * (1.0 / (c*c + ec*ec))``.
    u, v : (T, F) float64
        Written with ``with_phase``: ``n_re*c - n_im*ec`` and ``n_re*ec + n_im*c``, ``N conj D``; with
        ``rotate`` these times ``conj r`` (``p*cr + q*sr``, ``q*cr - p*sr`` of those two, ``p`` and ``q``).
    rot : (2, F) float64
        As in :func:`polar_constant`.
    delay : (T, F) float32 or float64
        Written with ``with_delay``: ``Re(D'/D) - Re(N'/N)`` rounded to its dtype (s), where
        ``Re(D'/D) = (c*sd_im + ec*sd_re) * (1/|D|^2)`` and ``Re(N'/N) = (n_re*sn_im - n_im*sn_re) / |N|^2``,
        0 where ``N = 0``.
    bounds : (4,) float64
        ``SAFE_MIN, SAFE_MAX`` (the other two unused).

    Returns
    -------
    bool
        Whether every ``|D|^2`` lies strictly inside (SAFE_MIN, SAFE_MAX) and, with ``with_delay``, every
        ``|N|^2`` too or ``N = 0``.  Outputs are untrusted when False.
    """
    t, f = c.shape
    lo, hi = bounds[0], bounds[1]
    safe = 0
    usable = 0                                       # |N|^2 in range, or N = 0
    for i in range(t):
        for j in range(f):
            a = c[i, j]
            e = ec[i, j]
            m = a * a + e * e
            safe += (m > lo) & (m < hi)
            r = 1.0 / m
            x = n_re[i, j]
            y = n_im[i, j]
            power[i, j] = (x * x + y * y) * r
            if with_phase:
                pu = x * a - y * e
                pv = x * e + y * a
                if rotate:
                    u[i, j] = pu * rot[0, j] + pv * rot[1, j]
                    v[i, j] = pv * rot[0, j] - pu * rot[1, j]
                else:
                    u[i, j] = pu
                    v[i, j] = pv
            if with_delay:
                ud = (a * sd_im[i, j] + e * sd_re[i, j]) * r
                nn = x * x + y * y
                ls = x * sn_im[i, j] - y * sn_re[i, j]
                inside = (nn > lo) & (nn < hi)
                usable += inside | ((x == 0.0) & (y == 0.0))
                ls = ls / nn if inside else 0.0      # 0 where N = 0 (else untrusted: the numpy path)
                delay[i, j] = ud - ls
    return safe == t * f and (usable == t * f or not with_delay)


def _store_view(rows: int, columns: int) -> np.ndarray:
    """A float32 (rows, columns) transposed view of a frequency-major store, as the Monte Carlo hands over."""
    return np.zeros((columns, rows + 1), np.float32)[:, 1:].T


@warms
def _warm() -> None:
    """Every kernel with the argument types the service passes: contiguous blocks, column blocks of a wider
    power array, float32 stores' transposed views, float64 outputs."""
    t, f = 2, 3
    c = np.ones((t, f))
    bounds = np.array([1e-290, 1e290, 1e-60, 1e60])
    rot = np.ones((2, f))
    c32 = np.empty((t, f), np.float32)
    wide = np.empty((t, f + 2))[:, :f]
    for power in (np.empty((t, f)), wide):
        for delay in (np.empty((t, f)), np.empty((t, f), np.float32), _store_view(t, f)):
            polar_constant(c, c, c, c, power, c32, c32, delay, rot, bounds, True, True, True)
            polar_general(c, c, c, c, c, c, c, c, power, c, c, delay, rot, bounds, True, True, True)


__all__ = ["polar_constant", "polar_general"]
