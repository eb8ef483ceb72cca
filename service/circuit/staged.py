"""Stage-by-stage AC solution through transfer-function coefficients.

For every block of the block-triangular MNA system (:mod:`.blocks`) the
transfer function from each of its inputs to each needed unknown is a
rational function of ``s`` whose numerator and denominator are determinants
of the block's pencil ``G + s*C`` (Cramer's rule).  Both are polynomials of
degree at most the block size, so they are recovered exactly from their
values at ``P`` points on a circle of radius ``w_ref`` by a discrete Fourier
transform (polynomial interpolation at roots of unity; see Vlach and
Singhal, *Computer Methods for Circuit Analysis and Design*, 2nd ed., 1994,
ch. 9, "Symbolic analysis by polynomial interpolation" and Singhal and Vlach,
"Interpolation using the fast Fourier transform", Proc. IEEE 60(12), 1972).
The variable is scaled, ``sigma = s / w_ref``, for conditioning.

Coefficients cost a few tiny determinants per trial; the response on
``(T, F)`` is then two real products per polynomial (its even and odd parts
times a table of the grid's powers, in fixed-shape tiles) and one division
per point (:mod:`.polyeval`), so a trial's response does not depend on the
batch it is computed in.  Stages in cascade are merged into one numerator
and denominator by multiplying their coefficient rows per trial.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.deadline import check as check_deadline

from .blocks import RHS, Block, degree_bounds
from .errors import CircuitError
from .mna import MnaSystem, _nonzero
from .polyeval import GridEvaluator, multiply, quotient

THETA = 0.3183098861837907
"""Rotation (rad) of the interpolation points off the real axis, so that a real pole never lands on one."""

MAX_MERGE_DEGREE = 24
"""Largest degree of a merged cascade numerator or denominator before switching to per-stage evaluation."""


@dataclass
class _Rational:
    num: np.ndarray  # (Tc, dn+1) ascending powers of sigma, real
    den: np.ndarray  # (Tc, dd+1)


def _patterns(system: MnaSystem) -> tuple[np.ndarray, np.ndarray]:
    g = np.zeros((system.size, system.size), dtype=bool)
    c = np.zeros_like(g)
    for m, r, col, v in system.entries:
        if _nonzero(v):
            (g if m == 0 else c)[r, col] = True
    return g, c


@dataclass
class _BlockPlan:
    block: Block
    ext: list[int]               # external input unknowns (RHS excluded)
    has_rhs: bool
    rhs_pos: int                 # row position of the input source's row inside the block
    inputs: list[int]            # ext + [RHS] if has_rhs; order of the coupling columns
    den_bounds: tuple[int, int]
    num_bounds: dict[tuple[int, int], tuple[int, int]]   # (k, c) -> (lo, hi)
    points: int


def plan_blocks(system: MnaSystem, blocks: list[Block]) -> list[_BlockPlan]:
    """Structural degree bounds and interpolation sizes of each block."""
    gpat, cpat = _patterns(system)
    plans = []
    for b in blocks:
        rows, cols = b.rows, b.cols
        g_bb = gpat[np.ix_(rows, cols)]
        c_bb = cpat[np.ix_(rows, cols)]
        ext = [c for c in b.inputs if c != RHS]
        has_rhs = RHS in b.inputs
        rhs_pos = rows.index(system.rhs_row) if has_rhs else -1
        inputs = ext + ([RHS] if has_rhs else [])
        dlo, dhi = degree_bounds(g_bb, c_bb)
        if dhi < 0:
            raise CircuitError("the circuit is singular: a stage has a structurally zero determinant "
                               f"(unknowns {', '.join(system.unknowns[c] for c in cols)})")
        nb = {}
        hi_max = dhi
        for k in b.needed:
            kp = cols.index(k)
            for c in inputs:
                gk, ck = g_bb.copy(), c_bb.copy()
                if c == RHS:
                    gk[:, kp] = False
                    gk[rhs_pos, kp] = True
                    ck[:, kp] = False
                else:
                    gk[:, kp] = gpat[rows, c]
                    ck[:, kp] = cpat[rows, c]
                lo, hi = degree_bounds(gk, ck)
                nb[(k, c)] = (lo, hi)
                hi_max = max(hi_max, hi)
        plans.append(_BlockPlan(b, ext, has_rhs, rhs_pos, inputs, (dlo, dhi), nb, hi_max + 1))
    return plans


def _coefficients(vals: np.ndarray, bounds: tuple[int, int]) -> np.ndarray:
    """Polynomial coefficients (ascending) from values at the rotated roots of unity.

    ``vals`` has shape (P, Tc); returns real (Tc, hi+1) with zeros below ``lo``
    (an empty degree range gives a zero row of length 1).
    """
    lo, hi = bounds
    p = vals.shape[0]
    if hi < 0:
        return np.zeros((vals.shape[1], 1))
    spec = np.fft.fft(vals, axis=0)[: hi + 1]
    spec *= (np.exp(-1j * THETA * np.arange(hi + 1)) / p)[:, None]
    coef = np.ascontiguousarray(spec.real.T)
    coef[:, :lo] = 0.0
    return coef


def _det(m: np.ndarray) -> np.ndarray:
    """Determinants of square matrices stored with the matrix axes first: (n, n, ...) -> (...).

    Closed form (cofactor expansion) up to n = 3, LU factorization beyond.
    """
    n = m.shape[0]
    if n == 1:
        return m[0, 0].copy()
    if n == 2:
        return m[0, 0] * m[1, 1] - m[0, 1] * m[1, 0]
    if n == 3:
        return (m[0, 0] * (m[1, 1] * m[2, 2] - m[1, 2] * m[2, 1])
                - m[0, 1] * (m[1, 0] * m[2, 2] - m[1, 2] * m[2, 0])
                + m[0, 2] * (m[1, 0] * m[2, 1] - m[1, 1] * m[2, 0]))
    return np.linalg.det(np.moveaxis(m, (0, 1), (-2, -1)))


def block_coefficients(system: MnaSystem, plan: _BlockPlan, w_ref: float, sl: slice):
    """Denominator and numerator coefficients of one block for the trials in ``sl``.

    Returns
    -------
    den : ndarray, shape (Tc, dd+1)
        Coefficients of ``det(G + s*C)`` in ``sigma = s/w_ref``, ascending,
        scaled per trial so the largest magnitude is 1.
    nums : dict of (int, int) to ndarray, shape (Tc, dn+1)
        Numerator of the transfer function from input ``c`` to unknown ``k``,
        with the same per-trial scale.
    """
    check_deadline("circuit.staged.coefficients")
    b = plan.block
    g_bb, c_bb = system.stamp(sl, rows=b.rows, cols=b.cols, trials_last=True)   # (nb, nb, Tc)
    nb, _, tc = g_bb.shape
    p = plan.points
    sig = np.exp(1j * (THETA + 2.0 * np.pi * np.arange(p) / p))[:, None]         # (P, 1)
    m = g_bb[:, :, None, :] + sig * (w_ref * c_bb)[:, :, None, :]                  # (nb, nb, P, Tc)
    den_vals = _det(m)                                                             # (P, Tc)
    cols = []
    if plan.ext:
        g_bw, c_bw = system.stamp(sl, rows=b.rows, cols=plan.ext, trials_last=True)
        w = -(g_bw[:, :, None, :] + sig * (w_ref * c_bw)[:, :, None, :])          # (nb, m, P, Tc)
        cols.extend(w[:, i] for i in range(len(plan.ext)))
    if plan.has_rhs and nb > 3:                      # (up to 3 unknowns the source's column is a cofactor)
        e = np.zeros((nb, p, tc), dtype=complex)
        e[plan.rhs_pos] = 1.0
        cols.append(e)
    den = _coefficients(den_vals, plan.den_bounds)
    scale = np.max(np.abs(den), axis=1)
    if not np.all(scale > 0):
        bad = int(np.flatnonzero(~(scale > 0))[0])
        raise CircuitError(f"the circuit is singular in trial {bad + (sl.start or 0)}: a stage determinant "
                           f"is zero (unknowns {', '.join(system.unknowns[c] for c in b.cols)})")
    den /= scale[:, None]
    nums = {}
    for k in b.needed:
        kp = b.cols.index(k)
        cof = _Cofactors(m, kp) if nb <= 3 else None
        for ci, c in enumerate(plan.inputs):
            if cof is None:
                mk = m.copy()
                mk[:, kp] = cols[ci]
                vals = _det(mk)
            elif c == RHS:                                   # the unit column of the source's row
                vals = cof[plan.rhs_pos]
            else:
                vals = sum(cols[ci][i] * cof[i] for i in range(nb))
            coef = _coefficients(vals, plan.num_bounds[(k, c)])
            coef /= scale[:, None]
            nums[(k, c)] = coef
    return den, nums


class _Cofactors:
    """Cofactors of column ``kp`` of square matrices stored with the matrix axes first, (n, n, ...), n <= 3.

    Cramer's rule with the column replaced by ``b`` is the expansion ``sum_i b_i C_i,kp`` along that column
    (e.g. G. Strang, *Linear Algebra and Its Applications*, 4th ed., 2006, sec. 4.4): a unit column
    needs one cofactor and no copy of the matrices.  Each cofactor is computed when first asked for.
    """

    def __init__(self, m: np.ndarray, kp: int):
        self.m, self.kp = m, kp
        self.cache: dict[int, np.ndarray] = {}

    def __getitem__(self, i: int) -> np.ndarray:
        if i not in self.cache:
            n = self.m.shape[0]
            rows = [r for r in range(n) if r != i]
            cols = [c for c in range(n) if c != self.kp]
            minor = self.m[np.ix_(rows, cols)] if n > 1 else None
            value = np.ones(self.m.shape[2:], dtype=self.m.dtype) if n == 1 else _det(minor)
            self.cache[i] = -value if (i + self.kp) % 2 else value
        return self.cache[i]


def _polymul(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Per-row product of coefficient arrays (Tc, na) and (Tc, nb) -> (Tc, na+nb-1)."""
    if a.shape[1] > b.shape[1]:
        a, b = b, a
    out = np.zeros((a.shape[0], a.shape[1] + b.shape[1] - 1))
    for i in range(a.shape[1]):
        out[:, i : i + b.shape[1]] += a[:, i : i + 1] * b
    return out


def _trim(c: np.ndarray) -> np.ndarray:
    nz = np.flatnonzero(np.any(c != 0, axis=0))
    return c[:, : (nz[-1] + 1 if nz.size else 1)]


@dataclass
class _Numeric:
    """An unknown evaluated on the grid: ``sum_c N_c/D * x_c`` (coefficients over all trials)."""

    den: np.ndarray
    terms: list[tuple[np.ndarray, int]]   # (numerator coefficients, input unknown or RHS)


def stage_representations(system: MnaSystem, plans: list[_BlockPlan], w_ref: float,
                          coef_chunk: int) -> dict[int, object]:
    """Per-trial rational representation of every needed unknown.

    Cascaded stages (one input each) are merged into one numerator and
    denominator per trial; an unknown fed by several inputs is kept as a
    sum (:class:`_Numeric`) to be evaluated on the frequency grid.

    Returns
    -------
    dict of int to _Rational or _Numeric
        Coefficient arrays have shape (T, d+1), ascending powers of
        ``sigma = s / w_ref``.
    """
    t = system.trials
    reps: dict[int, object] = {RHS: _Rational(np.ones((t, 1)), np.ones((t, 1)))}
    for plan in plans:
        parts = [block_coefficients(system, plan, w_ref, slice(t0, min(t, t0 + coef_chunk)))
                 for t0 in range(0, t, coef_chunk)]
        if len(parts) == 1:
            den, nums = parts[0]
        else:
            den = np.concatenate([p[0] for p in parts])
            nums = {key: np.concatenate([p[1][key] for p in parts]) for key in parts[0][1]}
        for k in plan.block.needed:
            terms = [(nums[(k, c)], c) for c in plan.inputs]
            terms = [(n, c) for n, c in terms if np.any(n != 0)]
            if len(terms) == 1 and isinstance(reps[terms[0][1]], _Rational):
                n, c = terms[0]
                r = reps[c]
                num = _trim(_polymul(n, r.num))
                dd = _trim(_polymul(den, r.den))
                if max(num.shape[1], dd.shape[1]) - 1 <= MAX_MERGE_DEGREE:
                    reps[k] = _Rational(num, dd)
                    continue
            reps[k] = _Numeric(den, terms)
    return reps


def evaluate_chunk(reps: dict[int, object], output_col: int, ev: GridEvaluator, sl: slice,
                   out: np.ndarray) -> None:
    """Write the response of unknown ``output_col`` for trials ``sl`` into ``out`` (Tc, F) complex.

    A trial's values do not depend on the other trials of ``sl``
    (:mod:`.polyeval`).
    """
    r = reps[output_col]
    if is_single_rational(reps, output_col):
        ev.ratio(r.num[sl], r.den[sl], out)
        return
    v = _planar_value(reps, output_col, ev, sl, {})
    out.real[...] = v[:, 0]
    out.imag[...] = v[:, 1]


def evaluate_chunk_polar(reps: dict[int, object], output_col: int, ev: GridEvaluator, sl: slice, power: np.ndarray,
                         phase: np.ndarray | None, delay: np.ndarray | None) -> None:
    """``|H|^2``, and when their arrays are given ``arg H`` (rad) and the group delay (s), of a single-rational
    output for trials ``sl``, each written into its (Tc, F) array (:meth:`.polyeval.GridEvaluator.ratio_polar`)."""
    r = reps[output_col]
    if not is_single_rational(reps, output_col):
        raise CircuitError("the output is not one rational function per trial")
    ev.ratio_polar(r.num[sl], r.den[sl], power, phase, delay)


def is_single_rational(reps: dict[int, object], col: int) -> bool:
    """Whether unknown ``col`` is one merged rational function of frequency (not a constant)."""
    r = reps[col]
    return isinstance(r, _Rational) and (r.num.shape[1] > 1 or r.den.shape[1] > 1)


def _planar_value(reps: dict[int, object], c: int, ev: GridEvaluator, sl: slice, cache: dict) -> np.ndarray:
    """Planar value (Tc, 2, F) -- or (Tc, 2, 1) when constant in frequency -- of unknown ``c``."""
    if c in cache:
        return cache[c]
    r = reps[c]
    if isinstance(r, _Rational):
        if r.num.shape[1] == 1 and r.den.shape[1] == 1:
            v = np.zeros((r.num[sl].shape[0], 2, 1))
            v[:, 0, 0] = r.num[sl, 0] / r.den[sl, 0]
        else:
            d = ev.planar(r.den[sl])
            if r.num.shape[1] == 1:
                n = np.zeros((d.shape[0], 2, 1))
                n[:, 0, 0] = r.num[sl, 0]
            else:
                n = ev.planar(r.num[sl])
            v = quotient(n, d)
    else:
        acc = None
        for n, src in r.terms:
            term = multiply(ev.planar(n[sl]), _planar_value(reps, src, ev, sl, cache))
            acc = term if acc is None else acc + term
        d = ev.planar(r.den[sl])
        v = quotient(np.zeros_like(d) if acc is None else acc, d)
    cache[c] = v
    return v


def bytes_per_trial(reps: dict[int, object], nfreq: int) -> int:
    """Rough working memory of :func:`evaluate_chunk` per trial, bytes (planar values and quotient scratch)."""
    numeric = sum(isinstance(r, _Numeric) for r in reps.values())
    return 16 * nfreq * (3 + 3 * numeric)


def coefficient_bytes_per_trial(plans: list[_BlockPlan]) -> int:
    """Rough memory of :func:`block_coefficients` per trial, bytes (complex pencils at the interpolation points)."""
    return max(16 * p.points * len(p.block.cols) ** 2 * (3 + len(p.num_bounds)) for p in plans)
