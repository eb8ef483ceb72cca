"""Exact zeros, poles and gain of a circuit's transfer function.

Poles are the finite generalized eigenvalues of the MNA pencil: the ``s``
with ``det(G + s*C) = 0``.  Zeros are the finite generalized eigenvalues of
the Rosenbrock system matrix

    P(s) = [[G + s*C, -b], [e_out^T, 0]]

(H. H. Rosenbrock, *State-Space and Multivariable Theory*, Nelson, 1970,
ch. 3; invariant zeros as generalized eigenvalues: Emami-Naeini and Van
Dooren, "Computation of zeros of linear multivariable systems", Automatica
18(4), 1982).  Only the stages the output depends on are kept (block
decomposition, :mod:`.blocks`), so loads hanging on op-amp outputs add no
spurious modes; coinciding pole-zero pairs (decoupling zeros) are cancelled.
The pencils are scaled in frequency (``s = w0 * sigma``) and equilibrated by
diagonal row and column scaling before the QZ algorithm (Moler and Stewart,
"An algorithm for generalized matrix eigenvalue problems", SIAM J. Numer.
Anal. 10(2), 1973), which changes no eigenvalue.  The gain is matched to a
direct solve at one frequency.
"""

from __future__ import annotations

import numpy as np

from .blocks import decompose
from .errors import CircuitError
from .mna import MnaSystem, build_mna
from .netlist import Circuit, ElementKind

FINITE_LIMIT = 1e9
"""Scaled eigenvalues (``|s|/w0``) beyond this are treated as infinite."""

CANCEL_TOL = 1e-7
"""Relative distance under which a pole and a zero cancel."""


def _characteristic_omega(circuit: Circuit) -> float:
    """Geometric mean of the RC and R/L corner frequencies of the circuit, rad/s."""
    g, caps, inds = [], [], []
    for el in circuit.elements:
        if el.kind is ElementKind.RESISTOR:
            g.append(1.0 / float(el.value))
        elif el.kind is ElementKind.CAPACITOR:
            caps.append(float(el.value))
        elif el.kind is ElementKind.INDUCTOR:
            inds.append(float(el.value))
    gm = float(np.exp(np.mean(np.log(g)))) if g else 1e-3
    corners = [gm / c for c in caps] + [1.0 / (gm * ind) for ind in inds]
    if not corners:
        return 2.0 * np.pi * 1e3
    return float(np.exp(np.mean(np.log(corners))))


def _equilibrate(a: np.ndarray, b: np.ndarray, sweeps: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """Diagonal row/column scaling that brings the largest entry of each row and column of |a|+|b| near 1."""
    a, b = a.copy(), b.copy()
    for _ in range(sweeps):
        mag = np.abs(a) + np.abs(b)
        r = mag.max(axis=1)
        r[r == 0] = 1.0
        r = 2.0 ** np.round(np.log2(r))
        a /= r[:, None]
        b /= r[:, None]
        mag = np.abs(a) + np.abs(b)
        c = mag.max(axis=0)
        c[c == 0] = 1.0
        c = 2.0 ** np.round(np.log2(c))
        a /= c[None, :]
        b /= c[None, :]
        if np.all(r == 1.0) and np.all(c == 1.0):
            break       # a fixed point: further sweeps divide by 1
    return a, b


def _finite_eigs(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Finite generalized eigenvalues of ``a v = lambda b v`` (scaled variable)."""
    from scipy.linalg import eig

    if a.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    a, b = _equilibrate(a, b)
    w = eig(a, b, right=False, homogeneous_eigvals=True)
    alpha, beta = w[0], w[1]
    finite = np.abs(beta) * FINITE_LIMIT > np.abs(alpha)
    return alpha[finite] / beta[finite]


def _cancel(zeros: np.ndarray, poles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    zeros = list(zeros)
    keep_p = []
    for p in poles:
        if zeros:
            d = np.abs(np.asarray(zeros) - p)
            i = int(np.argmin(d))
            if d[i] <= CANCEL_TOL * max(1.0, abs(p)):
                zeros.pop(i)
                continue
        keep_p.append(p)
    return np.asarray(zeros, dtype=complex), np.asarray(keep_p, dtype=complex)


def _clean(x: np.ndarray) -> np.ndarray:
    """Zero tiny imaginary parts and sort by (real, imag)."""
    x = np.asarray(x, dtype=complex)
    tiny = np.abs(x.imag) <= 1e-12 * np.maximum(np.abs(x), 1e-300)
    x = np.where(tiny, x.real + 0j, x)
    return x[np.lexsort((x.imag, x.real))] if x.size else x


def _reduced(system: MnaSystem, col: int):
    blocks = decompose(system, col)
    rows = [r for b in blocks for r in b.rows]
    cols = [c for b in blocks for c in b.cols]
    g, c = system.stamp(None, rows=rows, cols=cols)
    b = np.zeros(len(rows))
    if system.rhs_row in rows:
        b[rows.index(system.rhs_row)] = 1.0
    return g[0], c[0], b, cols.index(col)


def transfer_function_zpk(circuit: Circuit, output: str = "out") -> tuple[np.ndarray, np.ndarray, float]:
    """Zeros, poles and gain of ``V(output) / V(input source)``.

    Parameters
    ----------
    circuit : Circuit
        A single-trial circuit (``circuit.trials == 1``).
    output : str
        Output node.

    Returns
    -------
    zeros : ndarray, complex128, shape (nz,)
        Finite zeros, rad/s.
    poles : ndarray, complex128, shape (np,)
        Finite poles, rad/s.
    gain : float
        ``k`` in ``H(s) = k * prod(s - z) / prod(s - p)``.

    Raises
    ------
    CircuitError
        Multi-trial circuit, unknown output, singular circuit.
    """
    if circuit.trials != 1:
        raise CircuitError(f"transfer_function_zpk needs a single-trial circuit, this one has {circuit.trials} trials; "
                           "use circuit.trial(i)", field="circuit")
    circuit.validate(output)
    system = build_mna(circuit)
    if output not in system.node_index:
        raise CircuitError(f"output node {output!r} is not a node of the circuit", field="output")
    g, c, b, k = _reduced(system, system.node_index[output])
    w0 = _characteristic_omega(circuit)
    cs = w0 * c
    n = g.shape[0]
    poles = _finite_eigs(-g, cs) * w0
    ra = np.zeros((n + 1, n + 1))
    rb = np.zeros((n + 1, n + 1))
    ra[:n, :n] = -g
    ra[:n, n] = b
    ra[n, k] = -1.0
    rb[:n, :n] = cs
    zeros = _finite_eigs(ra, rb) * w0
    zeros, poles = _cancel(zeros, poles)
    zeros, poles = _clean(zeros), _clean(poles)
    # gain from a direct solve at s = j*w0 (a second point if the first is near a zero)
    best = None
    for s1 in (1j * w0, 1j * w0 * 1.37, (0.5 + 1j) * w0):
        m = g + s1 * c
        try:
            h = np.linalg.solve(m, b.astype(complex))[k]
        except np.linalg.LinAlgError:
            continue
        shape = np.prod(s1 - zeros) / np.prod(s1 - poles)
        if shape != 0 and np.isfinite(shape) and (best is None or abs(h) > best[0]):
            best = (abs(h), h / shape)
    if best is None:
        raise CircuitError("cannot evaluate the transfer function: the circuit is singular")
    gain = best[1]
    if best[0] == 0.0:
        return np.zeros(0, dtype=complex), poles, 0.0
    return zeros, poles, float(gain.real)
