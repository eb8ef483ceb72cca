"""Zeros, poles and gain of a circuit's transfer function, for many trials at once.

The poles are the finite generalized eigenvalues of the MNA pencil
``G + s*C`` restricted to the blocks the output depends on (:mod:`.blocks`),
found block by block; the zeros are those of the Cramer numerator pencil (the
output's column replaced by the input vector), which has the same finite
eigenvalues as the Rosenbrock system matrix (H. H. Rosenbrock, *State-Space
and Multivariable Theory*, Nelson, 1970, ch. 3).  Each pencil is reduced to a
standard eigenproblem by a shift and invert (Y. Saad, *Numerical Methods for
Large Eigenvalue Problems*, 2nd ed., SIAM, 2011, sec. 8.1):

    (G + sigma0*C)^-1 C v = mu v,   s = sigma0 - 1/mu,

so that numpy's batched :func:`numpy.linalg.eigvals` solves every trial at
once.  Infinite eigenvalues map to ``mu = 0``; the structural degree of the
determinant (:func:`.blocks.degree_bounds`) says how many are finite, and those
are the largest ``|mu|``.  Rows and columns are equilibrated by powers of two
first (Moler and Stewart, SIAM J. Numer. Anal. 10(2), 1973), which changes no
eigenvalue.  The gain is matched to a direct solve at one frequency.

Nothing is cancelled: the poles are every natural frequency of the circuit
part the output depends on, so an unstable internal mode cannot hide behind a
zero -- these are the roots to judge stability by.  Roots beyond
:data:`FINITE_LIMIT` times the circuit's characteristic frequency (a
structurally possible root that these part values push to infinity) are
dropped: they are NaN in the arrays.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .blocks import decompose, degree_bounds
from .errors import CircuitError
from .mna import build_mna
from .netlist import Circuit

#: Roots beyond this multiple of the characteristic frequency are treated as infinite (dropped).
FINITE_LIMIT = 1e9
#: Direction of the shift sigma0 = w_ref * exp(j * SHIFT_ANGLE): off both axes, so that no real or
#: imaginary root of a filter can coincide with it.
SHIFT_ANGLE = 1.1


@dataclass(frozen=True)
class RootSet:
    """Transfer functions ``H(s) = k * prod(s - z) / prod(s - p)`` of ``T`` trials.

    Attributes
    ----------
    zeros : ndarray, complex128, shape (T, Z)
        Finite zeros, rad/s; NaN marks a slot with no root in that trial.
    poles : ndarray, complex128, shape (T, P)
        Poles, rad/s: every natural frequency of the circuit part the output
        depends on (no cancellation); NaN as for zeros.
    log_gain : ndarray, float64, shape (T,)
        ``ln |k|`` (``-inf`` when the output does not depend on the input).
    pole_group : ndarray, int, shape (P,)
        The group (a stage's index, from 0) each pole column belongs to.
    """

    zeros: np.ndarray
    poles: np.ndarray
    log_gain: np.ndarray
    pole_group: np.ndarray

    @property
    def trials(self) -> int:
        return int(self.log_gain.shape[0])

    @classmethod
    def from_zpk(cls, zeros, poles, gain: float) -> "RootSet":
        """One trial from zeros and poles (rad/s) and the real factor ``gain``."""
        z = np.asarray(zeros, dtype=complex).reshape(1, -1)
        p = np.asarray(poles, dtype=complex).reshape(1, -1)
        g = abs(float(gain))
        log_k = np.array([math.log(g) if g > 0 else -math.inf])
        return cls(z, p, log_k, np.zeros(p.shape[1], dtype=int))

    @classmethod
    def cascade(cls, parts: list["RootSet"]) -> "RootSet":
        """The product of transfer functions (stages in cascade), trial by trial.

        The pole columns of part ``i`` get ``pole_group`` ``i``.  A part of one trial stands for every
        trial (its roots repeated), so some stages may vary while the others keep their nominal values.
        """
        if not parts:
            raise CircuitError("a cascade needs at least one transfer function", field="stages")
        counts = {p.trials for p in parts} - {1}
        if len(counts) > 1:
            raise CircuitError("the parts of a cascade differ in their number of trials", field="stages")
        t = counts.pop() if counts else 1

        def rows(a: np.ndarray) -> np.ndarray:
            return np.broadcast_to(a, (t,) + a.shape[1:]) if a.shape[0] != t else a

        return cls(np.concatenate([rows(p.zeros) for p in parts], axis=1),
                   np.concatenate([rows(p.poles) for p in parts], axis=1),
                   np.sum([rows(p.log_gain) for p in parts], axis=0),
                   np.concatenate([np.full(p.poles.shape[1], i, dtype=int) for i, p in enumerate(parts)]))

    def trial(self, index: int) -> "RootSet":
        """Trial ``index`` alone (a one-trial RootSet)."""
        sl = slice(index, index + 1)
        return RootSet(self.zeros[sl], self.poles[sl], self.log_gain[sl], self.pole_group)

    def log_magnitude(self, omega: np.ndarray, trials: np.ndarray | None = None) -> np.ndarray:
        """``ln |H(j omega)|`` (nepers).

        Parameters
        ----------
        omega : ndarray, float, shape (K,) or (Tk, K)
            Angular frequencies, rad/s; the rows of a 2-D ``omega`` belong to the
            trials ``trials`` (all trials when None); a 1-D one is shared.
        trials : ndarray of int, shape (Tk,), optional

        Returns
        -------
        ndarray, float64, shape (Tk, K)
        """
        z, p, lk = self.zeros, self.poles, self.log_gain
        if trials is not None:
            z, p, lk = z[trials], p[trials], lk[trials]
        w = np.asarray(omega, dtype=float)
        if w.ndim == 1:
            w = np.broadcast_to(w, (lk.shape[0], w.shape[0]))
        out = np.repeat(lk[:, None], w.shape[1], axis=1).astype(float)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for roots, sign in ((z, 0.5), (p, -0.5)):
                _add_log_distances(out, w, roots, sign)
        return out
    def reciprocal(self) -> "RootSet":
        """The same magnitudes in the variable ``u = 1/omega``: ``|H(j/u)| = |H'(j u)|``.

        Each non-zero root ``r`` becomes ``-1/r`` (``|j w - r| = (|r|/u) |j u + 1/r|``),
        ``ln |k'| = ln |k| + sum ln |z| - sum ln |p|`` over the non-zero roots, and the power
        ``u^(P - Z)`` becomes ``P - Z`` zeros (or ``Z - P`` poles) at ``u = 0``.  Used to bound a
        response up to infinite frequency, which is ``u = 0``.
        """
        z, p = self.zeros, self.poles
        zf, pf = np.isfinite(z), np.isfinite(p)
        znz, pnz = zf & (z != 0), pf & (p != 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            zr = np.where(znz, -1.0 / z, np.nan)
            pr = np.where(pnz, -1.0 / p, np.nan)
            log_k = (self.log_gain + np.where(znz, np.log(np.abs(z)), 0.0).sum(axis=1)
                     - np.where(pnz, np.log(np.abs(p)), 0.0).sum(axis=1))
        power = pf.sum(axis=1) - zf.sum(axis=1)
        width = int(np.abs(power).max()) if power.size else 0
        slots = np.arange(width)[None, :]
        extra_z = np.where(slots < power[:, None], 0.0, np.nan).astype(complex)
        extra_p = np.where(slots < -power[:, None], 0.0, np.nan).astype(complex)
        return RootSet(np.concatenate([zr, extra_z], axis=1), np.concatenate([pr, extra_p], axis=1), log_k,
                       np.zeros(pr.shape[1] + width, dtype=int))

    def unstable(self, relative_margin: float = 1e-12) -> np.ndarray:
        """Bool (T,): some pole has ``Re p >= -relative_margin * |p|`` (stability not proved)."""
        p = self.poles
        if p.shape[1] == 0:
            return np.zeros(self.trials, dtype=bool)
        with np.errstate(invalid="ignore"):
            bad = p.real >= -relative_margin * np.abs(p)
        return np.any(bad & np.isfinite(p), axis=1)


def characteristic_omega(circuit: Circuit) -> float:
    """Geometric mean of the RC and R/L corner frequencies (rad/s), over every trial's values."""
    from .netlist import ElementKind

    g, caps, inds = [], [], []
    for el in circuit.elements:
        v = np.asarray(el.value, dtype=float) if el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR,
                                                             ElementKind.INDUCTOR) else None
        if v is None or not np.all(v > 0):
            continue
        lv = float(np.mean(np.log(v)))
        if el.kind is ElementKind.RESISTOR:
            g.append(-lv)
        elif el.kind is ElementKind.CAPACITOR:
            caps.append(lv)
        else:
            inds.append(lv)
    gm = float(np.mean(g)) if g else math.log(1e-3)
    corners = [gm - c for c in caps] + [-(gm + ind) for ind in inds]
    if not corners:
        return 2.0 * math.pi * 1e3
    return float(math.exp(np.mean(corners)))


#: Squared distances multiplied together before one logarithm (a product of four stays within float range
#: for frequencies and roots between 1e-70 and 1e70 rad/s).
PRODUCT_RUN = 4


def _add_log_distances(out: np.ndarray, w: np.ndarray, roots: np.ndarray, sign: float) -> None:
    """``out += sign * sum_r ln |j w - r|^2`` over the finite roots of each row, in place (shapes (T, K), (T, R)).

    Squared distances ``x^2 + (w - y)^2`` are multiplied in runs of :data:`PRODUCT_RUN` before one logarithm:
    far fewer logarithms than one per root, and no complex arithmetic.
    """
    n = roots.shape[1]
    for start in range(0, n, PRODUCT_RUN):
        prod = None
        for r in range(start, min(n, start + PRODUCT_RUN)):
            x = roots[:, r].real[:, None]
            y = roots[:, r].imag[:, None]
            d2 = x * x + (w - y) ** 2
            d2 = np.where(np.isnan(d2), 1.0, d2)
            prod = d2 if prod is None else prod * d2
        out += sign * np.log(prod)


def _equilibrate(g: np.ndarray, c: np.ndarray, w_ref: float) -> tuple[np.ndarray, np.ndarray]:
    """Per-trial row and column scaling by powers of two of ``G`` and ``w_ref*C`` (shape (T, n, n))."""
    g, c = g.copy(), c.copy()
    for _ in range(4):
        mag = np.abs(g) + w_ref * np.abs(c)
        r = mag.max(axis=2)
        r[r == 0] = 1.0
        r = 2.0 ** np.round(np.log2(r))
        g /= r[:, :, None]
        c /= r[:, :, None]
        mag = np.abs(g) + w_ref * np.abs(c)
        k = mag.max(axis=1)
        k[k == 0] = 1.0
        k = 2.0 ** np.round(np.log2(k))
        g /= k[:, None, :]
        c /= k[:, None, :]
    return g, c


def pencil_eigenvalues(g: np.ndarray, c: np.ndarray, count: int, w_ref: float) -> np.ndarray:
    """The ``count`` finite generalized eigenvalues ``s`` of ``(G + s*C) v = 0`` per trial.

    Parameters
    ----------
    g, c : ndarray, float64, shape (T, n, n)
    count : int
        How many are finite (the structural degree of ``det(G + s*C)``).
    w_ref : float
        Characteristic frequency (rad/s): the shift's magnitude.

    Returns
    -------
    ndarray, complex128, shape (T, count)
        rad/s; NaN where a structurally finite eigenvalue lies beyond
        :data:`FINITE_LIMIT` * ``w_ref`` in that trial.

    Raises
    ------
    CircuitError
        The shifted pencil is singular (the circuit is singular).
    """
    t, n, _ = g.shape
    if count <= 0 or n == 0:
        return np.zeros((t, 0), dtype=complex)
    g, c = _equilibrate(g, c, w_ref)
    sigma0 = w_ref * complex(math.cos(SHIFT_ANGLE), math.sin(SHIFT_ANGLE))
    try:
        k = np.linalg.solve(g + sigma0 * c, c.astype(complex))
    except np.linalg.LinAlgError as exc:
        raise CircuitError("the circuit is singular: its MNA pencil has no inverse at the shift",
                           field="circuit") from exc
    mu = np.linalg.eigvals(k)
    order = np.argsort(-np.abs(mu), axis=1)[:, :count]
    mu = np.take_along_axis(mu, order, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = sigma0 - 1.0 / mu
    s[~(np.abs(s) < FINITE_LIMIT * w_ref)] = np.nan
    return s


def transfer_roots(circuit: Circuit, output: str = "out") -> RootSet:
    """Zeros, poles and gain of ``V(output)/V(input source)`` for every trial of ``circuit``.

    Parameters
    ----------
    circuit : Circuit
        Values may carry ``T`` trials.  Meant for one op-amp stage (a few to a
        dozen unknowns); a cascade of stages driven from ideal sources is the
        :meth:`RootSet.cascade` of its stages.
    output : str
        Output node.

    Returns
    -------
    RootSet
        ``pole_group`` all 0.

    Raises
    ------
    CircuitError
        Unknown output or a singular circuit.
    """
    circuit.validate(output)
    system = build_mna(circuit)
    if output not in system.node_index:
        raise CircuitError(f"output node {output!r} is not a node of the circuit", field="output")
    col = system.node_index[output]
    blocks = decompose(system, col)
    rows = [r for b in blocks for r in b.rows]
    cols = [c for b in blocks for c in b.cols]
    t = system.trials
    if system.rhs_row not in rows:
        return RootSet(np.zeros((t, 0), complex), np.zeros((t, 0), complex), np.full(t, -math.inf),
                       np.zeros(0, dtype=int))
    w_ref = characteristic_omega(circuit)
    gall, call = system.stamp(None)
    # poles, block by block (the pencil is block triangular: its determinant is the blocks' product)
    poles = []
    for b in blocks:
        _, hi = degree_bounds(_g_pattern(system, b.rows, b.cols), _c_pattern(system, b.rows, b.cols))
        if hi < 0:
            raise CircuitError("the circuit is singular: a stage has a structurally zero determinant",
                               field="circuit")
        if hi:
            poles.append(pencil_eigenvalues(gall[:, b.rows][:, :, b.cols], call[:, b.rows][:, :, b.cols],
                                            hi, w_ref))
    poles = np.concatenate(poles, axis=1) if poles else np.zeros((t, 0), complex)
    # zeros: the Cramer numerator pencil over the reduced system
    g = gall[:, rows][:, :, cols].copy()
    c = call[:, rows][:, :, cols].copy()
    kcol = cols.index(col)
    bvec = np.zeros(len(rows))
    bvec[rows.index(system.rhs_row)] = 1.0
    gk, ck = g.copy(), c.copy()
    gk[:, :, kcol] = bvec
    ck[:, :, kcol] = 0.0
    gpat = _g_pattern(system, rows, cols)
    cpat = _c_pattern(system, rows, cols)
    gpat[:, kcol] = bvec != 0
    cpat[:, kcol] = False
    lo_n, hi_n = degree_bounds(gpat, cpat)
    if hi_n < 0:
        return RootSet(np.zeros((t, 0), complex), poles, np.full(t, -math.inf), np.zeros(poles.shape[1], int))
    zeros = pencil_eigenvalues(gk, ck, hi_n, w_ref)
    log_k = _log_gain(g, c, bvec, kcol, zeros, poles, w_ref)
    return RootSet(zeros, poles, log_k, np.zeros(poles.shape[1], dtype=int))


def _g_pattern(system, rows, cols) -> np.ndarray:
    pat = np.zeros((len(rows), len(cols)), dtype=bool)
    ri = {r: i for i, r in enumerate(rows)}
    ci = {c: i for i, c in enumerate(cols)}
    for m, r, c, v in system.entries:
        if m == 0 and r in ri and c in ci and np.any(np.asarray(v) != 0):
            pat[ri[r], ci[c]] = True
    return pat


def _c_pattern(system, rows, cols) -> np.ndarray:
    pat = np.zeros((len(rows), len(cols)), dtype=bool)
    ri = {r: i for i, r in enumerate(rows)}
    ci = {c: i for i, c in enumerate(cols)}
    for m, r, c, v in system.entries:
        if m == 1 and r in ri and c in ci and np.any(np.asarray(v) != 0):
            pat[ri[r], ci[c]] = True
    return pat


def _log_gain(g, c, bvec, kcol, zeros, poles, w_ref) -> np.ndarray:
    """``ln |k|`` per trial, from a direct solve at a test point where ``H`` is not small."""
    best = np.full(g.shape[0], -np.inf)
    out = np.full(g.shape[0], -np.inf)
    for s1 in (1j * w_ref, 1.37j * w_ref, (0.5 + 1j) * w_ref):
        try:
            x = np.linalg.solve(g + s1 * c, np.broadcast_to(bvec.astype(complex), g.shape[:2])[..., None])[..., 0]
        except np.linalg.LinAlgError:
            continue
        h = np.abs(x[:, kcol])
        with np.errstate(divide="ignore", invalid="ignore"):
            shape = (np.nansum(np.log(np.abs(s1 - zeros)), axis=1)
                     - np.nansum(np.log(np.abs(s1 - poles)), axis=1))
            lk = np.log(h) - shape
        better = np.isfinite(lk) & (np.log(h) > best)
        out = np.where(better, lk, out)
        best = np.where(better, np.log(h), best)
    return out


__all__ = ["RootSet", "transfer_roots", "pencil_eigenvalues", "FINITE_LIMIT"]
