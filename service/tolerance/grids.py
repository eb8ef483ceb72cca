"""The frequencies a tolerance run evaluates, and the requirement's geometry on them.

Two sets of frequencies (Hz) are evaluated together for every trial:

``frequency_hz`` (F)
    The caller's grid: the percentiles of magnitude, phase and group delay
    are reported there (the group delay in closed form from each trial's
    polynomials: :meth:`service.circuit.PreparedAc.polar`).
metric grid (M)
    The caller's grid, every finite requirement edge, a dense window of
    :data:`WINDOW_POINTS` log-spaced points around each nominal 3 dB
    frequency, the sensitivity frequencies, and DC for lowpass and bandstop
    responses.  Per-trial figures (3 dB frequency, ripple, loss at the
    edges) are read on it; the verdict of each trial is the verifier's, on
    the whole band (:mod:`service.response.verification`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.approximation.types import ResponseType
from service.response.verification import Band, Criteria

#: Points of the dense window around each nominal 3 dB frequency.
WINDOW_POINTS = 129
#: Half-width limits of that window (relative).
WINDOW_MIN, WINDOW_MAX = 0.02, 0.5
#: Half-power level, dB (10 log10 2).
HALF_POWER_DB = 10.0 * math.log10(2.0)


@dataclass
class Edge:
    """A finite requirement edge: frequency (Hz), band, its segment and its column in the metric grid."""

    frequency_hz: float
    band: str
    segment: int
    column: int


@dataclass
class Grids:
    """Frequencies of a run and index maps between them (see the module notes)."""

    frequency_hz: np.ndarray          # (F,)
    metric_hz: np.ndarray             # (M,) sorted, may start with 0
    caller_columns: np.ndarray        # (F,) indices of frequency_hz in metric_hz
    extra_hz: np.ndarray              # metric points not on the caller's grid
    order: np.ndarray                 # concat(F, extra)[order] == metric
    response: ResponseType
    criteria: Criteria | None
    segment_columns: list[np.ndarray] = field(default_factory=list)   # bool (M,) per segment
    edges: list[Edge] = field(default_factory=list)
    passband_columns: np.ndarray | None = None                        # bool (M,)
    sensitivity_hz: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def positive(self) -> np.ndarray:
        """Bool (M,): metric points above 0 Hz (where 3 dB crossings are searched)."""
        return self.metric_hz > 0

    def evaluation_hz(self) -> np.ndarray:
        """Columns of one engine call: the caller's grid, then the other metric points (``order`` sorts them)."""
        return np.concatenate([self.frequency_hz, self.extra_hz])


def crossings(f_hz: np.ndarray, gain_db: np.ndarray, level_db: float, response: ResponseType) -> list[float]:
    """Nominal 3 dB frequencies on a dense grid (linear interpolation in log f); [] when absent."""
    below = gain_db < level_db
    idx = np.flatnonzero(below)
    if idx.size == 0:
        return []
    out = []

    def cross(a, b):
        fa, fb = math.log(f_hz[a]), math.log(f_hz[b])
        ga, gb = gain_db[a], gain_db[b]
        t = (level_db - ga) / (gb - ga) if gb != ga else 0.5
        return math.exp(fa + t * (fb - fa))

    if response is ResponseType.LOWPASS and idx[0] > 0:
        out.append(cross(idx[0] - 1, idx[0]))
    elif response is ResponseType.HIGHPASS and idx[-1] < f_hz.size - 1:
        out.append(cross(idx[-1], idx[-1] + 1))
    elif response is ResponseType.BANDPASS:
        k = int(np.argmax(gain_db))
        lo, hi = idx[idx < k], idx[idx > k]
        if lo.size and hi.size:
            out += [cross(lo[-1], lo[-1] + 1), cross(hi[0] - 1, hi[0])]
    elif response is ResponseType.BANDSTOP and idx[0] > 0 and idx[-1] < f_hz.size - 1:
        out += [cross(idx[0] - 1, idx[0]), cross(idx[-1], idx[-1] + 1)]
    return out


def build_grids(frequency_hz: np.ndarray, response: ResponseType, criteria: Criteria | None, f3_nominal: list[float],
                window: float, sensitivity_hz: np.ndarray) -> Grids:
    """Assemble the metric grid and the mask's index maps.

    Parameters
    ----------
    frequency_hz : ndarray (F,)
        The caller's grid, Hz, increasing.
    response : ResponseType
    criteria : Criteria or None
        The requirement's segments (their edges join the metric grid).
    f3_nominal : list of float
        Nominal 3 dB frequencies (Hz) to surround with a dense window.
    window : float
        Relative half-width of that window (clipped to [WINDOW_MIN, WINDOW_MAX]).
    sensitivity_hz : ndarray
        Frequencies (Hz) of the magnitude sensitivities.
    """
    f = np.asarray(frequency_hz, dtype=float)
    extra = [f, np.asarray(sensitivity_hz, dtype=float)]
    w = min(max(window, WINDOW_MIN), WINDOW_MAX)
    for f3 in f3_nominal:
        extra.append(np.geomspace(f3 / (1.0 + w), f3 * (1.0 + w), WINDOW_POINTS))
    edge_list = []
    if criteria is not None:
        for i, lim in enumerate(criteria.limits):
            band = lim.band.value
            for e in (lim.start_hz, lim.stop_hz):
                if math.isfinite(e) and e > 0:
                    edge_list.append((float(e), band, i))
        extra.append(np.array([e for e, _, _ in edge_list], dtype=float))
    if response in (ResponseType.LOWPASS, ResponseType.BANDSTOP):
        extra.append(np.zeros(1))
    metric = np.unique(np.concatenate(extra))
    cols = np.searchsorted(metric, f)
    others = np.ones(metric.size, dtype=bool)
    others[cols] = False
    extra_hz = metric[others]
    order = np.argsort(np.concatenate([f, extra_hz]), kind="stable")
    g = Grids(frequency_hz=f, metric_hz=metric, caller_columns=cols, extra_hz=extra_hz,
              order=order, response=response, criteria=criteria, sensitivity_hz=np.asarray(sensitivity_hz, dtype=float))
    if criteria is not None:
        top = metric[-1]
        pb = np.zeros(metric.size, dtype=bool)
        for lim in criteria.limits:
            stop = lim.stop_hz if math.isfinite(lim.stop_hz) else top
            inside = (metric >= lim.start_hz) & (metric <= stop)
            if lim.start_hz > 0 or 0.0 not in metric:
                inside &= metric > 0
            g.segment_columns.append(inside)
            if lim.band is Band.PASSBAND:
                pb |= inside
        g.passband_columns = pb if pb.any() else None
        g.edges = [Edge(e, band, i, int(np.searchsorted(metric, e))) for e, band, i in edge_list]
    return g


__all__ = ["Grids", "Edge", "build_grids", "crossings", "HALF_POWER_DB", "WINDOW_POINTS"]
