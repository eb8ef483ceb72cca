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

Blocks of up to three unknowns (every stage of a cascade of op-amp
sections) skip the interpolation: their determinants and cofactors are
expanded by cofactors (Leibniz's formula) in exact polynomial arithmetic on
the entries ``g + sigma c w_ref`` themselves -- a few products of
coefficient rows over all trials at once, with no complex values and no
transform, exact to the rounding of each product (:class:`_SmallPencil`).

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

SMALL_BLOCK = 3
"""Largest block (unknowns) whose determinants are expanded exactly instead of interpolated."""

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
    g_pattern: np.ndarray        # (nb, nb + len(ext)) bool: where G may be non-zero (the block, then ext columns)
    c_pattern: np.ndarray        # the same for C

    @property
    def small(self) -> bool:
        """Whether the block's coefficients come from exact polynomial arithmetic (:class:`_SmallPencil`)."""
        return len(self.block.cols) <= SMALL_BLOCK


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
        wide = list(cols) + ext
        plans.append(_BlockPlan(b, ext, has_rhs, rhs_pos, inputs, (dlo, dhi), nb, hi_max + 1,
                                gpat[np.ix_(rows, wide)], cpat[np.ix_(rows, wide)]))
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
    """Determinants of square matrices stored with the matrix axes first: (n, n, ...) -> (...), by LU
    factorization (``numpy.linalg.det``); blocks of up to three unknowns never come here."""
    return np.linalg.det(np.moveaxis(m, (0, 1), (-2, -1)))


def _poly_mul(a: np.ndarray | None, b: np.ndarray | None) -> np.ndarray | None:
    """Product of polynomials over trials, coefficient rows first: (da+1, Tc) x (db+1, Tc) -> (da+db+1, Tc);
    None stands for the zero polynomial."""
    if a is None or b is None:
        return None
    if a.shape[0] > b.shape[0]:
        a, b = b, a
    out = np.zeros((a.shape[0] + b.shape[0] - 1,) + b.shape[1:])
    for i in range(a.shape[0]):
        out[i:i + b.shape[0]] += a[i] * b
    return out


def _poly_add(a: np.ndarray | None, b: np.ndarray | None, sign: float = 1.0) -> np.ndarray | None:
    """``a + sign * b`` for polynomials over trials (coefficient rows first; None is zero)."""
    if b is None:
        return a
    b = b if sign > 0 else -b
    if a is None:
        return b
    if a.shape[0] < b.shape[0]:
        a, b = b, a
    out = a.copy()
    out[:b.shape[0]] += b
    return out


def linear_entry(g: np.ndarray, c: np.ndarray, g_nonzero: bool, c_nonzero: bool, w_ref: float,
                 sign: float = 1.0) -> np.ndarray | None:
    """``sign (g + sigma w_ref c)`` as a polynomial over trials -- (2, Tc), (1, Tc) without a C part -- or None
    when the structure says both parts are zero (``g``, ``c`` (Tc,); the patterns from the stamp list)."""
    if not c_nonzero:
        return (sign * g)[None, :] if g_nonzero else None
    return np.stack([sign * g if g_nonzero else np.zeros_like(g), (sign * w_ref) * c])


class _SmallPencil:
    """The pencil ``G + sigma (w_ref C)`` of a block of at most three unknowns, entry by entry as polynomials
    over trials (coefficient rows first, (2, Tc); None where both parts are zero in every trial), with its
    determinant and the cofactors of one column by cofactor expansion (e.g. G. Strang, *Linear Algebra and
    Its Applications*, 4th ed., 2006, sec. 4.3-4.4)."""

    def __init__(self, g: np.ndarray, c: np.ndarray, g_pattern: np.ndarray, c_pattern: np.ndarray, w_ref: float):
        n = g.shape[0]
        self.n = n
        self.entry = [[linear_entry(g[i, j], c[i, j], g_pattern[i, j], c_pattern[i, j], w_ref) for j in range(n)]
                      for i in range(n)]

    def minor(self, rows: list[int], cols: list[int]) -> np.ndarray | None:
        """Determinant of the sub-matrix ``rows`` x ``cols`` (equal lengths, 1 to 3)."""
        e = self.entry
        if len(rows) == 1:
            return e[rows[0]][cols[0]]
        if len(rows) == 2:
            (r0, r1), (c0, c1) = rows, cols
            return _poly_add(_poly_mul(e[r0][c0], e[r1][c1]), _poly_mul(e[r0][c1], e[r1][c0]), -1.0)
        acc = None
        for k, c in enumerate(cols):
            rest = [x for x in cols if x != c]
            acc = _poly_add(acc, _poly_mul(e[rows[0]][c], self.minor(rows[1:], rest)), -1.0 if k % 2 else 1.0)
        return acc

    def det(self) -> np.ndarray | None:
        return self.minor(list(range(self.n)), list(range(self.n)))

    def cofactor(self, i: int, kp: int) -> np.ndarray | None:
        """Cofactor ``(-1)^(i+kp)`` times the minor without row ``i`` and column ``kp``."""
        rows = [r for r in range(self.n) if r != i]
        cols = [c for c in range(self.n) if c != kp]
        m = self.minor(rows, cols) if rows else self._one()
        return m if m is None or (i + kp) % 2 == 0 else -m

    def _one(self) -> np.ndarray:
        first = next(x for r in self.entry for x in r if x is not None)
        return np.ones((1, first.shape[1]))


def _exact_coefficients(poly: np.ndarray | None, bounds: tuple[int, int], trials: int) -> np.ndarray:
    """Coefficients (Tc, hi+1), ascending, of a polynomial over trials (rows first; None is zero), zero
    outside the structural degree range ``bounds`` (an empty range gives a zero row of length 1)."""
    lo, hi = bounds
    if hi < 0:
        return np.zeros((trials, 1))
    out = np.zeros((trials, hi + 1))
    if poly is not None:
        top = min(hi + 1, poly.shape[0])
        out[:, lo:top] = poly[lo:top].T
    return out


def _small_block_coefficients(system: MnaSystem, plan: _BlockPlan, w_ref: float, sl: slice):
    """:func:`block_coefficients` of a block of at most three unknowns by exact polynomial arithmetic."""
    b = plan.block
    g_bb, c_bb = system.stamp(sl, rows=b.rows, cols=b.cols, trials_last=True)   # (nb, nb, Tc)
    tc = g_bb.shape[2]
    nb = len(b.cols)
    pencil = _SmallPencil(g_bb, c_bb, plan.g_pattern[:, :nb], plan.c_pattern[:, :nb], w_ref)
    den = _exact_coefficients(pencil.det(), plan.den_bounds, tc)
    scale = _check_scale(system, b, den, sl)
    den /= scale[:, None]
    couplings = []
    if plan.ext:
        g_bw, c_bw = system.stamp(sl, rows=b.rows, cols=plan.ext, trials_last=True)
        couplings = [[linear_entry(g_bw[i, j], c_bw[i, j], plan.g_pattern[i, nb + j], plan.c_pattern[i, nb + j],
                                   w_ref, -1.0) for i in range(nb)] for j in range(len(plan.ext))]
    nums = {}
    for k in b.needed:
        kp = b.cols.index(k)
        for ci, c in enumerate(plan.inputs):
            if c == RHS:                                     # the unit column of the source's row
                vals = pencil.cofactor(plan.rhs_pos, kp)
            else:
                vals = None
                for i, w in enumerate(couplings[ci]):
                    if w is not None:
                        vals = _poly_add(vals, _poly_mul(w, pencil.cofactor(i, kp)))
            coef = _exact_coefficients(vals, plan.num_bounds[(k, c)], tc)
            coef /= scale[:, None]
            nums[(k, c)] = coef
    return den, nums


def _check_scale(system: MnaSystem, b: Block, den: np.ndarray, sl: slice) -> np.ndarray:
    """Each trial's largest denominator coefficient magnitude (Tc,); a zero determinant is an error."""
    scale = np.max(np.abs(den), axis=1)
    if not np.all(scale > 0):
        bad = int(np.flatnonzero(~(scale > 0))[0])
        raise CircuitError(f"the circuit is singular in trial {bad + (sl.start or 0)}: a stage determinant "
                           f"is zero (unknowns {', '.join(system.unknowns[c] for c in b.cols)})")
    return scale


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
    if plan.small:
        return _small_block_coefficients(system, plan, w_ref, sl)
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
    if plan.has_rhs:
        e = np.zeros((nb, p, tc), dtype=complex)
        e[plan.rhs_pos] = 1.0
        cols.append(e)
    den = _coefficients(den_vals, plan.den_bounds)
    scale = _check_scale(system, b, den, sl)
    den /= scale[:, None]
    nums = {}
    for k in b.needed:
        kp = b.cols.index(k)
        for ci, c in enumerate(plan.inputs):
            mk = m.copy()
            mk[:, kp] = cols[ci]
            vals = _det(mk)
            coef = _coefficients(vals, plan.num_bounds[(k, c)])
            coef /= scale[:, None]
            nums[(k, c)] = coef
    return den, nums


def _polymul(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Per-row product of coefficient arrays (Tc, na) and (Tc, nb) -> (Tc, na+nb-1): :func:`_poly_mul` on the
    transposes (the same operations), returned C-contiguous."""
    return np.ascontiguousarray(_poly_mul(a.T, b.T).T)


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
                         phase: np.ndarray | None, delay: np.ndarray | None, reference: np.ndarray | None = None
                         ) -> None:
    """``|H|^2``, and when their arrays are given ``arg H`` (rad; relative to ``reference`` when given) and the
    group delay (s), of a single-rational output for trials ``sl``, each written into its (Tc, F) array
    (:meth:`.polyeval.GridEvaluator.ratio_polar`)."""
    r = reps[output_col]
    if not is_single_rational(reps, output_col):
        raise CircuitError("the output is not one rational function per trial")
    ev.ratio_polar(r.num[sl], r.den[sl], power, phase, delay, reference)


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
    """Rough memory of :func:`block_coefficients` per trial, bytes (complex pencils at the interpolation points;
    a small block's polynomial entries and products, a few hundred bytes)."""
    return max(8 * 2 * 4 * len(p.block.cols) ** 2 * (3 + len(p.num_bounds)) if p.small
               else 16 * p.points * len(p.block.cols) ** 2 * (3 + len(p.num_bounds)) for p in plans)
