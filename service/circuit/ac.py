"""AC analysis: transfer function from the input source to a node.

Two methods give the same numbers:

``"full"``
    One batched ``numpy.linalg.solve`` of the whole MNA system
    ``(G + j*w*C) x = b`` for every (trial, frequency) pair (Ho, Ruehli and
    Brennan, IEEE Trans. CAS-22(6), 1975).
``"staged"``
    The system is split into its block-triangular stages
    (:mod:`.blocks`); each stage's transfer function is recovered as
    polynomial coefficients per trial (:mod:`.staged`) and cascaded stages
    multiply.

``"auto"`` takes ``"staged"`` unless a stage is too large for accurate
polynomial interpolation (more than :data:`MAX_STAGE_UNKNOWNS` unknowns, e.g.
a long passive ladder), then ``"full"``.  Both are chunked over trials so
that their working memory stays under ``memory_limit_bytes``.

:func:`prepare_ac` does the structural work and (staged) the per-trial
coefficients once; :meth:`PreparedAc.response` evaluates any range of trials
on the grid.  :func:`ac_response` is the two in one call.  Neither method's
numbers for a trial depend on the other trials: the staged evaluation is
element by element (:mod:`.polyeval`), the full solve one LU factorization
per (trial, frequency).
"""

from __future__ import annotations

import copy
from dataclasses import dataclass

import numpy as np

from service.deadline import check as check_deadline

from .blocks import decompose
from .errors import CircuitError
from .mna import MnaSystem, build_mna
from .netlist import Circuit
from .polyeval import GridEvaluator, unit_phasors
from .staged import (bytes_per_trial, coefficient_bytes_per_trial, evaluate_chunk, evaluate_chunk_polar,
                     is_single_rational, plan_blocks, stage_representations)

MAX_STAGE_UNKNOWNS = 10
"""Largest stage (unknowns) that ``method="auto"`` solves through polynomial coefficients."""

STAGED_CHUNK_BYTES = 4 * 2**20
"""Working-set target of one staged evaluation chunk (small chunks stay in cache); never above the caller's limit."""

MIN_CHUNK_TRIALS = 64
"""Fewest trials per staged chunk while the caller's memory limit allows: a long cascade evaluated stage by
stage (beyond the merge degree) needs more than the cache-sized target per trial, and one-trial chunks
would spend the time in per-stage Python overhead (20-stage cascades measured 40x slower)."""

METHODS = ("auto", "full", "staged")

COEFFICIENT_CHUNK_TRIALS = 2048
"""Most trials whose stage coefficients are computed at once: the interpolation pencils of a chunk stay in
cache (10,000 trials of an 8th-order cascade: 50-59 ms at once, 23-27 ms in chunks of 1,024-4,096, measured
here); the coefficients of a trial never depend on the chunking."""

SMALL_COEFFICIENT_CHUNK_TRIALS = 16384
"""The same when every block is small (exact polynomial arithmetic, :data:`.staged.SMALL_BLOCK`): rows of
coefficients, no pencils; 10,000 trials of the reference cascade: 9-11 ms at once against 13-17 ms in chunks
of 1,024-2,048, measured here."""

DELAY_STEP = 1e-5
"""Relative frequency step of the group delay's central difference where no closed form is at hand."""


@dataclass
class PolarResponse:
    """The response of a range of trials on the grid in polar form; each array (Tc, F).

    Attributes
    ----------
    power : ndarray, float64
        ``|H|^2`` (V/V squared).
    phase_rad : ndarray or None
        Principal value of ``arg H`` (rad, in (-pi, pi]), or of ``arg(H conj r)`` relative to the
        evaluation's reference phasors ``r``, when asked for; float32 or float64.
    delay_s : ndarray or None
        Group delay ``-d arg H / d omega`` (s), when asked for; float32 or float64.
    """

    power: np.ndarray
    phase_rad: np.ndarray | None = None
    delay_s: np.ndarray | None = None


def _check_frequency(frequency_hz) -> np.ndarray:
    f = np.asarray(frequency_hz, dtype=float)
    if f.ndim != 1 or f.size == 0:
        raise CircuitError(f"frequency_hz must be a non-empty 1-D array, got shape {f.shape}", field="frequency_hz")
    if not np.all(np.isfinite(f)) or np.any(f < 0):
        raise CircuitError("frequency_hz must be finite and non-negative (Hz)", field="frequency_hz")
    return f


def reference_omega(f: np.ndarray) -> float:
    """Scaling frequency (rad/s) of the polynomial variable: geometric centre of the positive band."""
    pos = f[f > 0]
    if pos.size == 0:
        return 2.0 * np.pi
    return float(2.0 * np.pi * np.sqrt(pos.min() * pos.max()))


def output_column(system: MnaSystem, output: str) -> int:
    if output not in system.node_index:
        raise CircuitError(f"output node {output!r} is not a node of the circuit", field="output")
    return system.node_index[output]


def _full(system: MnaSystem, col: int, omega: np.ndarray, limit: int, trials: slice,
          out: np.ndarray) -> np.ndarray:
    n, nf = system.size, omega.size
    t_first, t_stop, _ = trials.indices(system.trials)
    per_pair = 16 * (3 * n * n + 4 * n)
    fchunk = max(1, min(nf, limit // max(1, per_pair)))
    tchunk = max(1, limit // max(1, per_pair * nf)) if fchunk == nf else 1
    b = np.zeros(n, dtype=complex)
    b[system.rhs_row] = 1.0
    s = 1j * omega
    for t0 in range(t_first, t_stop, tchunk):
        sl = slice(t0, min(t_stop, t0 + tchunk))
        g, c = system.stamp(sl)
        for f0 in range(0, nf, fchunk):
            check_deadline("circuit.ac.full")
            fs = slice(f0, min(nf, f0 + fchunk))
            m = g[:, None, :, :] + s[fs][None, :, None, None] * c[:, None, :, :]
            rhs = np.broadcast_to(b, m.shape[:-1])[..., None]
            try:
                x = np.linalg.solve(m, rhs)
            except np.linalg.LinAlgError as exc:
                raise CircuitError("the circuit is singular at an analysis frequency "
                                   "(e.g. an inductor loop at DC or a node isolated by capacitors at 0 Hz)") from exc
            out[sl.start - t_first: sl.stop - t_first, fs] = x[..., col, 0]
    return out


class PreparedAc:
    """A circuit's transfer function to one node, prepared for evaluation on a fixed frequency grid.

    Made by :func:`prepare_ac`.  With the staged method the per-trial
    polynomial coefficients of every stage are computed once, here; each
    :meth:`response` call then only evaluates them on the grid.  Each
    trial's numbers depend only on its own part values and on the grid:
    ``response(slice(a, b))`` is bit for bit ``response()[a:b]`` for every
    split of the trials.

    Attributes
    ----------
    trials : int
        Number of trials ``T`` of the circuit.
    frequency_hz : ndarray, shape (F,)
        The analysis grid, Hz.
    method : str
        ``"staged"`` or ``"full"`` (after resolving ``"auto"``).
    """

    def __init__(self, system: MnaSystem, col: int, f: np.ndarray, method: str, limit: int, blocks=None):
        self.trials = system.trials
        self.frequency_hz = f
        self.method = method
        self._system, self._col, self._limit = system, col, limit
        self._omega = 2.0 * np.pi * f
        if method == "staged":
            blocks = decompose(system, col) if blocks is None else blocks
            w_ref = reference_omega(f)
            self._w_ref = w_ref
            plans = plan_blocks(system, blocks)
            most = SMALL_COEFFICIENT_CHUNK_TRIALS if all(p.small for p in plans) else COEFFICIENT_CHUNK_TRIALS
            coef_chunk = max(1, min(self.trials, most,
                                    limit // max(1, coefficient_bytes_per_trial(plans))))
            self._reps = stage_representations(system, plans, w_ref, coef_chunk)
            self._ev = GridEvaluator(self._omega, w_ref)
            per = bytes_per_trial(self._reps, f.size)
            self._tchunk = max(1, min(limit // per, max(min(limit, STAGED_CHUNK_BYTES) // per, MIN_CHUNK_TRIALS)))
            # a single rational at the output is evaluated in cache-sized blocks by the evaluator itself
            self._chunked = not is_single_rational(self._reps, col)

    def on_grid(self, frequency_hz: np.ndarray) -> "PreparedAc":
        """The same prepared circuit on another frequency grid, reusing the per-trial coefficients.

        For refining a metric between grid points: the staged coefficients (the
        costly part) were computed once, scaled by this grid's reference
        frequency; only their evaluation is new. The full method solves again.

        Parameters
        ----------
        frequency_hz : array_like of float, shape (F',)
            Hz, finite and >= 0.

        Returns
        -------
        PreparedAc
        """
        f = _check_frequency(frequency_hz)
        if self.method != "staged":
            return PreparedAc(self._system, self._col, f, self.method, self._limit)
        other = copy.copy(self)
        other.frequency_hz = f
        other._omega = 2.0 * np.pi * f
        other._ev = GridEvaluator(other._omega, self._w_ref)
        per = bytes_per_trial(self._reps, f.size)
        other._tchunk = max(1, min(self._limit // per,
                                   max(min(self._limit, STAGED_CHUNK_BYTES) // per, MIN_CHUNK_TRIALS)))
        return other

    def response(self, trials: slice | None = None, out: np.ndarray | None = None) -> np.ndarray:
        """Complex ``V(output)/V(input)`` of the trials in ``trials`` (default all).

        Parameters
        ----------
        trials : slice, optional
            Trials to evaluate (step 1).
        out : ndarray, complex128, shape (Tc, F), optional
            Where to write the result.

        Returns
        -------
        ndarray, complex128, shape (Tc, F)
        """
        sl = slice(None) if trials is None else trials
        t0, t1, step = sl.indices(self.trials)
        if step != 1:
            raise CircuitError("trials must be a slice with step 1", field="trials")
        t1 = max(t0, t1)
        if out is None:
            out = np.empty((t1 - t0, self.frequency_hz.size), dtype=complex)
        if self.method == "full":
            return _full(self._system, self._col, self._omega, self._limit, slice(t0, t1), out)
        step = self._tchunk if self._chunked else max(1, t1 - t0)
        for a in range(t0, t1, step):
            check_deadline("circuit.ac.staged")
            b = min(t1, a + step)
            evaluate_chunk(self._reps, self._col, self._ev, slice(a, b), out[a - t0: b - t0])
        return out


    def polar(self, trials: slice | None = None, *, phase: bool = False, delay: bool = False,
              phase_reference: np.ndarray | None = None, out: PolarResponse | None = None) -> PolarResponse:
        """``|H|^2`` and (optionally) the principal phase and the group delay of the trials in ``trials``.

        The staged method with the output one rational function per trial (a cascade: the usual case)
        computes them from the polynomials and their derivatives without forming ``H``, the delay in
        closed form (:meth:`.polyeval.GridEvaluator.ratio_polar`).  Otherwise they come from
        :meth:`response`, and the delay from the central difference of the phase,
        ``-arg(H(f(1+d)) conj H(f(1-d))) / (4 pi f d)`` with ``d`` = :data:`DELAY_STEP` (relative error
        about ``d^2/6 |f^2 tau''/tau|``); at 0 Hz the step is from 0 to ``d`` times the lowest positive
        frequency (the phase is odd in f, so that difference is also second-order accurate).  Each
        trial's numbers depend on its own values and the grid only.

        Parameters
        ----------
        trials : slice, optional
            Trials to evaluate (step 1; default all).
        phase, delay : bool
            Also compute ``phase_rad``, ``delay_s``.
        phase_reference : ndarray (F,) complex, optional
            With ``phase``: the phase is taken relative to these phasors (e.g. the nominal response),
            ``arg(H conj r)`` in (-pi, pi] with ``r`` their unit phasors -- the parts turned before the
            arctangent, no subtraction or wrapping after it.
        out : PolarResponse, optional
            Arrays (Tc, F) to write into -- ``power`` float64; ``phase_rad`` and ``delay_s`` float32
            or float64, computed in their dtype, needed only when asked for.  A caller evaluating
            chunk after chunk reuses its buffers, or hands its float32 stores over directly.

        Returns
        -------
        PolarResponse
            ``out`` when given.
        """
        sl = slice(None) if trials is None else trials
        t0, t1, step = sl.indices(self.trials)
        if step != 1:
            raise CircuitError("trials must be a slice with step 1", field="trials")
        t1 = max(t0, t1)
        shape = (t1 - t0, self.frequency_hz.size)
        if out is None:
            out = PolarResponse(np.empty(shape), np.empty(shape) if phase else None,
                                np.empty(shape) if delay else None)
        wanted = (out.power, out.phase_rad if phase else None, out.delay_s if delay else None)
        if (phase and out.phase_rad is None) or (delay and out.delay_s is None) or any(
                a is not None and a.shape != shape for a in wanted):
            raise CircuitError(f"the output arrays must have shape {shape}", field="out")
        power, ph, d = wanted
        if phase_reference is not None and np.shape(phase_reference) != (self.frequency_hz.size,):
            raise CircuitError(f"phase_reference must have shape ({self.frequency_hz.size},)",
                               field="phase_reference")
        if self.method == "staged" and not self._chunked:
            check_deadline("circuit.ac.staged")
            evaluate_chunk_polar(self._reps, self._col, self._ev, slice(t0, t1), power, ph, d, phase_reference)
            return out
        h = self.response(slice(t0, t1))
        np.multiply(h.real, h.real, out=power)
        power += h.imag ** 2
        if ph is not None:
            if phase_reference is not None:
                cr, sr = unit_phasors(phase_reference)
                ph[...] = np.angle(h * (cr - 1j * sr))
            else:
                ph[...] = np.angle(h)
        if d is not None:
            f = self.frequency_hz
            pos = f[f > 0]
            up = np.where(f > 0, f * (1.0 + DELAY_STEP), DELAY_STEP * (pos.min() if pos.size else 1.0))
            down = f * (1.0 - DELAY_STEP)
            q = np.conjugate(self.on_grid(down).response(slice(t0, t1)))
            q *= self.on_grid(up).response(slice(t0, t1))
            d[...] = np.arctan2(q.imag, q.real) * (-1.0 / (2.0 * np.pi * (up - down)))[None, :]
        return out


def prepare_ac(circuit: Circuit, frequency_hz: np.ndarray, output: str = "out", *,
               memory_limit_bytes: int = 512 * 2**20, method: str = "auto") -> PreparedAc:
    """Prepare the AC analysis of ``circuit`` on a grid; evaluate with :meth:`PreparedAc.response`.

    Parameters are those of :func:`ac_response`; ``memory_limit_bytes``
    bounds the working memory of the preparation and of each evaluation.

    Returns
    -------
    PreparedAc

    Raises
    ------
    CircuitError
        Invalid circuit, output node, frequencies or method; singular circuit.
    """
    if method not in METHODS:
        raise CircuitError(f"method must be one of {', '.join(METHODS)}, got {method!r}", field="method")
    if not isinstance(memory_limit_bytes, (int, np.integer)) or memory_limit_bytes < 2**20:
        raise CircuitError("memory_limit_bytes must be an integer of at least 1 MiB", field="memory_limit_bytes")
    f = _check_frequency(frequency_hz)
    circuit.validate(output)
    system = build_mna(circuit)
    col = output_column(system, output)
    blocks = None
    if method == "auto":
        blocks = decompose(system, col)
        method = "staged" if max(len(b.cols) for b in blocks) <= MAX_STAGE_UNKNOWNS else "full"
    return PreparedAc(system, col, f, method, int(memory_limit_bytes), blocks)


def ac_response(circuit: Circuit, frequency_hz: np.ndarray, output: str = "out", *,
                memory_limit_bytes: int = 512 * 2**20, method: str = "auto") -> np.ndarray:
    """Complex transfer function ``V(output) / V(input source)``.

    Parameters
    ----------
    circuit : Circuit
        The circuit; its values may carry ``T`` trials.
    frequency_hz : ndarray, shape (F,)
        Analysis frequencies, Hz (finite, >= 0).
    output : str
        Output node name.
    memory_limit_bytes : int
        Bound on the working memory of the solve (the returned array of
        ``16*T*F`` bytes is not counted).
    method : {"auto", "full", "staged"}
        See the module notes.

    Returns
    -------
    ndarray, complex128, shape (T, F)
        Transfer function in V/V for every trial and frequency; with the
        staged method each trial's values are independent of the other
        trials of the circuit (bit for bit).

    Raises
    ------
    CircuitError
        Invalid circuit, output node, frequencies or method; singular circuit.
    """
    return prepare_ac(circuit, frequency_hz, output, memory_limit_bytes=memory_limit_bytes,
                      method=method).response()
