"""A first-order yield model of a design: every trial's margins from the part sensitivities.

Tolerance assignment needs the yield of many candidate assignments; the
verifier is far too costly for each.  This module gives the classical
linear (first-order Taylor) model of the response in the part deviations
(R. Spence and R. S. Soin, *Tolerance Design of Electronic Circuits*,
Addison-Wesley, 1988, ch. 5, from memory):

``g_t(f) = g_0(f) + sum_i S_i(f) * ln(x_ti / x_i0)``

with ``g`` the gain in dB, ``S_i(f) = d g(f) / d ln x_i`` (dB per neper of
part value) by central differences of the circuit's poles and zeros
(:func:`service.realization.analysis.design_roots`, the verifier's own
engine), at the *critical frequencies* of the nominal design: every segment's
ends and the extremes of the nominal gain inside it (on a dense grid).  A
trial's segment margins are then read as the verifier reads them (loss from
the largest passband gain; passband ``limit - loss``, stopband ``loss -
limit``), restricted to those frequencies.  Moving extremes shift the worst
value only to second order, which is why a few points per extreme suffice.

The trials are *common random numbers* (:class:`Deviates`): one draw of the
Monte Carlo generator (:func:`service.tolerance.sampling.draw`, the sequence
``/v1/tolerance`` uses) split into each part's deviate in units of its
tolerance and its temperature drift per ppm/degC, so any assignment of
tolerances and temperature coefficients replays the same boards.

Only the verifier decides whether a board meets the requirement; this model
only ranks candidate assignments (:mod:`service.tolerance.assignment`).
Group-delay limits are not modelled (the verifier checks them).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.realization.analysis import StagePlan, design_roots
from service.response.criteria import NEPER_DB, TWO_PI, Band, Criteria
from service.tolerance.sampling import VariedPart, draw

#: Relative step of the central differences of the sensitivities.
REL_STEP = 1e-4
#: Points per decade of the dense nominal grid the extremes are found on (and at least this many per segment).
DENSE_PER_DECADE = 400
DENSE_MIN_POINTS = 400
#: An open stopband is searched up to this multiple of the largest root magnitude.
OPEN_END_FACTOR = 1e4
#: Neighbours on each side of a nominal extreme kept as critical frequencies (dense-grid steps).
NEIGHBOURS = 1
#: Probe tolerance and temperature coefficient of the split draw (see :func:`deviates`).
_PROBE_TOLERANCE = 0.1
_PROBE_TEMPCO_PPM = 1.0


@dataclass(frozen=True)
class Deviates:
    """The random part of ``T`` Monte Carlo boards, separated by source.

    A passive part ``i`` with tolerance ``t`` and temperature coefficient
    bound ``c`` (ppm/degC) has the value ``x0 (1 + t u_i) (1 + c 1e-6 w_i)``
    on each board: exactly the value :func:`service.tolerance.sampling.draw`
    gives it for that tolerance, coefficient and seed.

    Attributes
    ----------
    unit : ndarray, shape (T, P)
        Deviate of each passive part in units of its tolerance (uniform on
        [-1, 1] or a truncated normal with sigma 1/3).
    drift : ndarray, shape (T, P)
        Temperature drift per ppm/degC of coefficient bound (degC; zero without
        a temperature range).
    fixed : dict of str to ndarray (T,)
        Values of the varied parts that no assignment changes (op-amp GBW, Hz).
    fixed_log : ndarray, shape (T, Q)
        ``ln(x_t / x_0)`` of those parts, in the order of ``fixed``.
    temperature_c : ndarray (T,) or None
    """

    unit: np.ndarray
    drift: np.ndarray
    fixed: dict[str, np.ndarray]
    fixed_log: np.ndarray
    temperature_c: np.ndarray | None

    @property
    def trials(self) -> int:
        return int(self.unit.shape[0])


def deviates(parts: list[VariedPart], trials: int, seed: int, temperature: tuple[float, float] | None) -> Deviates:
    """Split the draw of ``seed`` into per-part deviates and drifts (see :class:`Deviates`).

    Two draws of the same seed with a probe tolerance and coefficient, one with
    the tolerance set to 0, give the deviate and the drift of every part; the
    random sequence does not depend on tolerances or coefficients.

    Parameters
    ----------
    parts : list of VariedPart
        In draw order; op-amp parts (``kind == "opamp"``) go to ``fixed``.
    """
    passive = [p for p in parts if p.kind != "opamp"]
    probe = [VariedPart(p.ref, p.kind, p.key, p.stage, p.role, 1.0, _PROBE_TOLERANCE, p.distribution, p.dielectric,
                        _PROBE_TEMPCO_PPM) for p in passive]
    rest = [p for p in parts if p.kind == "opamp"]
    with_tol = draw(probe + rest, trials, seed, temperature)
    no_tol = draw([VariedPart(p.ref, p.kind, p.key, p.stage, p.role, 1.0, 0.0, p.distribution, p.dielectric,
                              _PROBE_TEMPCO_PPM) for p in passive] + rest, trials, seed, temperature)
    t = int(trials)
    unit = np.empty((t, len(passive)))
    drift = np.empty((t, len(passive)))
    for i, p in enumerate(passive):
        base = no_tol.values[p.key]
        unit[:, i] = (with_tol.values[p.key] / base - 1.0) / _PROBE_TOLERANCE
        drift[:, i] = (base - 1.0) / (_PROBE_TEMPCO_PPM * 1e-6)
    fixed = {p.key: with_tol.values[p.key] for p in rest}
    fixed_log = np.column_stack([np.log(fixed[p.key] / p.nominal) for p in rest]) if rest else np.zeros((t, 0))
    return Deviates(unit, drift, fixed, fixed_log, with_tol.temperature_c)


def log_deviations(dev: Deviates, tolerance: np.ndarray, tempco_ppm: np.ndarray) -> np.ndarray:
    """``ln(x_t / x_0)`` of every passive part on every board, shape (T, P), for the given tolerances and
    temperature-coefficient bounds (arrays of shape (P,) or (N, 1, P) for N assignments at once)."""
    return np.log1p(tolerance * dev.unit) + np.log1p(tempco_ppm * 1e-6 * dev.drift)


def board_values(parts: list[VariedPart], dev: Deviates, tolerance: np.ndarray, tempco_ppm: np.ndarray
                 ) -> dict[str, np.ndarray]:
    """Circuit values of every board (``{key: (T,)}``) for one assignment; ``parts`` as given to
    :func:`deviates` (passive ones in the order of the columns)."""
    passive = [p for p in parts if p.kind != "opamp"]
    out = {p.key: p.nominal * (1.0 + tolerance[i] * dev.unit[:, i]) * (1.0 + tempco_ppm[i] * 1e-6 * dev.drift[:, i])
           for i, p in enumerate(passive)}
    out.update(dev.fixed)
    return out


@dataclass(frozen=True)
class LinearModel:
    """The first-order model of a design's gain at its critical frequencies (see the module notes).

    Attributes
    ----------
    frequency_hz : ndarray (K,)
        Critical frequencies (Hz); ``inf`` is not used (an open stopband is searched to a finite end).
    segment : ndarray of int (K,)
        Criteria segment of each frequency.
    gain_db : ndarray (K,)
        Nominal gain (dB).
    sensitivity_db : ndarray (P, K)
        ``d g / d ln x`` of every passive part (dB per neper), columns as ``frequency_hz``.
    fixed_sensitivity_db : ndarray (Q, K)
        The same for the varied parts no assignment changes (op-amp GBW).
    criteria : Criteria
    """

    frequency_hz: np.ndarray
    segment: np.ndarray
    gain_db: np.ndarray
    sensitivity_db: np.ndarray
    fixed_sensitivity_db: np.ndarray
    criteria: Criteria

    def base_gains(self, dev: Deviates) -> np.ndarray:
        """Nominal gain plus the fixed parts' change on every board (dB), shape (T, K)."""
        return self.gain_db + dev.fixed_log @ self.fixed_sensitivity_db

    def gains(self, logdev: np.ndarray, base_db: np.ndarray) -> np.ndarray:
        """Predicted gains (dB), shape (..., T, K), of log deviations (..., T, P) on top of ``base_db``."""
        return base_db + logdev @ self.sensitivity_db

    def _slices(self) -> list[slice]:
        """Each segment's columns (the critical frequencies are stored segment by segment)."""
        cached = self.__dict__.get("_segment_slices")
        if cached is None:
            cached = []
            for s in range(len(self.criteria.limits)):
                idx = np.flatnonzero(self.segment == s)
                if idx.size and np.any(np.diff(idx) != 1):
                    raise ValueError("critical frequencies must be stored segment by segment")
                cached.append(slice(int(idx[0]), int(idx[-1]) + 1) if idx.size else slice(0, 0))
            object.__setattr__(self, "_segment_slices", cached)
        return cached

    def margins(self, gains_db: np.ndarray, axis: int = -1) -> np.ndarray:
        """Segment margins (dB) of predicted gains, read like the verifier (loss from the largest passband gain;
        passband ``limit - loss``, stopband ``loss - limit``).

        ``gains_db`` has the critical frequencies on ``axis``: (..., T, K) gives (..., T, S); with ``axis=0``,
        (K, ...) gives (S, ...) (faster for many boards: the reductions run over the leading axis).
        """
        limits = self.criteria.limits
        slices = self._slices()
        g = gains_db if axis == 0 else np.moveaxis(gains_db, axis, 0)
        out = np.empty((len(limits),) + g.shape[1:])
        if self.criteria.reference_gain_db is not None:
            ref = np.full(g.shape[1:], self.criteria.reference_gain_db)
        else:
            pb = [sl for sl, lim in zip(slices, limits) if lim.band is Band.PASSBAND and sl.stop > sl.start]
            ref = None
            for sl in (pb or [sl for sl in slices if sl.stop > sl.start]):
                m = g[sl].max(axis=0)
                ref = m if ref is None else np.maximum(ref, m)
        for s, (lim, sl) in enumerate(zip(limits, slices)):
            if sl.stop <= sl.start:
                out[s] = np.inf
            elif lim.band is Band.PASSBAND:
                out[s] = lim.limit_db - ref + g[sl].min(axis=0)
            else:
                out[s] = ref - g[sl].max(axis=0) - lim.limit_db
        return out if axis == 0 else np.moveaxis(out, 0, -1)

    def worst_frequency_hz(self, gains_db: np.ndarray, s: int) -> np.ndarray:
        """Per board, the critical frequency (Hz) where segment ``s`` is worst; ``gains_db`` (K, T)."""
        sl = self._slices()[s]
        g = gains_db[sl]
        pick = g.argmin(axis=0) if self.criteria.limits[s].band is Band.PASSBAND else g.argmax(axis=0)
        return self.frequency_hz[sl][pick]


def critical_frequencies(nominal, criteria: Criteria, ended_hz: dict[int, float] | None = None
                         ) -> tuple[np.ndarray, np.ndarray]:
    """Ends and nominal extremes of every segment (Hz), with their segment index.

    Parameters
    ----------
    nominal : RootSet
        The nominal design (one trial).
    criteria : Criteria
    ended_hz : dict, optional
        Segment index -> where the nominal's verdict ended an open passband (Hz); the segment is read
        up to there.
    """
    roots = np.concatenate([nominal.zeros[0], nominal.poles[0]])
    mags = np.abs(roots[np.isfinite(roots)])
    top = float(mags.max()) / TWO_PI if mags.size else 1.0
    low_floor = (float(mags[mags > 0].min()) / TWO_PI if (mags > 0).any() else 1.0) * 1e-3
    freqs, segs = [], []
    for s, lim in enumerate(criteria.limits):
        lo = lim.start_hz
        hi = lim.stop_hz if math.isfinite(lim.stop_hz) else max(top * OPEN_END_FACTOR, 10.0 * lo)
        if ended_hz and s in ended_hz:
            hi = min(hi, ended_hz[s])
        start = lo if lo > 0 else min(low_floor, hi * 1e-3)
        n = max(DENSE_MIN_POINTS, int(DENSE_PER_DECADE * math.log10(hi / start)) + 1)
        grid = np.geomspace(start, hi, n)
        if lo == 0:
            grid = np.concatenate([[0.0], grid])
        g = nominal.log_magnitude(TWO_PI * grid)[0]
        keep = {0, grid.size - 1}
        d = np.diff(g)
        turns = np.flatnonzero(np.sign(d[1:]) != np.sign(d[:-1])) + 1
        if lim.band is Band.STOPBAND:          # only a stopband's peaks can hold its worst margin
            turns = turns[d[turns - 1] > 0]
        for k in turns:
            keep.update(range(max(0, k - NEIGHBOURS), min(grid.size, k + NEIGHBOURS + 1)))
        if lim.band is Band.PASSBAND or criteria.reference_gain_db is None:
            k = int(np.argmax(g))
            keep.update(range(max(0, k - NEIGHBOURS), min(grid.size, k + NEIGHBOURS + 1)))
        if lim.band is Band.PASSBAND:
            k = int(np.argmin(g))
            keep.update(range(max(0, k - NEIGHBOURS), min(grid.size, k + NEIGHBOURS + 1)))
        idx = np.array(sorted(keep))
        freqs.append(grid[idx])
        segs.append(np.full(idx.size, s))
    return np.concatenate(freqs), np.concatenate(segs)


def linear_model(plans: list[StagePlan], parts: list[VariedPart], criteria: Criteria, *,
                 ended_hz: dict[int, float] | None = None) -> LinearModel:
    """The first-order model of ``plans`` at its critical frequencies (see the module notes).

    Parameters
    ----------
    plans : list of StagePlan
    parts : list of VariedPart
        The varied parts (:func:`service.tolerance.sampling.varied_parts`): passive ones are the columns of
        ``sensitivity_db``, op-amps those of ``fixed_sensitivity_db``.
    criteria : Criteria
    ended_hz : dict, optional
        See :func:`critical_frequencies`.
    """
    nominal = design_roots(plans)
    f, seg = critical_frequencies(nominal, criteria, ended_hz)
    w = TWO_PI * f
    g0 = nominal.log_magnitude(w)[0] * NEPER_DB
    ordered = [p for p in parts if p.kind != "opamp"] + [p for p in parts if p.kind == "opamp"]
    n = len(ordered)
    if n:
        values = {}
        for i, p in enumerate(ordered):
            col = np.full(2 * n, p.nominal)
            col[2 * i] *= 1.0 + REL_STEP
            col[2 * i + 1] *= 1.0 - REL_STEP
            values[p.key] = col
        g = design_roots(plans, values).log_magnitude(w) * NEPER_DB
        sens = (g[0::2] - g[1::2]) / (math.log1p(REL_STEP) - math.log1p(-REL_STEP))
    else:
        sens = np.zeros((0, f.size))
    p_passive = sum(1 for p in parts if p.kind != "opamp")
    return LinearModel(f, seg, g0, sens[:p_passive], sens[p_passive:], criteria)


def sampled_margins(plans: list[StagePlan], values: dict[str, np.ndarray], model: LinearModel,
                    points_per_segment: int = 600) -> np.ndarray:
    """Segment margins (dB), shape (T, S), of the boards ``values`` from their exact gains on a dense grid.

    A check of the linear model with every board's own poles and zeros; being sampled it can only
    overstate a margin (by the gain between grid points).
    """
    roots = design_roots(plans, values)
    grids, segs = [], []
    for s in range(len(model.criteria.limits)):
        f = model.frequency_hz[model.segment == s]
        lo, hi = float(f.min()), float(f.max())
        grid = np.geomspace(max(lo, hi * 1e-6), hi, points_per_segment)
        grid = np.unique(np.concatenate([grid, f]))
        grids.append(grid)
        segs.append(np.full(grid.size, s))
    grid, seg = np.concatenate(grids), np.concatenate(segs)
    g = roots.log_magnitude(TWO_PI * grid) * NEPER_DB
    dense = LinearModel(grid, seg, np.zeros(grid.size), np.zeros((0, grid.size)), np.zeros((0, grid.size)),
                        model.criteria)
    m = dense.margins(g)
    m[roots.unstable()] = -np.inf
    return m


__all__ = ["Deviates", "deviates", "log_deviations", "board_values", "LinearModel", "linear_model",
           "critical_frequencies", "sampled_margins", "REL_STEP"]
