"""The branch-and-bound behind the verifier: sub-intervals of every segment cut until their bounds decide.

See :mod:`service.response.verification` for what is decided, and
:mod:`service.response.bounds` for the bounds.  Gains are in nepers and
angular frequencies in rad/s inside; the entry points write their findings
into a :class:`service.response.verification.BatchVerdict`.

References
----------
.. [1] R. E. Moore, R. B. Kearfott, M. J. Cloud, *Introduction to Interval
   Analysis*, SIAM, 2009, ch. 6 (branch and bound over interval enclosures).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.circuit.roots import RootSet
from service.response.bounds import delay_bounds, group_delay, log_gain_bounds
from service.response.criteria import (DELAY_PRECISION_PCT, DELAY_TOLERANCE_PCT, NEPER_DB, TWO_PI, Band, Criteria,
                                       DelayLimit, LossLimit)

#: Initial sub-intervals per decade of a segment, before refinement.
POINTS_PER_DECADE = 16
#: A segment that starts at 0 Hz gets its first log point this far below the lowest root frequency.
DC_DECADES = 2.0
#: A root whose imaginary part is below this fraction of its magnitude is real (rounding of the root finder).
REAL_ROOT_IMAG = 1e-9
#: Rounds of cutting before the search gives up (each round cuts every undecided interval).
MAX_ROUNDS = 90
#: A stopband open to infinity is searched in frequency up to this multiple of the largest root magnitude,
#: and beyond it in the reciprocal frequency down to 0 (infinity itself): see :meth:`RootSet.reciprocal`.
TAIL_START_FACTOR = 10.0
#: Pieces an undecided interval is cut into per round.
SPLIT = 4
#: Intervals narrower than this (relative) are not cut further.
MIN_RELATIVE_WIDTH = 1e-13


@dataclass
class _Items:
    """Sub-intervals under examination.

    ``t`` trial, ``s`` segment, ``inv`` whether the interval is in the reciprocal variable
    ``u = 1/omega`` (the tail of a stopband open to infinity), ``a < b`` its ends (rad/s, or s/rad
    when ``inv``), ``ga``, ``gb`` the exact log gains there (nepers).
    """

    t: np.ndarray
    s: np.ndarray
    inv: np.ndarray
    a: np.ndarray
    b: np.ndarray
    ga: np.ndarray
    gb: np.ndarray

    FIELDS = ("t", "s", "inv", "a", "b", "ga", "gb")

    def take(self, keep: np.ndarray) -> "_Items":
        return _Items(*(getattr(self, f)[keep] for f in self.FIELDS))

    @staticmethod
    def join(parts: list["_Items"]) -> "_Items":
        return _Items(*(np.concatenate([getattr(p, f) for p in parts]) for f in _Items.FIELDS))

    def __len__(self) -> int:
        return int(self.t.size)


class _Response:
    """A batch's log gain and its bounds, in omega or in the reciprocal variable per interval."""

    def __init__(self, roots: RootSet, tails: bool):
        self.roots = roots
        self.inverse = roots.reciprocal() if tails else None

    def _pick(self, inv: bool) -> RootSet:
        return self.inverse if inv else self.roots

    def log_gain(self, t: np.ndarray, inv: np.ndarray, x: np.ndarray) -> np.ndarray:
        """``ln |H|`` at ``x`` (K, m) for rows ``t`` (K,), each in its own variable."""
        out = np.empty(x.shape)
        for flag in (False, True):
            rows = inv == flag
            if rows.any():
                out[rows] = self._pick(flag).log_magnitude(x[rows], trials=t[rows])
        return out

    def bounds(self, items: _Items) -> tuple[np.ndarray, np.ndarray]:
        lo = np.empty(len(items))
        hi = np.empty(len(items))
        for flag in (False, True):
            rows = items.inv == flag
            if rows.any():
                r, t = self._pick(flag), items.t[rows]
                lo[rows], hi[rows] = log_gain_bounds(r.zeros[t], r.poles[t], r.log_gain[t], items.a[rows],
                                                     items.b[rows], items.ga[rows], items.gb[rows])
        return lo, hi


def _segment_points(lo: float, hi: float, critical: np.ndarray) -> np.ndarray:
    """Initial break points of ``[lo, hi]``: log spaced, plus the root frequencies inside it."""
    crit = critical[(critical > lo) & (critical < hi)]
    floor = lo
    if lo == 0.0:
        low_roots = critical[critical > 0]
        floor = min(hi, (low_roots.min() if low_roots.size else hi) * 10.0 ** -DC_DECADES)
    n = max(2, int(math.ceil(POINTS_PER_DECADE * math.log10(hi / floor))) + 1) if floor > 0 else 2
    pts = np.geomspace(floor, hi, n) if floor > 0 else np.array([lo, hi])
    return np.unique(np.concatenate([[lo, hi], pts, crit]))


def _critical(roots: RootSet) -> np.ndarray:
    """Magnitudes and imaginary parts of a trial's roots (rad/s): where the response changes shape."""
    r = np.concatenate([roots.zeros.ravel(), roots.poles.ravel()])
    r = r[np.isfinite(r)]
    mag, im = np.abs(r), np.abs(r.imag)
    # an imaginary part at rounding level (a real root's) marks no frequency: kept, it would start a
    # passband's search some twenty decades below every root (only the partition's work, not its bounds)
    vals = np.concatenate([mag, im[im > REAL_ROOT_IMAG * mag]])
    return np.unique(vals[vals > 0])


def _extreme_at(size: int, key: np.ndarray, value: np.ndarray, where: np.ndarray, lowest: bool
                ) -> tuple[np.ndarray, np.ndarray]:
    """Per key in ``range(size)``: the smallest (or largest) ``value`` and a ``where`` attaining it."""
    best = np.full(size, np.inf if lowest else -np.inf)
    (np.minimum if lowest else np.maximum).at(best, key, value)
    loc = np.full(size, np.nan)
    hit = value == best[key]
    loc[key[hit]] = where[hit]
    return best, loc


def _omega(x: np.ndarray, inv: np.ndarray) -> np.ndarray:
    """Angular frequency of points ``x`` given in their own variable (``u = 0`` is infinity)."""
    with np.errstate(divide="ignore"):
        return np.where(inv, 1.0 / x, x)


class _Search:
    """Branch-and-bound state of the loss segments of ``T`` trials (gains in nepers).

    Intervals that no longer need cutting are retired into per (trial,
    segment) aggregates: the smallest and largest exact gain on their ends
    (with where, rad/s) and the smallest lower / largest upper bound.  Within
    one search the criteria only get looser, so a retired interval never
    needs cutting again.
    """

    def __init__(self, response: _Response, criteria: Criteria, trials: int):
        self.response = response
        self.criteria = criteria
        self.passbands = np.array([lim.band is Band.PASSBAND for lim in criteria.limits])
        self.S = len(criteria.limits)
        shape = (trials, self.S)
        self.gmin = np.full(shape, np.inf)
        self.wmin = np.full(shape, np.nan)
        self.gmax = np.full(shape, -np.inf)
        self.wmax = np.full(shape, np.nan)
        self.lo_min = np.full(shape, np.inf)
        self.hi_max = np.full(shape, -np.inf)

    def _retire(self, items: _Items, lo: np.ndarray, hi: np.ndarray) -> None:
        if not len(items):
            return
        size = self.gmin.size
        key = items.t * self.S + items.s
        k2 = np.concatenate([key, key])
        g2 = np.concatenate([items.ga, items.gb])
        w2 = _omega(np.concatenate([items.a, items.b]), np.concatenate([items.inv, items.inv]))
        for lowest, gval, wval in ((True, self.gmin, self.wmin), (False, self.gmax, self.wmax)):
            best, loc = _extreme_at(size, k2, g2, w2, lowest)
            flat, flat_w = gval.ravel(), wval.ravel()
            upd = best < flat if lowest else best > flat
            flat[upd] = best[upd]
            flat_w[upd] = loc[upd]
        np.minimum.at(self.lo_min.ravel(), key, lo)
        np.maximum.at(self.hi_max.ravel(), key, hi)

    def stats(self, items: _Items, lo: np.ndarray, hi: np.ndarray):
        """Combined (retired and active) gmin, gmax, lo_min, hi_max, each (T, S)."""
        gmin, gmax, lo_min, hi_max = self.gmin.copy(), self.gmax.copy(), self.lo_min.copy(), self.hi_max.copy()
        if len(items):
            key = items.t * self.S + items.s
            np.minimum.at(gmin.ravel(), key, np.minimum(items.ga, items.gb))
            np.maximum.at(gmax.ravel(), key, np.maximum(items.ga, items.gb))
            np.minimum.at(lo_min.ravel(), key, lo)
            np.maximum.at(hi_max.ravel(), key, hi)
        return gmin, gmax, lo_min, hi_max

    def reference(self, gmax: np.ndarray, hi_max: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(lower, upper) bound of each trial's reference gain (nepers)."""
        if self.criteria.reference_gain_db is not None:
            r = np.full(gmax.shape[0], self.criteria.reference_gain_db / NEPER_DB)
            return r, r
        cols = self.passbands if self.passbands.any() else np.ones(self.S, dtype=bool)
        return gmax[:, cols].max(axis=1), hi_max[:, cols].max(axis=1)

    def run(self, items: _Items, select, max_rounds: int, *, keep: bool = False):
        """Cut the intervals ``select(items, lo, hi, stats, reference)`` asks for, up to ``max_rounds`` times;
        every interval ends retired.  With ``keep``, return the final partition with its bounds:
        ``(items, lo, hi)`` (nepers)."""
        kept: list[tuple[_Items, np.ndarray, np.ndarray]] = []
        for _ in range(max_rounds):
            if not len(items):
                break
            lo, hi = self.response.bounds(items)
            stats = self.stats(items, lo, hi)
            split = select(items, lo, hi, stats, self.reference(stats[1], stats[3]))
            split &= (items.b - items.a) > MIN_RELATIVE_WIDTH * items.b
            done = items.take(~split)
            self._retire(done, lo[~split], hi[~split])
            if keep:
                kept.append((done, lo[~split], hi[~split]))
            items = _divide(self.response, items.take(split), SPLIT)
        if len(items):
            lo, hi = self.response.bounds(items)
            self._retire(items, lo, hi)
            kept.append((items, lo, hi))
        if not keep:
            return None
        if not kept:
            return items, np.zeros(0), np.zeros(0)
        return (_Items.join([k[0] for k in kept]), np.concatenate([k[1] for k in kept]),
                np.concatenate([k[2] for k in kept]))


def _divide(response: _Response, items: _Items, pieces: int) -> _Items:
    """Each interval cut into ``pieces`` (geometrically where it does not touch 0), the gain evaluated at the cuts."""
    if not len(items):
        return items
    a, b = items.a[:, None], items.b[:, None]
    frac = np.arange(1, pieces)[None, :] / pieces
    with np.errstate(divide="ignore", invalid="ignore"):
        cuts = np.where((items.a > 0)[:, None], a * (b / a) ** frac, a + (b - a) * frac)
    cuts = np.where((cuts <= a) | (cuts >= b), a + (b - a) * frac, cuts)              # (K, pieces-1)
    g = response.log_gain(items.t, items.inv, cuts)
    ends = np.concatenate([a, cuts, b], axis=1)
    vals = np.concatenate([items.ga[:, None], g, items.gb[:, None]], axis=1)
    return _Items(np.repeat(items.t, pieces), np.repeat(items.s, pieces), np.repeat(items.inv, pieces),
                  ends[:, :-1].ravel(), ends[:, 1:].ravel(), vals[:, :-1].ravel(), vals[:, 1:].ravel())


def _spans(limits: tuple[LossLimit, ...], critical: np.ndarray) -> tuple[list, float]:
    """Per segment, the (start, stop, inv) spans searched; and where open stopbands pass to the tail (rad/s).

    A stopband open to infinity is searched in omega up to TAIL_START_FACTOR x the largest root
    magnitude, and beyond in ``u = 1/omega`` from 0 (infinity) to the reciprocal of that.
    """
    top = float(critical.max()) if critical.size else 1.0
    spans = []
    split_at = None
    for lim in limits:
        start = TWO_PI * lim.start_hz
        if math.isfinite(lim.stop_hz):
            spans.append([(start, TWO_PI * lim.stop_hz, False)])
            continue
        split_at = max(TAIL_START_FACTOR * top, 10.0 * start, 1e-300)
        spans.append([(start, split_at, False), (0.0, 1.0 / split_at, True)])
    return spans, split_at


def _initial_items(response: _Response, spans: list, critical: np.ndarray) -> _Items:
    """The initial partition of every segment for every trial."""
    T = response.roots.trials
    inv_critical = np.unique(1.0 / critical) if critical.size else critical
    parts = []
    for s, pieces in enumerate(spans):
        for lo, hi, inv in pieces:
            w = _segment_points(lo, hi, inv_critical if inv else critical)
            g = (response.inverse if inv else response.roots).log_magnitude(w)          # (T, n)
            k = w.size - 1
            parts.append(_Items(np.repeat(np.arange(T), k), np.full(T * k, s), np.full(T * k, inv),
                                np.tile(w[:-1], T), np.tile(w[1:], T), g[:, :-1].ravel(), g[:, 1:].ravel()))
    return _Items.join(parts)


@dataclass
class Partition:
    """The final sub-intervals of a one-trial search, with their gain bounds (nepers) and the reference's."""

    items: _Items
    lower: np.ndarray
    upper: np.ndarray
    reference_low: float
    reference_high: float
    reference_omega: float


def verify_losses(roots: RootSet, criteria: Criteria, live: np.ndarray, out, precision: float,
                  tol: float, max_rounds: int, *, partition: list | None = None,
                  critical_trial: int | None = None) -> None:
    """The branch-and-bound of the loss segments for the stable trials ``live`` (nepers inside).

    Writes into ``out`` (a :class:`service.response.verification.BatchVerdict`).  With a list as
    ``partition`` (one live trial), appends the final :class:`Partition` of the margins' search.
    The initial partition's break points come from the roots of trial ``critical_trial`` (default
    ``live[0]``), so that the trials of one run, searched in chunks, start from the same points.
    """
    limits = criteria.limits
    S = len(limits)
    T = live.size
    sub = RootSet(roots.zeros[live], roots.poles[live], roots.log_gain[live], roots.pole_group)
    critical = _critical(roots.trial(int(live[0] if critical_trial is None else critical_trial)))
    spans, _ = _spans(limits, critical)
    response = _Response(sub, tails=any(len(p) > 1 for p in spans))
    passbands = np.array([lim.band is Band.PASSBAND for lim in limits])
    limit_np = np.array([lim.limit_db for lim in limits]) / NEPER_DB
    stops = np.tile(np.array([TWO_PI * lim.stop_hz for lim in limits]), (T, 1))
    ended = np.zeros((T, S), dtype=bool)
    items = _initial_items(response, spans, critical)

    # 1. the reference (the largest passband gain), pinned down first: the margins depend on it
    if criteria.reference_gain_db is None:
        first = _Search(response, criteria, T)

        def for_reference(items, lo, hi, stats, ref):
            return passbands[items.s] & (hi > ref[0][items.t] + tol)
        pb_items = passbands[items.s] if passbands.any() else np.ones(len(items), dtype=bool)
        refined, _, _ = first.run(items.take(pb_items), for_reference, max_rounds, keep=True)
        items = _Items.join([refined, items.take(~pb_items)])
        r_ref = first.reference(first.gmax, first.hi_max)[0]
    else:
        r_ref = np.full(T, criteria.reference_gain_db / NEPER_DB)

    # 2. where each open passband that may end with the op-amps' roll-off ends
    for s, lim in enumerate(limits):
        if not (lim.ends_with_rolloff and lim.band is Band.PASSBAND):
            continue
        end = _rolloff_end(response, items, s, r_ref - limit_np[s], tol)
        end = np.where(end >= TWO_PI * lim.rolloff_from_hz, end, np.inf)   # too early: the band fails instead
        has_end = end < stops[:, s]
        if has_end.any():
            stops[has_end, s] = end[has_end]
            ended[has_end, s] = True
            items = _truncate(response, items, s, stops[:, s])

    # 3. every segment's worst margin
    search = _Search(response, criteria, T)

    def for_margins(items, lo, hi, stats, ref):
        gmin, gmax = stats[0], stats[1]
        r_lo, r_hi = ref
        t, s = items.t, items.s
        pb = passbands[s]
        est = np.where(pb, limit_np[s] - r_lo[t] + gmin[t, s], r_lo[t] - gmax[t, s] - limit_np[s])
        bound = np.where(pb, limit_np[s] - r_hi[t] + lo, r_lo[t] - hi - limit_np[s])
        need = (bound < est - precision) | ((bound < -tol) & (est >= -tol))
        if criteria.reference_gain_db is None:
            need |= pb & (hi > r_lo[t] + tol)
        return need

    kept = search.run(items, for_margins, max_rounds, keep=partition is not None)

    r_lo, r_hi = search.reference(search.gmax, search.hi_max)
    if partition is not None:
        cols = passbands if passbands.any() else np.ones(S, dtype=bool)
        k = int(np.argmax(np.where(cols, search.gmax[0], -np.inf)))
        partition.append(Partition(kept[0], kept[1], kept[2], float(r_lo[0]), float(r_hi[0]),
                                   float(search.wmax[0, k])))
    pb = passbands[None, :]
    est = np.where(pb, limit_np - r_lo[:, None] + search.gmin, r_lo[:, None] - search.gmax - limit_np)
    bound = np.where(pb, limit_np - r_hi[:, None] + search.lo_min, r_lo[:, None] - search.hi_max - limit_np)
    where = np.where(pb, search.wmin, search.wmax)
    g_worst = np.where(pb, search.gmin, search.gmax)
    with np.errstate(invalid="ignore"):
        gap = np.where(est == bound, 0.0, np.maximum(est - bound, 0.0))   # equal infinities: nothing unresolved
    resolved = (gap <= precision * (1 + 1e-6)) & ((est < -tol) | (bound >= -tol))
    margin = np.where(resolved, est, bound)
    margin = np.where(np.abs(margin) <= tol, 0.0, margin)
    out.reference_gain_db[live] = r_lo * NEPER_DB
    out.margin_db[live] = margin * NEPER_DB
    out.worst_hz[live] = where / TWO_PI
    out.loss_db[live] = (r_lo[:, None] - g_worst) * NEPER_DB
    out.unresolved_db[live] = np.where(resolved, 0.0, gap * NEPER_DB)
    out.checked_to_hz[live] = stops / TWO_PI
    out.ended[live] = ended


def _rolloff_end(response: _Response, items: _Items, s: int, level: np.ndarray, tol: float) -> np.ndarray:
    """Per trial, where segment ``s`` (a passband) starts to stay below the gain ``level`` (nepers) at every
    sample up to its stop -- a roll-off -- (rad/s); ``inf`` when its top passes or it fails from its start.

    The crossing inside the highest interval whose lower end still passes is found by bisection,
    keeping the end where the gain is still >= ``level + tol`` (a margin of at least ``tol`` there).
    """
    T = level.size
    sel = items.s == s
    t, a, b, ga, gb = items.t[sel], items.a[sel], items.b[sel], items.ga[sel], items.gb[sel]
    passes_a = ga >= level[t] - tol
    top_a = np.full(T, -np.inf)
    np.maximum.at(top_a, t, a)
    is_top = a == top_a[t]
    top_fails = np.zeros(T, dtype=bool)
    top_fails[t[is_top]] = gb[is_top] < level[t[is_top]] - tol
    last_pass = np.full(T, -np.inf)
    np.maximum.at(last_pass, t, np.where(passes_a, a, -np.inf))
    pick = passes_a & (a == last_pass[t]) & top_fails[t]
    lo = np.full(T, np.nan)
    hi = np.full(T, np.nan)
    lo[t[pick]] = a[pick]
    hi[t[pick]] = b[pick]
    todo = np.flatnonzero(np.isfinite(lo))
    lo, hi = lo[todo], hi[todo]
    for _ in range(64):
        if not todo.size or np.all(hi - lo <= MIN_RELATIVE_WIDTH * hi):
            break
        mid = 0.5 * (lo + hi)
        gm = response.roots.log_magnitude(mid[:, None], trials=todo)[:, 0]
        ok = gm >= level[todo] + tol        # keep a margin of +tol at the end, so that it proves
        lo = np.where(ok, mid, lo)
        hi = np.where(ok, hi, mid)
    end = np.full(T, np.inf)
    end[todo] = lo
    return end


def _truncate(response: _Response, items: _Items, s: int, stops: np.ndarray) -> _Items:
    """Cut segment ``s``'s intervals (in omega) at the per-trial ``stops`` (rad/s)."""
    sel = items.s == s
    items = items.take(~(sel & (items.a >= stops[items.t])))
    cut = (items.s == s) & (items.b > stops[items.t])
    if cut.any():
        b = items.b.copy()
        gb = items.gb.copy()
        b[cut] = stops[items.t[cut]]
        gb[cut] = response.roots.log_magnitude(b[cut][:, None], trials=items.t[cut])[:, 0]
        items = _Items(items.t, items.s, items.inv, items.a, b, items.ga, gb)
    return items


def verify_delay(roots: RootSet, limit: DelayLimit, live: np.ndarray, out: BatchVerdict, max_rounds: int) -> None:
    """Branch-and-bound of the deviation ``100 |tau - tau0| / tau0`` (percent) over ``[0, stop]``, trials ``live``.

    An interval is halved while its bound could exceed both the largest sampled deviation (plus
    :data:`DELAY_PRECISION_PCT`) and the limit (plus the tolerance).
    """
    T = roots.trials
    out.delay_margin_pct = np.full(T, np.nan)
    out.delay_worst_hz = np.full(T, np.nan)
    out.delay_deviation_pct = np.full(T, np.nan)
    out.dc_delay_s = np.full(T, np.nan)
    out.delay_proved = np.zeros(T, dtype=bool)
    if not live.size:
        return
    z, p = roots.zeros[live], roots.poles[live]
    n = live.size
    tau0 = group_delay(z, p, np.zeros((n, 1)))[:, 0]
    scale = 100.0 / np.where(tau0 > 0, tau0, np.nan)
    w = _segment_points(0.0, TWO_PI * limit.stop_hz, _critical(roots.trial(int(live[0]))))
    tau = group_delay(z, p, np.broadcast_to(w, (n, w.size)))
    dev = np.abs(tau - tau0[:, None]) * scale[:, None]
    worst = dev.max(axis=1)
    worst_w = w[np.argmax(dev, axis=1)]
    k = w.size - 1
    t = np.repeat(np.arange(n), k)
    a, b = np.tile(w[:-1], n), np.tile(w[1:], n)
    ta, tb = tau[:, :-1].ravel(), tau[:, 1:].ravel()
    bound = worst.copy()
    pct = limit.max_deviation_pct
    for _ in range(max_rounds):
        if not t.size:
            break
        lo, hi = delay_bounds(z[t], p[t], a, b, ta, tb)
        dev_bound = np.maximum(np.abs(hi - tau0[t]), np.abs(lo - tau0[t])) * scale[t]
        need = dev_bound > np.maximum(worst[t] + DELAY_PRECISION_PCT, pct + DELAY_TOLERANCE_PCT)
        need &= (b - a) > MIN_RELATIVE_WIDTH * b
        np.maximum.at(bound, t[~need], dev_bound[~need])
        t, a, b, ta, tb = t[need], a[need], b[need], ta[need], tb[need]
        if not t.size:
            break
        mid = 0.5 * (a + b)
        tm = group_delay(z[t], p[t], mid[:, None])[:, 0]
        dm = np.abs(tm - tau0[t]) * scale[t]
        order = np.argsort(-dm, kind="stable")
        first = order[np.unique(t[order], return_index=True)[1]]
        upd = dm[first] > worst[t[first]]
        worst[t[first][upd]] = dm[first][upd]
        worst_w[t[first][upd]] = mid[first][upd]
        t = np.concatenate([t, t])
        a, b = np.concatenate([a, mid]), np.concatenate([mid, b])
        ta, tb = np.concatenate([ta, tm]), np.concatenate([tm, tb])
    if t.size:
        lo, hi = delay_bounds(z[t], p[t], a, b, ta, tb)
        np.maximum.at(bound, t, np.maximum(np.abs(hi - tau0[t]), np.abs(lo - tau0[t])) * scale[t])
    bound = np.maximum(bound, worst)
    resolved = (bound - worst) <= DELAY_PRECISION_PCT * (1 + 1e-9)
    margin = np.where(resolved, pct - worst, pct - bound)
    margin = np.where(np.abs(margin) <= DELAY_TOLERANCE_PCT, 0.0, margin)
    out.delay_margin_pct[live] = margin
    out.delay_worst_hz[live] = worst_w / TWO_PI
    out.delay_deviation_pct[live] = worst
    out.dc_delay_s[live] = tau0
    out.delay_proved[live] = resolved | (pct - bound >= -DELAY_TOLERANCE_PCT)


__all__ = ["verify_losses", "verify_delay", "MAX_ROUNDS", "POINTS_PER_DECADE", "SPLIT"]
