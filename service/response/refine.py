"""Dense internal analysis grid and the refinement of extrema and crossings.

Metrics and mask checks never rely on the caller's display grid: they use a
grid built from the system's own critical frequencies, and then refine every
sampled extremum and crossing on the exact response.

- Extrema: a vectorised nested uniform search with a final parabolic step
  ([1]_ sec. 10.2-10.3) over the brackets of all sampled local extrema at
  once, in log-frequency.
- Crossings: Brent's method (:func:`scipy.optimize.brentq`, [2]_ ch. 4)
  between the two samples that straddle the level.

References
----------
.. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling, B. P. Flannery,
   *Numerical Recipes*, 3rd ed., Cambridge University Press, 2007,
   sec. 9.1 (bracketing and bisection), sec. 10.2-10.3 (bracketed minimisation,
   parabolic interpolation).
.. [2] R. P. Brent, *Algorithms for Minimization without Derivatives*,
   Prentice-Hall, 1973, ch. 4 (zero finding).
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
from scipy.optimize import brentq

#: Samples a bracket per pass of the nested search.
ZOOM_POINTS = 17
#: Passes of the extremum search: a bracket of two grid steps (~0.03 in ln f)
#: shrinks by 8^6 ~ 2.6e5 before the parabolic step.
ZOOM_ITERATIONS = 6

#: Log grid density of the analysis grid (points per decade).
POINTS_PER_DECADE = 160
#: Points inside each gap between consecutive critical frequencies.
POINTS_PER_GAP = 24
#: Half-width of the cluster around each pole, in units of |Re(p)|, and its points.
POLE_CLUSTER_HALF_WIDTH = 6.0
POLE_CLUSTER_POINTS = 49
#: Span of the analysis grid beyond the outermost critical frequency (decades).
OUTER_DECADES = 3.0


def critical_frequencies_hz(zeros: np.ndarray, poles: np.ndarray) -> np.ndarray:
    """Sorted positive frequencies (Hz) where the response can change shape.

    The magnitude |p| and the imaginary part of every pole and zero.
    """
    roots = np.concatenate([np.asarray(zeros, dtype=complex), np.asarray(poles, dtype=complex)])
    vals = np.concatenate([np.abs(roots), np.abs(roots.imag)]) / (2.0 * math.pi)
    vals = vals[np.isfinite(vals) & (vals > 0)]
    return np.unique(vals)


def analysis_grid_hz(zeros: np.ndarray, poles: np.ndarray, extra_hz=(), span_hz=None) -> np.ndarray:
    """The dense internal grid (Hz), sorted and unique, all > 0.

    Union of (a) a log grid of :data:`POINTS_PER_DECADE` points a decade,
    :data:`OUTER_DECADES` beyond the outermost critical frequency; (b)
    :data:`POINTS_PER_GAP` linear points in every gap between consecutive
    critical frequencies and ``extra_hz``; (c) a cluster of points across
    +-6 |Re(p)| around the resonance Im(p) of every complex pole, where the
    ripple of a high-Q section lives. Ripple extrema of the approximations
    lie between such critical frequencies, so every one of them is bracketed
    by samples and then refined.

    Parameters
    ----------
    zeros, poles : ndarray of complex (rad/s)
    extra_hz : sequence of float
        Frequencies to include (band edges, requested points).
    span_hz : (float, float), optional
        Clip the grid to this interval (Hz) and include its ends.
    """
    crit = critical_frequencies_hz(zeros, poles)
    extra = np.asarray([e for e in np.ravel(np.asarray(extra_hz, dtype=float)) if math.isfinite(e) and e > 0])
    anchors = np.unique(np.concatenate([crit, extra]))
    if anchors.size == 0:
        anchors = np.array([1.0])
    lo = anchors[0] * 10.0 ** (-OUTER_DECADES)
    hi = anchors[-1] * 10.0 ** OUTER_DECADES
    n_log = int(math.ceil(POINTS_PER_DECADE * math.log10(hi / lo))) + 1
    parts = [np.geomspace(lo, hi, n_log), anchors]
    if anchors.size > 1:
        u = np.linspace(0.0, 1.0, POINTS_PER_GAP + 2)[1:-1]
        a0, a1 = anchors[:-1, None], anchors[1:, None]
        parts.append((a0 + (a1 - a0) * u[None, :]).ravel())
    p = np.asarray(poles, dtype=complex)
    cp = p[p.imag > 0]
    if cp.size:
        u = np.linspace(-POLE_CLUSTER_HALF_WIDTH, POLE_CLUSTER_HALF_WIDTH, POLE_CLUSTER_POINTS)
        cl = (cp.imag[:, None] + np.abs(cp.real)[:, None] * u[None, :]) / (2.0 * math.pi)
        parts.append(cl.ravel())
    g = np.concatenate(parts)
    g = g[np.isfinite(g) & (g > 0)]
    if span_hz is not None:
        a, b = span_hz
        g = g[(g >= a) & (g <= b)]
        g = np.concatenate([g, [x for x in (a, b) if math.isfinite(x) and x > 0]])
    return np.unique(g)


def zoom_minimize(func: Callable[[np.ndarray], np.ndarray], lo: np.ndarray, hi: np.ndarray,
                  points: int = ZOOM_POINTS, iterations: int = ZOOM_ITERATIONS) -> tuple[np.ndarray, np.ndarray]:
    """Minimise ``func`` inside many brackets at once by a nested uniform search.

    Each pass samples every bracket at ``points`` evenly spaced points (one
    vectorised call for all brackets) and keeps the two intervals around the
    best sample, shrinking the bracket (points - 1) / 2 times; after the last
    pass the vertex of the parabola through the best sample and its two
    neighbours is tried as well (successive parabolic interpolation, [1]_
    sec. 10.3). Like golden-section search it converges to the minimum of a
    unimodal bracket, with far fewer vectorised calls.

    Parameters
    ----------
    func : callable
        Vectorised: ndarray (K,) -> ndarray (K,).
    lo, hi : ndarray of float, shape (M,)
        Bracket ends (lo <= hi), each containing one local minimum.

    Returns
    -------
    x, fx : ndarray, shape (M,)
        The best point found in each bracket (ends included) and its value.
    """
    a = np.asarray(lo, dtype=float).copy()
    b = np.asarray(hi, dtype=float).copy()
    m = a.size
    if m == 0:
        return a, a.copy()
    u = np.linspace(0.0, 1.0, points)
    rows = np.arange(m)
    best_x = a.copy()
    best_f = np.full(m, np.inf)
    for _ in range(iterations):
        x = a[:, None] + (b - a)[:, None] * u[None, :]
        fx = np.asarray(func(x.ravel()), dtype=float).reshape(m, points)
        j = np.argmin(fx, axis=1)
        better = fx[rows, j] < best_f
        best_x = np.where(better, x[rows, j], best_x)
        best_f = np.where(better, fx[rows, j], best_f)
        jl = np.maximum(j - 1, 0)
        jh = np.minimum(j + 1, points - 1)
        a, b = x[rows, jl], x[rows, jh]
    # parabolic vertex through (a, mid, b) of the last pass
    jm = np.clip(j, 1, points - 2)
    x0, x1, x2 = x[rows, jm - 1], x[rows, jm], x[rows, jm + 1]
    f0, f1, f2 = fx[rows, jm - 1], fx[rows, jm], fx[rows, jm + 1]
    num = (x1 - x0) ** 2 * (f1 - f2) - (x1 - x2) ** 2 * (f1 - f0)
    den = (x1 - x0) * (f1 - f2) - (x1 - x2) * (f1 - f0)
    ok = np.isfinite(num) & np.isfinite(den) & (np.abs(den) > 0)
    xv = x1 - 0.5 * np.divide(num, den, out=np.zeros(m), where=ok)
    xv = np.clip(np.where(ok, xv, x1), x0, x2)
    fv = np.asarray(func(xv), dtype=float)
    better = fv < best_f
    return np.where(better, xv, best_x), np.where(better, fv, best_f)


def local_minima_brackets(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Indices of sampled local minima of y(x) (ends included) and their brackets.

    Returns
    -------
    idx : ndarray of int (M,)
    lo, hi : ndarray of float (M,)  the neighbouring samples (clipped at the ends)
    """
    n = y.size
    if n == 1:
        return np.array([0]), x[:1].copy(), x[:1].copy()
    left = np.concatenate([[np.inf], y[:-1]])
    right = np.concatenate([y[1:], [np.inf]])
    idx = np.nonzero((y <= left) & (y <= right))[0]
    lo = x[np.maximum(idx - 1, 0)]
    hi = x[np.minimum(idx + 1, n - 1)]
    return idx, lo, hi


def refine_minimum(func_x: Callable[[np.ndarray], np.ndarray], x: np.ndarray, y: np.ndarray,
                   log_axis: bool = True) -> tuple[float, float]:
    """Global minimum of a function sampled as (x, y), refined around every local minimum.

    Parameters
    ----------
    func_x : callable
        Vectorised function of x.
    x, y : ndarray (N,)
        Sorted samples and their values (x > 0 when ``log_axis``).
    log_axis : bool
        Search in log(x) (frequency axes) rather than x.

    Returns
    -------
    (x_min, y_min) : float, float
    """
    idx, lo, hi = local_minima_brackets(x, y)
    if log_axis:
        f = lambda u: func_x(np.exp(u))  # noqa: E731
        xs, vals = zoom_minimize(f, np.log(lo), np.log(hi))
        xs = np.exp(xs)
    else:
        xs, vals = zoom_minimize(func_x, lo, hi)
    # keep the sampled values too (a bracket of width 0 at an end)
    allx = np.concatenate([xs, x[idx]])
    ally = np.concatenate([vals, y[idx]])
    k = int(np.argmin(ally))
    return float(allx[k]), float(ally[k])


def crossing(func: Callable[[float], float], a: float, b: float) -> float:
    """Root of ``func`` in [a, b] (opposite signs at the ends) by Brent's method."""
    fa, fb = func(a), func(b)
    if fa == 0:
        return a
    if fb == 0:
        return b
    if (fa > 0) == (fb > 0):
        # the bracket came from samples taken by a different rounding path
        # (e.g. exp(log(f)) != f): the level sits at one end to rounding.
        return a if abs(fa) <= abs(fb) else b
    return brentq(func, a, b, xtol=1e-14 * max(abs(a), abs(b), 1e-300), rtol=1e-15, maxiter=200)
