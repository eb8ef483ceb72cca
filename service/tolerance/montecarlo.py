"""Monte Carlo sweep: every trial's response through the circuit engine, in chunks.

The circuit with every trial's values is prepared once
(:func:`service.circuit.prepare_ac`: structure and per-trial polynomial
coefficients) for each set of evaluated frequencies, and evaluated a chunk of
trials at a time.  The engine computes each trial element by element, so
trial ``i`` gives the same bits whatever chunk it is evaluated in; results
are reduced per chunk and never depend on the chunking (``chunk_trials``, or
the default of :func:`tile_trials`, bounded by the memory limit).

Magnitude, phase and group delay on the caller's grid are kept per trial as
float32 in frequency-major stores (F_b, T); the percentiles read the order
statistics they need from them by selection, not by sorting
(:func:`service.tolerance.statistics.row_percentiles`).  When the stores of all
frequencies would exceed the store budget the caller's grid is split into
frequency blocks, each swept over all trials again; the per-trial figures are
then read in a first sweep of the metric grid alone.  The split depends on
the request (trials x frequencies) and the fixed store budget only, never on
``memory_limit_bytes``: the engine's numbers depend in the last bits on the
set of frequencies of a call (its scaling frequency).

A trial's phase is the nominal response's unwrapped phase plus the principal
value of ``arg(H / H_nominal)``: exact while the trial stays within +-180
degrees of the nominal at every frequency (always, for part tolerances that
keep the poles and zeros near their nominal places), and free of branch jumps
between trials, so percentiles compare like with like.  The group delay's
phase step ``arg(H(f(1+d)) conj H(f))`` is read as ``Im/Re`` (the arctangent's
series, relative error (Im/Re)^2/3 < 3.4e-5 where ``|Im/Re| < 1e-2``), with
the arctangent itself where the step is larger.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.circuit import Circuit, prepare_ac
from service.deadline import check as check_deadline
from service.tolerance import figures as fig
from service.tolerance.grids import Grids
from service.tolerance.sampling import Samples
from service.tolerance.statistics import row_percentiles

#: Largest default chunk (trials processed at once; speed only, never the numbers).
TILE_TRIALS = 1024
#: Working set of one chunk's complex response: the chunk's arrays stay in cache (measured fastest here).
TILE_BYTES = 3 * 2**20
MIN_TILE_TRIALS = 64
#: Bytes of working memory per trial and evaluated frequency while a chunk is processed (measured, rounded up).
WORK_BYTES_PER_POINT = 64
#: Bytes per trial and caller frequency of the float32 stores (magnitude, phase, delay).
STORE_BYTES_PER_POINT = 12
#: Bound of the stores; above it the caller's grid is split into frequency blocks.
STORE_BUDGET_BYTES = 160 * 2**20


def tile_trials(columns: int) -> int:
    """Default chunk (trials processed at once) for ``columns`` evaluated frequencies: a power of two whose
    complex response (16 bytes a point) fits :data:`TILE_BYTES`, within [MIN_TILE_TRIALS, TILE_TRIALS]."""
    t = TILE_TRIALS
    while t > MIN_TILE_TRIALS and 16 * t * columns > TILE_BYTES:
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
    def __init__(self, trials: int, grids: Grids):
        self.g = grids
        band = grids.response.value in ("bandpass", "bandstop")
        self.ref = np.empty(trials)
        self.f3 = np.empty((trials, 2) if band else trials)
        has_pb = grids.passband_columns is not None
        self.rip = np.empty(trials) if has_pb else None
        self.edge = np.empty((trials, len(grids.edges)))
        self.edge_cols = np.array([e.column for e in grids.edges], dtype=int)

    def add(self, sl: slice, g: np.ndarray) -> None:
        ref = fig.reference_gain(g, self.g)
        self.ref[sl] = ref
        self.f3[sl] = fig.f3db(g, ref, self.g)
        if self.rip is not None:
            self.rip[sl] = fig.ripple(g, self.g)
        if self.edge_cols.size:
            self.edge[sl] = g[:, self.edge_cols]

    def result(self) -> TrialFigures:
        return TrialFigures(self.ref, self.f3, self.rip, self.edge)


class _Engine:
    """The circuit with every trial's values, prepared on one set of frequencies (Hz)."""

    def __init__(self, circuit: Circuit, samples: Samples, columns_hz: np.ndarray, engine_limit: int):
        self.prepared = prepare_ac(circuit.with_values(samples.values), columns_hz, output="out",
                                   memory_limit_bytes=engine_limit)

    def __call__(self, t0: int, t1: int) -> np.ndarray:
        return self.prepared.response(slice(t0, t1))


#: Largest |Im/Re| of a delay phase step read without the arctangent.
SMALL_ANGLE = 1e-2


def _phase_delay(hc: np.ndarray, hs: np.ndarray, f: np.ndarray, fs: np.ndarray, nominal: np.ndarray,
                 phase_nominal: np.ndarray, ph_out: np.ndarray, gd_out: np.ndarray) -> None:
    """Phase (degrees) and group delay (s) of a chunk (Tc, Fb) into float32 ``ph_out``, ``gd_out`` (Tc, Fb);
    see the module notes.  The delay is computed in float64 and rounded once, on the way out."""
    q32 = np.multiply(hc, np.conj(nominal)[None, :], out=np.empty(hc.shape, dtype=np.complex64))
    ph = np.angle(q32)                           # the product in float64, rounded to complex64 on output
    del q32
    ph += phase_nominal.astype(np.float32)[None, :]
    np.multiply(ph, np.float32(180.0 / np.pi), out=ph_out)
    del ph
    q = np.conjugate(hc)
    np.multiply(hs, q, out=q)                    # H(f(1+d)) conj(H(f))
    x, y = q.real, q.imag
    with np.errstate(divide="ignore", invalid="ignore"):
        gd = y / x                               # x = 0 is taken by the arctangent below
    if not (gd.max() <= SMALL_ANGLE and gd.min() >= -SMALL_ANGLE and x.min() > 0):
        big = (np.abs(gd) > SMALL_ANGLE) | (x <= 0) | np.isnan(gd)
        gd[big] = np.arctan2(y[big], x[big])
    np.multiply(gd, (-1.0 / (2.0 * np.pi * (fs - f)))[None, :], out=gd_out, casting="same_kind")


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
    f, fs = grids.frequency_hz, grids.shifted_hz
    nf, nm = f.size, grids.metric_hz.size
    store_budget = STORE_BUDGET_BYTES if store_budget_bytes is None else int(store_budget_bytes)
    fb = max(1, min(nf, store_budget // (STORE_BYTES_PER_POINT * trials)))
    nblocks = math.ceil(nf / fb)
    fb = math.ceil(nf / nblocks)
    single = nblocks == 1
    columns = nm + nf if single else max(nm, 2 * fb)
    tile = tile_trials(columns)
    chunk = tile if chunk_trials is None else max(MIN_TILE_TRIALS, int(chunk_trials))
    chunk = min(chunk, max(MIN_TILE_TRIALS, memory_limit_bytes // 2 // (WORK_BYTES_PER_POINT * columns)))
    engine_limit = max(2**20, memory_limit_bytes // 4)
    figs = _Figures(trials, grids) if figures else None
    out = {k: np.full((7, nf), np.nan) for k in ("mag", "ph", "gd")}
    keys = ("mag", "ph", "gd") if phase else ("mag",)

    nx = grids.extra_hz.size
    if not single and figures:
        engine = _Engine(circuit, samples, grids.evaluation_hz(shifted=False), engine_limit)
        for t0 in range(0, trials, chunk):
            check_deadline("tolerance.montecarlo")
            t1 = min(trials, t0 + chunk)
            h = engine(t0, t1)
            figs.add(slice(t0, t1), fig.gain_db(h)[:, grids.order])
            del h
        del engine
    for b in range(nblocks):
        c0, c1 = b * fb, min(nf, (b + 1) * fb)
        w = c1 - c0
        if single:
            cols = grids.evaluation_hz(shifted=True)
        else:
            cols = np.concatenate([f[c0:c1], fs[c0:c1]])
        engine = _Engine(circuit, samples, cols, engine_limit)
        stores = [np.empty((w, trials), dtype=np.float32) for _ in keys]
        for t0 in range(0, trials, chunk):
            check_deadline("tolerance.montecarlo")
            t1 = min(trials, t0 + chunk)
            sl = slice(t0, t1)
            h = engine(t0, t1)
            if single:
                hc, hs = h[:, :nf], h[:, nf + nx:]
                if figs is not None:
                    g = fig.gain_db(h[:, :nf + nx])
                    figs.add(sl, g[:, grids.order])
                    mag = g[:, :nf]
                else:
                    mag = fig.gain_db(hc)                # element by element: the same bits as above
            else:
                hc, hs = h[:, :w], h[:, w:]
                mag = fig.gain_db(hc)
            stores[0][:, sl] = mag.T
            if phase:
                _phase_delay(hc, hs, f[c0:c1], fs[c0:c1], nominal[c0:c1], phase_nominal_rad[c0:c1],
                             stores[1][:, sl].T, stores[2][:, sl].T)
            del h, hc, hs, mag
        for key, st in zip(keys, stores):
            out[key][:, c0:c1] = row_percentiles(st)
        del stores, engine
    return Sweep(out["mag"], out["ph"], out["gd"], None if figs is None else figs.result(), nblocks, tile)


__all__ = ["monte_carlo", "Sweep", "TrialFigures", "tile_trials", "TILE_TRIALS"]
