"""Verifying many trials near one nominal: a cheap proof first, the full search where it cannot decide.

A Monte Carlo trial's roots lie close to the nominal design's.  The nominal is
verified first and its final partition of every segment is refined, on the
nominal alone, until each interval's curvature bound ``M h^2/8`` is below
:data:`SLACK_DB` (see :mod:`service.response.bounds`).  Every trial is then
evaluated exactly at the partition's points, and on each interval its gain
lies within ``M_t h^2 / 8`` of the chord through those two values, where the
trial's curvature sum ``M_t = sum_r 1/d_r(t)^2`` is bounded from the nominal's
distances: a root that moved by at most ``eps |r|`` (``eps`` the trial's
largest relative root movement, roots paired in sorted order, poles within
their stage -- any pairing is a valid one) keeps ``d_r(t) >= d_r - eps |r|``.
That bound is tabulated once per interval over ``eps``, so a trial costs one
exact evaluation per point and a look-up per interval.  The tail of a stopband
open to infinity is handled the same way in the reciprocal frequency, whose
roots ``-1/r`` move by at most ``eps/(1 - eps)`` relative.

A trial whose bounds prove every segment passes, with margins located to the
slack; every other trial goes through the full search of
:mod:`service.response.search`.
"""

from __future__ import annotations

import numpy as np

from service.circuit.roots import RootSet
from service.response.bounds import distances_to_interval
from service.response.criteria import NEPER_DB, Band, Criteria
from service.response.search import Partition, verify_losses

#: Relative root movements tabulated (geometric; a movement above the last entry is not bounded here).
EPSILON_GRID = np.concatenate([[0.0], np.geomspace(1e-7, 0.5, 97)])
#: Precision (dB) of the nominal search whose partition the trials are bounded on.
NOMINAL_PRECISION_DB = 1e-3
#: Nominal curvature slack (dB) each interval is refined to before the trials are bounded on it.
SLACK_DB = 2e-3
#: Most intervals the refinement may make (beyond it, the trials go to the full search).
MAX_INTERVALS = 4000


def _paired(values: np.ndarray, groups: np.ndarray | None) -> np.ndarray:
    """Roots (T, R) in a canonical order: by group, then imaginary part (zero when negligible), then real part."""
    out = np.empty_like(values)
    keys = np.zeros(values.shape[1], dtype=int) if groups is None else np.asarray(groups)
    for g in np.unique(keys):
        cols = np.flatnonzero(keys == g)
        v = values[:, cols]
        finite = np.isfinite(v)
        real = np.where(finite, v.real, np.inf)
        with np.errstate(invalid="ignore"):
            imag = np.where(finite & (np.abs(v.imag) > 1e-9 * np.abs(v)), v.imag, 0.0)
        imag = np.where(finite, imag, np.inf)
        order = np.argsort(real, axis=1, kind="stable")
        order = np.take_along_axis(order, np.argsort(np.take_along_axis(imag, order, axis=1), axis=1,
                                                     kind="stable"), axis=1)
        out[:, cols] = np.take_along_axis(v, order, axis=1)
    return out


def _movement(trial: np.ndarray, nominal: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per trial: the largest relative movement of a root from its paired nominal root, and eligibility
    (the same finite roots; roots at the origin stay there)."""
    fin_t, fin_n = np.isfinite(trial), np.isfinite(nominal)
    same = np.all(fin_t == fin_n[None, :], axis=1)
    mag = np.abs(nominal)
    origin = fin_n & (mag == 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = np.where((fin_n & ~origin)[None, :], np.abs(trial - nominal[None, :]) / mag[None, :], 0.0)
    stays = np.all(np.where(origin[None, :], trial == 0, True), axis=1)
    eps = np.nan_to_num(rel, nan=np.inf).max(axis=1) if rel.shape[1] else np.zeros(trial.shape[0])
    return eps, same & stays & np.isfinite(eps)


def _curvature_table(roots: np.ndarray, a: np.ndarray, b: np.ndarray, eps: np.ndarray) -> np.ndarray:
    """``sum_r 1/(d_r - eps |r|)^2`` (inf where a root may reach the interval), shape (intervals, eps.size).

    ``eps`` holds the relative root movements wanted (entries of :data:`EPSILON_GRID`); only those
    columns are computed, one interval block at a time, so memory stays (intervals x roots).
    """
    roots = roots[np.isfinite(roots)]
    out = np.zeros((a.size, eps.size))
    if roots.size == 0:
        return out
    rr = np.broadcast_to(roots, (a.size, roots.size))
    dmin, _ = distances_to_interval(rr, a, b)                         # (P, R)
    mag = np.abs(roots)
    for j, e in enumerate(eps):
        d = dmin - e * mag[None, :]
        with np.errstate(divide="ignore"):
            out[:, j] = np.where(d > 0, 1.0 / np.maximum(d, 1e-300) ** 2, np.inf).sum(axis=1)
    return out


def _refine_for_slack(part: Partition, nominal: RootSet, inverse: RootSet | None, slack: float):
    """Cut the nominal partition until each interval's nominal curvature slack ``M h^2/8`` is below ``slack``.

    Returns ``(s, inv, a, b)`` arrays of the refined intervals, or None when it would take more than
    :data:`MAX_INTERVALS`.
    """
    s, inv, a, b = part.items.s, part.items.inv, part.items.a, part.items.b
    for _ in range(40):
        m = np.empty(a.size)
        for flag, roots in ((False, nominal), (True, inverse)):
            rows = inv == flag
            if rows.any():
                r = np.concatenate([roots.zeros[0], roots.poles[0]])
                m[rows] = _curvature_table(r, a[rows], b[rows], EPSILON_GRID[:1])[:, 0]
        need = m * (b - a) ** 2 / 8.0 > slack
        if np.isinf(m[need]).any():
            # a root on an interval (a transmission zero on the axis, the zeros at infinity of an all-pole
            # response at the end of an open stopband): one half keeps it whatever the cutting, its slack
            # stays infinite and no trial could be proved on this partition
            return None
        need &= (b - a) > 1e-12 * b
        if not need.any():
            return s, inv, a, b
        if a.size + need.sum() > MAX_INTERVALS:
            return None
        mid = np.where(a[need] > 0, np.sqrt(a[need] * b[need]), 0.5 * (a[need] + b[need]))
        s = np.concatenate([s[~need], s[need], s[need]])
        inv = np.concatenate([inv[~need], inv[need], inv[need]])
        a, b = np.concatenate([a[~need], a[need], mid]), np.concatenate([b[~need], mid, b[need]])
    return None


def bound_trials(roots: RootSet, nominal: RootSet, criteria: Criteria, partition: Partition, tol: float,
                 precision: float) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """Margins of every trial on the nominal's refined partition (nepers, see the module notes).

    Returns
    -------
    (estimate, bound, proven) or None
        ``estimate`` and ``bound`` (T, S): the worst sampled margin and its proved lower bound; ``proven``
        (T,) whether every segment is proved; None when the partition cannot be refined within its limit.
    """
    T, S = roots.trials, len(criteria.limits)
    has_tail = bool(partition.items.inv.any())
    inverse_nominal = nominal.reciprocal() if has_tail else None
    refined = _refine_for_slack(partition, nominal, inverse_nominal, SLACK_DB / NEPER_DB)
    if refined is None:
        return None
    s_i, inv_i, a_i, b_i = refined
    # trial movement and eligibility
    zt, pt = _paired(roots.zeros, None), _paired(roots.poles, roots.pole_group)
    zn, pn = _paired(nominal.zeros, None)[0], _paired(nominal.poles, nominal.pole_group)[0]
    eps_z, ok_z = _movement(zt, zn)
    eps_p, ok_p = _movement(pt, pn)
    eps = np.maximum(eps_z, eps_p)
    eligible = ok_z & ok_p & (eps <= EPSILON_GRID[-1])
    k_direct = np.minimum(np.searchsorted(EPSILON_GRID, np.where(eligible, eps, 0.0)), EPSILON_GRID.size - 1)
    eps_inv = np.where(eligible, eps / np.maximum(1.0 - eps, 1e-300), 0.0)
    k_inv = np.searchsorted(EPSILON_GRID, eps_inv)
    eligible &= k_inv < EPSILON_GRID.size
    k_inv = np.minimum(k_inv, EPSILON_GRID.size - 1)
    # every trial's exact gain at the partition's points, and each interval's curvature slack
    lo = np.empty((a_i.size, T))
    hi = np.empty((a_i.size, T))
    g_points: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []
    for flag in (False, True):
        rows = np.flatnonzero(inv_i == flag)
        if not rows.size:
            continue
        src = roots.reciprocal() if flag else roots
        nom = inverse_nominal if flag else nominal
        pts, where = np.unique(np.concatenate([a_i[rows], b_i[rows]]), return_inverse=True)
        g = src.log_magnitude(pts)                                         # (T, N)
        ga, gb = g[:, where[:rows.size]].T, g[:, where[rows.size:]].T      # (P_f, T)
        k = k_inv if flag else k_direct
        cols, k_col = np.unique(k, return_inverse=True)                     # only the movements trials need
        table = _curvature_table(np.concatenate([nom.zeros[0], nom.poles[0]]), a_i[rows], b_i[rows],
                                 EPSILON_GRID[cols])
        m = table[:, k_col]                                                 # (P_f, T)
        slack = m * ((b_i[rows] - a_i[rows]) ** 2 / 8.0)[:, None]
        with np.errstate(invalid="ignore"):
            lo[rows] = np.minimum(ga, gb) - slack
            hi[rows] = np.maximum(ga, gb) + slack
        g_points.append((rows, ga, gb, pts))
    lo = np.where(np.isnan(lo), -np.inf, lo)
    hi = np.where(np.isnan(hi), np.inf, hi)
    passbands = np.array([lim.band is Band.PASSBAND for lim in criteria.limits])
    limit_np = np.array([lim.limit_db for lim in criteria.limits]) / NEPER_DB
    pb_items = passbands[s_i]
    # per (trial, segment): the largest and smallest sampled gain and the extreme bounds
    gmin = np.full((S, T), np.inf)
    gmax = np.full((S, T), -np.inf)
    lo_min = np.full((S, T), np.inf)
    hi_max = np.full((S, T), -np.inf)
    for rows, ga, gb, _ in g_points:
        for s in np.unique(s_i[rows]):
            sel = s_i[rows] == s
            gmin[s] = np.minimum(gmin[s], np.minimum(ga[sel].min(axis=0), gb[sel].min(axis=0)))
            gmax[s] = np.maximum(gmax[s], np.maximum(ga[sel].max(axis=0), gb[sel].max(axis=0)))
    for s in range(S):
        sel = s_i == s
        if sel.any():
            lo_min[s] = lo[sel].min(axis=0)
            hi_max[s] = hi[sel].max(axis=0)
    if criteria.reference_gain_db is not None:
        r_lo = r_hi = np.full(T, criteria.reference_gain_db / NEPER_DB)
    else:
        cols = passbands if passbands.any() else np.ones(S, dtype=bool)
        r_lo, r_hi = gmax[cols].max(axis=0), hi_max[cols].max(axis=0)
    pb = passbands[:, None]
    estimate = np.where(pb, limit_np[:, None] - r_lo[None, :] + gmin, r_lo[None, :] - gmax - limit_np[:, None]).T
    bound = np.where(pb, limit_np[:, None] - r_hi[None, :] + lo_min, r_lo[None, :] - hi_max - limit_np[:, None]).T
    bound = np.where(eligible[:, None], bound, -np.inf)
    proven = np.all(bound >= -tol, axis=1)
    return estimate, bound, proven


def nominal_partition(nominal: RootSet, criteria: Criteria, tol: float, max_rounds: int) -> Partition | None:
    """The nominal's final partition (None when the nominal is unstable or the criteria have no segments)."""
    from service.response.verification import _empty_batch

    if not criteria.limits or nominal.unstable()[0]:
        return None
    out = _empty_batch(nominal, criteria)
    parts: list[Partition] = []
    verify_losses(nominal, criteria, np.array([0]), out, NOMINAL_PRECISION_DB / NEPER_DB, tol, max_rounds,
                  partition=parts)
    return parts[0]


__all__ = ["bound_trials", "nominal_partition", "SLACK_DB"]
