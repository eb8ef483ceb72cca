"""The requirement checked on a design's exported netlist by ngspice alone: an independent verdict.

Dense log sweeps (``PER_DECADE`` points per decade) over every segment, the
reference gain the largest sampled passband gain, every sampled local extreme
of each segment's margin polished by two rounds of dense linear sweeps around
it (each 1/``ZOOM`` of the previous bracket) -- the "dense check with extremum
refinement" run in the reference simulator.  Open passbands that may end with
the op-amps' roll-off follow the service's stated rule (a run of failing
samples reaching the top of the band ends it at the crossing); stopbands open
to infinity are checked up to ``TOP_FACTOR`` times the highest critical
frequency given, where every realized filter here has settled.
"""

from __future__ import annotations

import math

import numpy as np

from service.response.verification import Band, Criteria
from tests.ngspice import run_ngspice_sweeps

PER_DECADE = 200
ZOOM = 40
CANDIDATES = 6
TOP_FACTOR = 1e4


def _gain_db(h: np.ndarray) -> np.ndarray:
    return 20 * np.log10(np.maximum(np.abs(h), 1e-300))


def ngspice_margins(netlist: str, criteria: Criteria, top_hz: float) -> tuple[list[float], list[float]]:
    """Worst margin (dB) of each segment, and where each checked segment ends (Hz), from ngspice alone.

    ``top_hz``: the highest critical frequency of the design (poles, zeros, op-amp bandwidth).
    """
    edges = [f for lim in criteria.limits for f in (lim.start_hz, lim.stop_hz) if 0 < f < math.inf]
    lo = min(edges) / 1e3
    hi = max(max(edges) * 10, top_hz * TOP_FACTOR)
    ((f, h),) = run_ngspice_sweeps(netlist, [f"dec {PER_DECADE} {float(lo):.17g} {float(hi):.17g}"])
    g = _gain_db(h)
    spans = []
    for lim in criteria.limits:
        a = lim.start_hz if lim.start_hz > 0 else f[0]
        b = lim.stop_hz if math.isfinite(lim.stop_hz) else f[-1]
        spans.append((a, b))
    pb = [i for i, lim in enumerate(criteria.limits) if lim.band is Band.PASSBAND]

    # each segment's two ends, one single-point sweep each (a two-point lin sweep gives one point here)
    edge_tables = run_ngspice_sweeps(netlist, [f"lin 1 {float(x):.17g} {float(x):.17g}" for a, b in spans
                                               for x in (a, b)])

    def sample(i):
        a, b = spans[i]
        sel = (f >= a * (1 - 1e-12)) & (f <= b * (1 + 1e-12))
        (fa, ha), (fb, hb) = edge_tables[2 * i], edge_tables[2 * i + 1]
        ff = np.concatenate([f[sel], fa, fb])
        gg = np.concatenate([g[sel], _gain_db(ha), _gain_db(hb)])
        ff, first = np.unique(ff, return_index=True)        # sorted, without repeated points
        return ff, gg[first]

    samples = [sample(i) for i in range(len(spans))]

    def polish(jobs):
        """For each (segment, highest) job: the largest (or smallest) gain on the segment, sampled, then the best
        sampled extrema zoomed twice by dense linear sweeps (all brackets of a round in one ngspice run)."""
        best, brackets = [], []
        for n, (i, highest) in enumerate(jobs):
            ff, gg = samples[i]
            sign = -1.0 if highest else 1.0
            sg = sign * gg
            idx = np.flatnonzero(np.r_[True, sg[1:-1] <= np.minimum(sg[:-2], sg[2:]), True])
            idx = idx[np.argsort(sg[idx])][:CANDIDATES]
            best.append(float(sg.min()))
            brackets += [(n, sign, ff[max(k - 1, 0)], ff[min(k + 1, ff.size - 1)]) for k in idx]
        for _ in range(2):
            brackets = [br for br in brackets if br[3] > br[2] * (1 + 1e-12)]
            if not brackets:
                break
            tables = run_ngspice_sweeps(netlist, [f"lin {ZOOM + 1} {float(a):.17g} {float(b):.17g}" for _, _, a, b in brackets])
            nxt = []
            for (n, sign, _, _), (fz, hz) in zip(brackets, tables):
                sz = sign * _gain_db(hz)
                j = int(np.argmin(sz))
                best[n] = min(best[n], float(sz[j]))
                nxt.append((n, sign, fz[max(j - 1, 0)], fz[min(j + 1, fz.size - 1)]))
            brackets = nxt
        return [(-1.0 if highest else 1.0) * b for (_, highest), b in zip(jobs, best)]

    ref = max(polish([(i, True) for i in pb]))
    ends = []
    for i, lim in enumerate(criteria.limits):
        a, b = spans[i]
        if lim.ends_with_rolloff:
            ff, gg = samples[i]
            fails = (ref - gg) > lim.limit_db
            if fails[-1] and not fails.all() and ff[int(np.flatnonzero(~fails)[-1]) + 1] > ff[int(np.flatnonzero(~fails)[-1])]:
                k = int(np.flatnonzero(~fails)[-1])
                # the crossing inside [ff[k], ff[k + 1]] by a fine linear sweep
                ((fz, hz),) = run_ngspice_sweeps(netlist, [f"lin 401 {float(ff[k]):.17g} {float(ff[k + 1]):.17g}"])
                gz = _gain_db(hz)
                ok = np.flatnonzero((ref - gz) <= lim.limit_db)
                b_end, gb = (float(fz[ok[-1]]), float(gz[ok[-1]])) if ok.size else (float(ff[k]), float(gg[k]))
                if b_end < lim.rolloff_from_hz:     # a roll-off may not end the band that early
                    ends.append(b)
                    continue
                b = b_end
                spans[i] = (a, b)
                keep = ff < b
                samples[i] = (np.append(ff[keep], b), np.append(gg[keep], gb))
        ends.append(b)
    extremes = polish([(i, lim.band is Band.STOPBAND) for i, lim in enumerate(criteria.limits)])
    margins = []
    for lim, g in zip(criteria.limits, extremes):
        margins.append(lim.limit_db - (ref - g) if lim.band is Band.PASSBAND else (ref - g) - lim.limit_db)
    return margins, ends
