"""Rigorous bounds of a transfer function's gain and group delay over a frequency interval.

For ``H(s) = k prod(s - z) / prod(s - p)`` and an interval ``[a, b]`` of
angular frequency (rad/s), every factor's distance ``|j w - r|`` to a root
``r = x + j y`` lies between the distance from ``r`` to the segment
``{j w : a <= w <= b}`` and the larger of the distances to its ends.  That
brackets ``ln |H|`` (the *distance bound*, tight where the interval is short
against the distance to every root).  Second, each ``ln |j w - r|`` has
second derivative ``(x^2 - (w - y)^2) / (x^2 + (w - y)^2)^2``, of magnitude at
most ``1 / d_min^2``; with ``M`` the sum over all roots, ``ln |H|`` lies within
``M h^2 / 8`` of the chord through the two end values (``h = b - a``; the
remainder of linear interpolation, e.g. G. Dahlquist and A. Bjorck,
*Numerical Methods*, Prentice-Hall, 1974, sec. 4.2), a *curvature bound* that
is tight to second order near an extremum.  The bound used is the
intersection of both, so it is valid everywhere and converges quadratically
where it matters.

The group delay ``tau(w) = sum_z x_z / d_z^2 - sum_p x_p / d_p^2`` is a sum of
Lorentzians whose range over an interval is exact term by term, and whose
second derivative is at most ``6 |c| / d_min^4`` per term; both bounds are
intersected the same way.

These are the interval-analysis inclusions of R. E. Moore, R. B. Kearfott and
M. J. Cloud, *Introduction to Interval Analysis*, SIAM, 2009, ch. 5-6 (natural
and mean-value/Taylor forms), specialised to products of root factors.
"""

from __future__ import annotations

import numpy as np


def distances_to_interval(roots: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Smallest and largest distance (rad/s) from each root to the segment ``j[a, b]``.

    ``roots`` (K, R) complex (NaN: no root), ``a``, ``b`` (K,); returns two (K, R) arrays (NaN where no root).
    """
    x, y = roots.real, roots.imag
    a2, b2 = a[:, None], b[:, None]
    nearest = np.clip(y, a2, b2)
    dmin = np.hypot(x, y - nearest)
    dmax = np.maximum(np.hypot(x, y - a2), np.hypot(x, y - b2))
    return dmin, dmax


def _nansum(x: np.ndarray) -> np.ndarray:
    return np.nansum(x, axis=1) if x.shape[1] else np.zeros(x.shape[0])


def _curvature_range(roots: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Range of ``d^2/dw^2 ln |j w - r|`` over ``[a, b]``, summed over the roots of each row.

    With ``u = w - Im r`` and ``x = Re r`` the term is ``phi(v) = (x^2 - v) / (x^2 + v)^2`` of
    ``v = u^2``, decreasing for ``v < 3 x^2`` and increasing beyond (minimum ``-1/(8 x^2)``), so its
    range over the interval's ``v`` range is found from the two ends and that minimum.
    Returns (low, high), each (K,); ``-inf``/``inf`` where a root lies on the interval.
    """
    if roots.shape[1] == 0:
        z = np.zeros(roots.shape[0])
        return z, z
    x2 = roots.real ** 2
    ua = a[:, None] - roots.imag
    ub = b[:, None] - roots.imag
    v_lo = np.where((ua <= 0) & (ub >= 0), 0.0, np.minimum(ua * ua, ub * ub))
    v_hi = np.maximum(ua * ua, ub * ub)
    with np.errstate(divide="ignore", invalid="ignore"):
        f_lo = (x2 - v_lo) / (x2 + v_lo) ** 2
        f_hi = (x2 - v_hi) / (x2 + v_hi) ** 2
        f_min = np.where((v_lo <= 3 * x2) & (3 * x2 <= v_hi), -1.0 / (8.0 * x2), np.inf)
    low = np.fmin(np.fmin(f_lo, f_hi), f_min)
    high = np.fmax(f_lo, f_hi)
    absent = np.isnan(x2)              # a NaN slot is no root: it bends nothing (fmin would make it +inf)
    low = np.where(absent, 0.0, low)
    high = np.where(absent, 0.0, high)
    on_axis = (x2 == 0) & (v_lo == 0)
    low = np.where(on_axis, -np.inf, low)
    high = np.where(on_axis, np.inf, high)
    with np.errstate(invalid="ignore"):
        total_low, total_high = _nansum(low), _nansum(high)
    # a row mixing infinities of both signs has no usable bound
    return (np.where(np.isnan(total_low), -np.inf, total_low),
            np.where(np.isnan(total_high), np.inf, total_high))


def log_gain_bounds(zeros: np.ndarray, poles: np.ndarray, log_gain: np.ndarray, a: np.ndarray, b: np.ndarray,
                    value_a: np.ndarray, value_b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper bounds of ``ln |H(j w)|`` (nepers) for ``w`` in ``[a, b]``.

    Parameters
    ----------
    zeros, poles : ndarray, complex128, shape (K, Z) and (K, P)
        Each interval's roots (rad/s; NaN slots are absent roots).
    log_gain : ndarray, shape (K,)
        ``ln |k|`` of each interval's transfer function.
    a, b : ndarray, shape (K,)
        Interval ends, rad/s, ``0 <= a < b``.
    value_a, value_b : ndarray, shape (K,)
        ``ln |H|`` at the ends (exact values, for the curvature bound).

    Returns
    -------
    lower, upper : ndarray, float64, shape (K,)
        Nepers; ``-inf`` lower bound where a zero lies on the interval.

    Notes
    -----
    With ``c_lo <= (ln |H|)'' <= c_hi`` on the interval, the difference from
    the chord ``L`` satisfies ``-max(c_hi, 0) h^2/8 <= ln|H| - L <= max(-c_lo, 0) h^2/8``;
    the signed range of the second derivative keeps the bound tight on the
    concave side of a maximum and the convex side of a minimum.
    """
    dz_min, dz_max = distances_to_interval(zeros, a, b)
    dp_min, dp_max = distances_to_interval(poles, a, b)
    with np.errstate(divide="ignore", invalid="ignore"):
        low_d = log_gain + _nansum(np.log(dz_min)) - _nansum(np.log(dp_max))
        high_d = log_gain + _nansum(np.log(dz_max)) - _nansum(np.log(dp_min))
    zl, zh = _curvature_range(zeros, a, b)
    pl, ph = _curvature_range(poles, a, b)
    with np.errstate(invalid="ignore"):
        c_lo, c_hi = zl - ph, zh - pl
    c_lo = np.where(np.isnan(c_lo), -np.inf, c_lo)
    c_hi = np.where(np.isnan(c_hi), np.inf, c_hi)
    h2 = (b - a) ** 2 / 8.0
    with np.errstate(invalid="ignore"):
        low_c = np.minimum(value_a, value_b) - np.maximum(c_hi, 0.0) * h2
        high_c = np.maximum(value_a, value_b) + np.maximum(-c_lo, 0.0) * h2
    low_c = np.where(np.isnan(low_c), -np.inf, low_c)
    high_c = np.where(np.isnan(high_c), np.inf, high_c)
    return np.fmax(low_d, low_c), np.fmin(high_d, high_c)


def group_delay(zeros: np.ndarray, poles: np.ndarray, omega: np.ndarray) -> np.ndarray:
    """Group delay (s) at ``omega`` (rad/s), rows of roots per row of ``omega``.

    ``zeros`` (K, Z), ``poles`` (K, P), ``omega`` (K, M) -> (K, M).  A zero on
    the imaginary axis contributes nothing (its phase step is not a delay).
    """
    w = omega[:, :, None]
    out = np.zeros(omega.shape)
    for roots, sign in ((zeros, 1.0), (poles, -1.0)):
        if roots.shape[1] == 0:
            continue
        x = roots.real[:, None, :]
        y = roots.imag[:, None, :]
        with np.errstate(divide="ignore", invalid="ignore"):
            term = np.where(x == 0.0, 0.0, sign * x / (x * x + (w - y) ** 2))
        out += np.nansum(term, axis=2)
    return out


def delay_bounds(zeros: np.ndarray, poles: np.ndarray, a: np.ndarray, b: np.ndarray, value_a: np.ndarray,
                 value_b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper bounds of the group delay (s) for ``w`` in ``[a, b]`` (shapes as :func:`log_gain_bounds`)."""
    low = np.zeros(a.shape)
    high = np.zeros(a.shape)
    curvature = np.zeros(a.shape)
    for roots, sign in ((zeros, 1.0), (poles, -1.0)):
        if roots.shape[1] == 0:
            continue
        c = sign * roots.real
        dmin, dmax = distances_to_interval(roots, a, b)
        with np.errstate(divide="ignore", invalid="ignore"):
            near = np.where(c == 0.0, 0.0, c / dmin ** 2)
            far = np.where(c == 0.0, 0.0, c / dmax ** 2)
            curv = np.where(c == 0.0, 0.0, 6.0 * np.abs(c) / dmin ** 4)
        low += _nansum(np.fmin(near, far))
        high += _nansum(np.fmax(near, far))
        curvature += _nansum(curv)
    slack = curvature * (b - a) ** 2 / 8.0
    low_c = np.minimum(value_a, value_b) - slack
    high_c = np.maximum(value_a, value_b) + slack
    return np.fmax(low, low_c), np.fmin(high, high_c)


__all__ = ["log_gain_bounds", "delay_bounds", "group_delay", "distances_to_interval"]
