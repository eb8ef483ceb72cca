"""Monte Carlo sweep: every trial's response through the circuit engine, in chunks.

The circuit with every trial's values is prepared once
(:func:`service.circuit.prepare_ac`: structure and per-trial polynomial
coefficients) for each set of evaluated frequencies, and evaluated a chunk of
trials at a time (:meth:`service.circuit.PreparedAc.polar`: ``|H|^2``, the
principal phase and the group delay in closed form).  The engine computes each
trial element by element, so trial ``i`` gives the same bits whatever chunk
it is evaluated in; results are reduced per chunk and never depend on the
chunking (``chunk_trials``, or the default of :func:`tile_trials`, bounded by
the memory limit).

Per trial and caller frequency three float32 values are kept: ``log10 |H|^2``,
the phase relative to the nominal response (rad) and the group delay (s).
The stores are frequency-major (F_b, T): one row per frequency, read in
place by the selection (trial-major stores, read a column slab at a time,
measured 10 % slower for a whole run).  The engine and the logarithm write a
chunk's values straight into the stores' columns, seen as a (k, F_b)
view: no copy of the chunk (a transposing copy cost 15-20 ms a run).  Each
reported figure is an increasing function of its stored value -- ``10 x``
dB; ``(x + nominal unwrapped phase) 180/pi`` degrees; the delay itself -- so
the percentiles select the order statistics of the stores
(:func:`service.tolerance.statistics.row_percentiles`, by selection, not
sorting) and map only those: no per-point logarithm in float64, no scaling
pass.  When the stores of all frequencies would exceed the store budget the
caller's grid is split into frequency blocks, each swept over all trials
again; the per-trial figures are then read in a first sweep of the metric
grid alone.  The split depends on the request (trials x frequencies) and the
fixed store budget only, never on ``memory_limit_bytes``: the engine's numbers
depend in the last bits on the set of frequencies of a call (its scaling
frequency).

A trial's phase is the nominal response's unwrapped phase plus the principal
value of ``arg(H conj H_nominal)``: exact while the trial stays within +-180
degrees of the nominal at every frequency (always, for part tolerances that
keep the poles and zeros near their nominal places), and free of branch jumps
between trials, so percentiles compare like with like.  The engine turns each
trial's parts by the nominal's unit phasor in float64 and takes the arctangent
in float32 (the store's precision): the relative phase directly, to about
1e-7 rad, with no subtraction and wrapping pass over the store.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.circuit import Circuit, PolarResponse, prepare_ac
from service.deadline import check as check_deadline
from service.tolerance import figures as fig
from service.tolerance.grids import Grids
from service.tolerance.sampling import Samples
from service.tolerance.statistics import row_percentiles


#: Largest default chunk (trials processed at once; speed only, never the numbers).
TILE_TRIALS = 1024
#: Working set of one chunk's float64 arrays (measured fastest here).
TILE_BYTES = 3 * 2**20
MIN_TILE_TRIALS = 64
#: Bytes of working memory per trial and evaluated frequency while a chunk is processed (measured, rounded up).
WORK_BYTES_PER_POINT = 64
#: Bytes per trial and caller frequency of the float32 stores (magnitude, phase, delay).
STORE_BYTES_PER_POINT = 12
#: Bound of the stores; above it the caller's grid is split into frequency blocks.
STORE_BUDGET_BYTES = 160 * 2**20
#: ``log10`` of the smallest normal float32: below it the store's logarithm is taken in float64 instead.
LOG10_TINY32 = float(np.log10(np.finfo(np.float32).tiny))


def tile_trials(columns: int) -> int:
    """Default chunk (trials processed at once) for ``columns`` evaluated frequencies: a power of two whose
    parts and power (24 bytes a point) fit :data:`TILE_BYTES`, within [MIN_TILE_TRIALS, TILE_TRIALS]."""
    t = TILE_TRIALS
    while t > MIN_TILE_TRIALS and 24 * t * columns > TILE_BYTES:
        t //= 2
    return t


@dataclass
class TrialFigures:
    """Per-trial figures, arrays over all T trials (see :mod:`service.tolerance.figures`)."""

    reference_gain_db: np.ndarray          # (T,)
    f3db_hz: np.ndarray                    # (T,) or (T, 2)
    ripple_db: np.ndarray | None           # (T,)
    edge_gain_db: np.ndarray               # (T, E)


@dataclass
class Sweep:
    """Outcome of the Monte Carlo sweep."""

    magnitude_db: np.ndarray     # (7, F) percentiles
    phase_deg: np.ndarray        # (7, F)
    group_delay_s: np.ndarray    # (7, F)
    figures: TrialFigures | None
    blocks: int
    tile: int


class _Figures:
    """Per-trial figures, gathered chunk by chunk: the reference gain, the half-power brackets and the edge
    gains while a chunk's powers are at hand; the 3 dB interpolation once over all trials at the end (element
    by element: the same bits as chunk by chunk, with fewer, longer numpy calls)."""

    def __init__(self, trials: int, grids: Grids):
        self.g = grids
        band = grids.response.value in ("bandpass", "bandstop")
        shape = (trials, 2) if band else (trials,)
        self.ref = np.empty(trials)
        self.brackets = fig.HalfPowerBrackets(np.empty(shape, dtype=np.intp), np.empty(shape, dtype=np.intp),
                                              np.empty(shape), np.empty(shape), np.empty(shape, dtype=bool))
        has_pb = grids.passband_columns is not None
        self.rip = np.empty(trials) if has_pb else None
        self.edge = np.empty((trials, len(grids.edges)))
        self.edge_cols = np.array([e.column for e in grids.edges], dtype=int)
        # the column of each metric point in the evaluated layout (the caller's grid, then the other points)
        self.layout = np.asarray(grids.order, dtype=np.intp)        # concat(F, extra)[order] == metric
        self.edge_layout = self.layout[self.edge_cols]

    def add(self, sl: slice, p: np.ndarray) -> None:
        """The figures of the trials ``sl`` from their powers ``p`` (Tc, F + X) on the evaluated columns: the
        caller's grid, then the other metric points (:meth:`Grids.evaluation_hz`)."""
        ref = fig.reference_gain(p, self.g, self.layout)
        self.ref[sl] = ref
        got = fig.half_power_brackets(p, ref, self.g, self.layout)
        for name in ("lower", "upper", "p_lower", "p_upper", "found"):
            getattr(self.brackets, name)[sl] = getattr(got, name)
        if self.rip is not None:
            self.rip[sl] = fig.ripple(p, self.g, self.layout)
        if self.edge_cols.size:
            self.edge[sl] = fig.db(p[:, self.edge_layout])

    def result(self) -> TrialFigures:
        return TrialFigures(self.ref, fig.interpolated_f3db(self.brackets, self.ref, self.g), self.rip, self.edge)


class _Pool:
    """Float64 arrays of a chunk, allocated once per sweep and reused chunk after chunk: fresh arrays of this
    size would be mapped and unmapped by the C allocator for every chunk, a page fault per 4 kB page.
    Each view is C-contiguous (numpy's loops run fastest over contiguous rows)."""

    def __init__(self, rows: int, columns: int, count: int = 1):
        self.planes = np.empty((count, rows * columns))

    def take(self, rows: int, columns: int, k: int = 0) -> np.ndarray:
        """Plane ``k`` as a contiguous (rows, columns) array (at most the pool's size)."""
        return self.planes[k, : rows * columns].reshape(rows, columns)


def _log_power(p: np.ndarray, out: np.ndarray) -> None:
    """``log10 p`` into the float32 ``out`` (same shape): in float32 (the store's precision) where ``p`` is a
    normal float32, in float64 with the floor of :data:`service.tolerance.figures.POWER_FLOOR` elsewhere."""
    with np.errstate(all="ignore"):                # out of float32's range: -inf, inf or NaN, redone below
        np.log10(p, out=out, dtype=np.float32)
    if not (out.min() >= LOG10_TINY32 and out.max() < np.inf):          # NaN fails too
        bad = ~((out >= LOG10_TINY32) & (out < np.inf))
        out[bad] = np.log10(np.maximum(p[bad], fig.POWER_FLOOR))


def monte_carlo(circuit: Circuit, samples: Samples, trials: int, grids: Grids, nominal: np.ndarray,
                phase_nominal_rad: np.ndarray, *, memory_limit_bytes: int, chunk_trials: int | None = None,
                store_budget_bytes: int | None = None, phase: bool = True, figures: bool = True) -> Sweep:
    """Sweep every trial; percentiles on the caller's grid and per-trial figures.

    Parameters
    ----------
    circuit : Circuit
        The whole filter at nominal values (input ``VIN`` at ``in``, output ``out``).
    samples : Samples
        Values of all ``trials`` trials.
    grids : Grids
    nominal : ndarray (F,) complex
        Nominal response on the caller's grid.
    phase_nominal_rad : ndarray (F,)
        Its unwrapped phase, rad.
    memory_limit_bytes : int
        Working-memory bound: a quarter for the engine, half for a chunk's arrays.
    store_budget_bytes : int, optional
        Bound of the float32 stores (default :data:`STORE_BUDGET_BYTES`); it
        fixes the frequency blocks, so it is part of the request's identity:
        the same budget gives the same bits.
    chunk_trials : int, optional
        Trials processed at once (at least :data:`MIN_TILE_TRIALS`); None:
        :func:`tile_trials`.  Either is bounded by the memory limit; the
        numbers never depend on it.
    phase : bool
        Compute the phase and group-delay percentiles (else they are NaN).
    figures : bool
        Compute the per-trial figures (else ``Sweep.figures`` is None).  The
        engine evaluates the same frequencies either way, so the percentiles
        are the same bits whatever is asked.

    Returns
    -------
    Sweep
    """
    f = grids.frequency_hz
    nf, nm = f.size, grids.metric_hz.size
    store_budget = STORE_BUDGET_BYTES if store_budget_bytes is None else int(store_budget_bytes)
    fb = max(1, min(nf, store_budget // (STORE_BYTES_PER_POINT * trials)))
    nblocks = math.ceil(nf / fb)
    fb = math.ceil(nf / nblocks)
    single = nblocks == 1
    columns = nm if single else max(nm, fb)
    tile = tile_trials(columns)
    chunk = tile if chunk_trials is None else max(MIN_TILE_TRIALS, int(chunk_trials))
    chunk = min(chunk, max(MIN_TILE_TRIALS, memory_limit_bytes // 2 // (WORK_BYTES_PER_POINT * columns)))
    engine_limit = max(2**20, memory_limit_bytes // 4)
    figs = _Figures(trials, grids) if figures else None
    out = {k: np.full((7, nf), np.nan) for k in ("mag", "ph", "gd")}
    keys = ("mag", "ph", "gd") if phase else ("mag",)
    with_values = circuit.with_values(samples.values)
    metric_eval = grids.evaluation_hz()           # the caller's grid, then the other metric points

    if not single and figures:
        engine = prepare_ac(with_values, metric_eval, output="out", memory_limit_bytes=engine_limit)
        pool = _Pool(chunk, nm)
        for t0 in range(0, trials, chunk):
            check_deadline("tolerance.montecarlo")
            t1 = min(trials, t0 + chunk)
            r = engine.polar(slice(t0, t1), out=PolarResponse(pool.take(t1 - t0, nm)))
            figs.add(slice(t0, t1), r.power)
        del engine, pool
    nx = grids.extra_hz.size
    both = single and figs is not None                          # the caller's grid and the extra points together
    pool = _Pool(chunk, fb + nx if both else fb)
    for b in range(nblocks):
        c0, c1 = b * fb, min(nf, (b + 1) * fb)
        w = c1 - c0
        # one preparation (coefficients and scaling frequency) for every column a call evaluates: the caller's
        # block and the extra metric points are two grids of the same prepared circuit, the bits of one call
        full = prepare_ac(with_values, metric_eval if single else f[c0:c1], output="out",
                          memory_limit_bytes=engine_limit)
        engine = full.on_grid(f[c0:c1]) if single else full
        extra = full.on_grid(grids.extra_hz) if both else None
        stores = [np.empty((w, trials), dtype=np.float32) for _ in keys]      # frequency-major: rows selected
        reference = nominal[c0:c1] if phase else None                 # one array: its unit phasors computed once
        for t0 in range(0, trials, chunk):
            check_deadline("tolerance.montecarlo")
            t1 = min(trials, t0 + chunk)
            sl, k = slice(t0, t1), t1 - t0
            power = pool.take(k, w + nx if both else w)             # (k, F + X): figures; (k, F): the store
            rows = [st[:, sl].T for st in stores]                   # (k, F) views of the stores' columns
            r = engine.polar(sl, phase=phase, delay=phase, phase_reference=reference,
                             out=PolarResponse(power[:, :w], *rows[1:]))
            if both:
                extra.polar(sl, out=PolarResponse(power[:, w:]))
                figs.add(sl, power)
            _log_power(r.power, rows[0])
            del r, rows
        picked = [row_percentiles(st) for st in stores]
        del stores, engine, full, extra
        out["mag"][:, c0:c1] = 10.0 * picked[0]
        if phase:
            out["ph"][:, c0:c1] = (picked[1] + phase_nominal_rad[None, c0:c1]) * (180.0 / np.pi)
            out["gd"][:, c0:c1] = picked[2]
    return Sweep(out["mag"], out["ph"], out["gd"], None if figs is None else figs.result(), nblocks, tile)


__all__ = ["monte_carlo", "Sweep", "TrialFigures", "tile_trials", "TILE_TRIALS"]
