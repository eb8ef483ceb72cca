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
"""

from __future__ import annotations

import numpy as np

from .blocks import decompose
from .errors import CircuitError
from .mna import MnaSystem, build_mna
from .netlist import Circuit
from .staged import (_Evaluator, bytes_per_trial, coefficient_bytes_per_trial, evaluate_chunk, max_terms,
                     plan_blocks, stage_representations)

MAX_STAGE_UNKNOWNS = 10
"""Largest stage (unknowns) that ``method="auto"`` solves through polynomial coefficients."""

STAGED_CHUNK_BYTES = 4 * 2**20
"""Working-set target of one staged evaluation chunk (small chunks stay in cache); never above the caller's limit."""

GEMM_CHUNK_SIZE = 400_000
"""Bound on rows x columns x inner size of one coefficient-times-Vandermonde product.

Measured on 2 cores: OpenBLAS runs larger products multithreaded, and with
the other core busy those run 5-40x slower than single-threaded ones; a
product below this size stays on one thread and in cache.
"""

METHODS = ("auto", "full", "staged")


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


def _full(system: MnaSystem, col: int, omega: np.ndarray, limit: int) -> np.ndarray:
    n, t, nf = system.size, system.trials, omega.size
    out = np.empty((t, nf), dtype=complex)
    per_pair = 16 * (3 * n * n + 4 * n)
    fchunk = max(1, min(nf, limit // max(1, per_pair)))
    tchunk = max(1, limit // max(1, per_pair * nf)) if fchunk == nf else 1
    b = np.zeros(n, dtype=complex)
    b[system.rhs_row] = 1.0
    s = 1j * omega
    for t0 in range(0, t, tchunk):
        sl = slice(t0, min(t, t0 + tchunk))
        g, c = system.stamp(sl)
        for f0 in range(0, nf, fchunk):
            fs = slice(f0, min(nf, f0 + fchunk))
            m = g[:, None, :, :] + s[fs][None, :, None, None] * c[:, None, :, :]
            rhs = np.broadcast_to(b, m.shape[:-1])[..., None]
            try:
                x = np.linalg.solve(m, rhs)
            except np.linalg.LinAlgError as exc:
                raise CircuitError("the circuit is singular at an analysis frequency "
                                   "(e.g. an inductor loop at DC or a node isolated by capacitors at 0 Hz)") from exc
            out[sl, fs] = x[..., col, 0]
    return out


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
        Transfer function in V/V for every trial and frequency.

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
    omega = 2.0 * np.pi * f
    blocks = decompose(system, col)
    if method == "auto":
        method = "staged" if max(len(b.cols) for b in blocks) <= MAX_STAGE_UNKNOWNS else "full"
    if method == "full":
        return _full(system, col, omega, int(memory_limit_bytes))
    w_ref = reference_omega(f)
    plans = plan_blocks(system, blocks)
    t = system.trials
    limit = int(memory_limit_bytes)
    coef_chunk = max(1, min(t, limit // max(1, coefficient_bytes_per_trial(plans))))
    reps = stage_representations(system, plans, w_ref, coef_chunk)
    per = bytes_per_trial(reps, f.size)
    tchunk = max(1, min(min(limit, STAGED_CHUNK_BYTES) // per, GEMM_CHUNK_SIZE // (2 * f.size * max_terms(reps))))
    ev = _Evaluator(omega, w_ref)
    out = np.empty((t, f.size), dtype=complex)
    for t0 in range(0, t, tchunk):
        sl = slice(t0, min(t, t0 + tchunk))
        evaluate_chunk(reps, col, ev, sl, out[sl])
    return out
