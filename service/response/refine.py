"""Dense internal analysis grid and the refinement of extrema and crossings.

Metrics and mask checks never rely on the caller's display grid: they use a
grid built from the system's own critical frequencies, and then refine every
sampled extremum and crossing on the exact response.

- Extrema: a vectorised nested uniform search with a final parabolic step
  ([1]_ sec. 10.2-10.3) over the brackets of all sampled local extrema at
  once, in log-frequency; brackets that a parabolic bound shows cannot hold
  the global extreme are skipped, and the extrema of several curves (the
  segments of a mask, a minimum and a maximum) share one search.
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

from service.deadline import check as check_deadline

#: Samples a bracket per pass of the nested search.
ZOOM_POINTS = 17
#: Passes of the extremum search: a bracket of two grid steps (~0.03 in ln f)
#: shrinks by 8^6 ~ 2.6e5 before the parabolic step.
ZOOM_ITERATIONS = 6

#: Factor on the parabolic bound of how far below its samples a bracket's
#: minimum can lie (see :func:`promising_minima`).
BRACKET_DROP_SAFETY = 16.0
#: A bracket that cannot beat the lowest sample by more than this fraction of
#: the largest |value| on the curve is rounding noise and is not refined; the
#: refined extreme is then off by at most this much (default tolerance).
BRACKET_NOISE_RELATIVE = 1e-13
#: The same for a gain in dB, whose rounding is absolute (about 1e-14 dB at
#: any level): brackets that cannot gain more than this (dB) are not refined.
GAIN_TOLERANCE_DB = 1e-12

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


def _zoom_rows(func_rows: Callable[[np.ndarray], np.ndarray], lo: np.ndarray, hi: np.ndarray,
               points: int, iterations: int) -> tuple[np.ndarray, np.ndarray]:
    """The nested uniform search of :func:`zoom_minimize` on a row-wise function.

    ``func_rows`` maps an array of shape (M, K) (row m: abscissae inside
    bracket m) to values of the same shape, so each row may be its own
    function (e.g. a sign per row). Rows never interact: every row gives the
    result it would give alone.
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
        check_deadline("response.refine")
        x = a[:, None] + (b - a)[:, None] * u[None, :]
        fx = np.asarray(func_rows(x), dtype=float).reshape(m, points)
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
    fv = np.asarray(func_rows(xv[:, None]), dtype=float).reshape(m)
    better = fv < best_f
    return np.where(better, xv, best_x), np.where(better, fv, best_f)


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
    def rows(x):
        return np.asarray(func(x.ravel()), dtype=float).reshape(x.shape)

    return _zoom_rows(rows, lo, hi, points, iterations)


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


def promising_minima(u: np.ndarray, y: np.ndarray, idx: np.ndarray, safety: float = BRACKET_DROP_SAFETY,
                     tolerance: float | None = None) -> np.ndarray:
    """Which sampled local minima can still hold the global minimum after refinement.

    Inside the bracket [u[i-1], u[i+1]] of an interior local minimum the
    parabola through the three samples (spacings h1, h2, rises d1, d2 >= 0)
    has curvature c = (d1/h1 + d2/h2) / (h1 + h2) and its vertex lies within
    [-h1/2, h2/2] of u[i], so it dips at most c * max(h1, h2)^2 / 4 below
    y[i] ([1]_ sec. 10.3); rises are first reduced by ``tolerance``, so that
    rounding noise across a tiny step does not pass for a steep slope. A bracket whose sampled value, lowered by
    ``safety`` times that dip, still lies above the lowest sample of the
    curve less ``tolerance`` cannot win (by more than ``tolerance``) and is
    not refined. The lowest sample itself,
    the two ends, and any bracket whose bound is not finite are always kept.
    This drops the many brackets of rounding-level plateaus and ripples (a
    maximally flat passband, a response floored at an exact zero) that would
    otherwise each be searched.

    Parameters
    ----------
    u : ndarray of float, shape (N,)
        Sorted abscissae of the search (ln f on a frequency axis).
    y : ndarray of float, shape (N,)
        Samples of the function being minimised.
    idx : ndarray of int, shape (M,)
        Local minima (from :func:`local_minima_brackets`).
    safety : float
        Factor on the parabolic bound of the dip.
    tolerance : float, optional
        How much a skipped bracket may still beat the lowest sample (units of
        y); None: :data:`BRACKET_NOISE_RELATIVE` times the largest finite |y|.

    Returns
    -------
    ndarray of bool, shape (M,)
    """
    idx = np.asarray(idx, dtype=int)
    n = y.size
    keep = np.ones(idx.size, dtype=bool)
    inner = (idx > 0) & (idx < n - 1)
    if not np.any(inner):
        return keep
    finite = y[np.isfinite(y)]
    if finite.size == 0:
        return keep
    best = int(np.argmin(y))
    if tolerance is None:
        tolerance = BRACKET_NOISE_RELATIVE * float(np.max(np.abs(finite)))
    threshold = float(np.min(finite)) - tolerance
    i = idx[inner]
    with np.errstate(all="ignore"):
        h1 = u[i] - u[i - 1]
        h2 = u[i + 1] - u[i]
        # rises within the rounding level are flat (noise over a tiny step is no slope)
        d1 = np.maximum(y[i - 1] - y[i] - tolerance, 0.0)
        d2 = np.maximum(y[i + 1] - y[i] - tolerance, 0.0)
        # a flat side has no slope even over a zero step (coincident samples), and a
        # bracket of zero width cannot dip at all
        slopes = np.where(d1 > 0, d1 / h1, 0.0) + np.where(d2 > 0, d2 / h2, 0.0)
        width = h1 + h2
        curvature = np.where(width > 0, slopes / width, 0.0)
        lower = y[i] - safety * curvature * np.maximum(h1, h2) ** 2 / 4.0
        drop = (lower > threshold) & np.isfinite(lower) & (i != best)
    keep[inner] = ~drop
    return keep


def refine_extrema(func_x: Callable[[np.ndarray], np.ndarray], curves, log_axis: bool = True,
                   tolerance: float | None = None, points: int = ZOOM_POINTS,
                   iterations: int = ZOOM_ITERATIONS) -> list[tuple[float, float]]:
    """Refined minima and maxima of one function on several sampled curves, in one search.

    Every curve is a sampling (x, y = func_x(x)) over its own interval and a
    sign: +1 asks for the minimum, -1 for the maximum. The promising
    brackets (:func:`promising_minima`) of all curves are refined together
    by one nested uniform search (:func:`zoom_minimize`, one vectorised call
    of ``func_x`` per pass for every bracket of every curve), so a mask of
    several segments costs as many calls as one segment.

    Parameters
    ----------
    func_x : callable
        Vectorised function of x: ndarray (K,) -> ndarray (K,).
    curves : sequence of (x, y, sign)
        ``x`` ndarray (N,) sorted (> 0 when ``log_axis``), ``y`` its values,
        ``sign`` +1.0 (minimum) or -1.0 (maximum).
    log_axis : bool
        Search in log(x) (frequency axes) rather than x.
    tolerance : float, optional
        Brackets that cannot improve a curve's extreme by more than this
        (units of the function) are not refined; see :func:`promising_minima`
        (:data:`GAIN_TOLERANCE_DB` suits a gain in dB).

    Returns
    -------
    list of (x_best, value) : float, float
        Per curve, where its extreme lies and the value of ``func_x`` there
        (the minimum or the maximum, not negated); sampled points included.
    """
    prepared, los, his, signs = [], [], [], []
    for x, y, sign in curves:
        x = np.asarray(x, dtype=float)
        s = float(sign)
        ys = s * np.asarray(y, dtype=float)
        idx, lo, hi = local_minima_brackets(x, ys)
        keep = promising_minima(np.log(x) if log_axis else x, ys, idx, tolerance=tolerance)
        idx, lo, hi = idx[keep], lo[keep], hi[keep]
        prepared.append((x[idx], ys[idx], s, idx.size))
        los.append(np.log(lo) if log_axis else lo)
        his.append(np.log(hi) if log_axis else hi)
        signs.append(np.full(idx.size, s))
    if not prepared:
        return []
    row_sign = np.concatenate(signs)[:, None]

    def rows(u):
        v = np.asarray(func_x((np.exp(u) if log_axis else u).ravel()), dtype=float).reshape(u.shape)
        return row_sign * v

    xs, vals = _zoom_rows(rows, np.concatenate(los), np.concatenate(his), points, iterations)
    if log_axis:
        xs = np.exp(xs)
    out, off = [], 0
    for xi, yi, s, m in prepared:
        # keep the sampled values too (a bracket of width 0 at an end)
        allx = np.concatenate([xs[off:off + m], xi])
        ally = np.concatenate([vals[off:off + m], yi])
        off += m
        k = int(np.argmin(ally))
        out.append((float(allx[k]), s * float(ally[k])))
    return out


def refine_minimum(func_x: Callable[[np.ndarray], np.ndarray], x: np.ndarray, y: np.ndarray,
                   log_axis: bool = True, tolerance: float | None = None) -> tuple[float, float]:
    """Global minimum of a function sampled as (x, y), refined around every promising local minimum.

    One curve of :func:`refine_extrema`.

    Parameters
    ----------
    func_x : callable
        Vectorised function of x.
    x, y : ndarray (N,)
        Sorted samples and their values (x > 0 when ``log_axis``).
    log_axis : bool
        Search in log(x) (frequency axes) rather than x.
    tolerance : float, optional
        See :func:`refine_extrema`.

    Returns
    -------
    (x_min, y_min) : float, float
    """
    return refine_extrema(func_x, [(x, y, 1.0)], log_axis, tolerance)[0]


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
