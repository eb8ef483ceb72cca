"""Partition of an MNA system into stages that can be solved one after another.

The structural pattern of ``M(s) = G + s*C`` is permuted to block lower
triangular form: a maximum bipartite matching pairs each equation with an
unknown (Duff, "On algorithms for obtaining a maximum transversal", ACM TOMS
7(3), 1981) and the strongly connected components of the resulting
dependency graph are the diagonal blocks (Tarjan, "Depth-first search and
linear graph algorithms", SIAM J. Computing 1(2), 1972); together this is the
Dulmage-Mendelsohn decomposition (Duff, Erisman and Reid, *Direct Methods for
Sparse Matrices*, 2nd ed., Oxford, 2017, ch. 6).

In an active filter the blocks are the stages: an ideal op-amp output (or a
macromodel output with zero output resistance, a grounded VCVS output, the
input source) is a voltage fixed by its own stage, and the next stage only
reads it.  The op-amp output currents form separate trailing blocks that no
voltage depends on.  Passive sections that load each other land in one block.
The partition is exact: it is a reordering of the same equations.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from .errors import CircuitError
from .mna import MnaSystem

RHS = -1
"""Pseudo-unknown standing for the input (the right-hand side, value 1)."""


@dataclass
class Block:
    """One diagonal block of the block-triangular MNA system.

    Attributes
    ----------
    cols : list of int
        Unknowns solved by this block.
    rows : list of int
        Equations of this block (matched to ``cols``, same length).
    inputs : list of int
        Unknowns of earlier blocks that appear in these equations, and
        :data:`RHS` when the input source's row is one of them.
    needed : list of int
        Unknowns of this block that the requested output depends on.
    """

    cols: list[int]
    rows: list[int]
    inputs: list[int]
    needed: list[int]


def decompose(system: MnaSystem, output_col: int) -> list[Block]:
    """Blocks needed to compute unknown ``output_col``, in solution order.

    Parameters
    ----------
    system : MnaSystem
    output_col : int
        Index of the requested unknown.

    Returns
    -------
    list of Block
        Only the blocks the output depends on, earliest first.

    Raises
    ------
    CircuitError
        If the system is structurally singular (an unknown no equation can
        determine, e.g. an op-amp with both inputs tied to fixed voltages).
    """
    pat = system.pattern()
    blocks = _decompose_pattern(pat.tobytes(), system.size, system.rhs_row, output_col, tuple(system.unknowns))
    return [Block(list(b.cols), list(b.rows), list(b.inputs), list(b.needed)) for b in blocks]


@functools.lru_cache(maxsize=256)
def _decompose_pattern(pattern: bytes, n: int, rhs_row: int, output_col: int, unknowns: tuple[str, ...]
                       ) -> tuple[Block, ...]:
    """:func:`decompose` of a structure (memoized: circuits of one topology share it)."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components, maximum_bipartite_matching

    pat = np.frombuffer(pattern, dtype=bool).reshape(n, n)
    match = maximum_bipartite_matching(csr_matrix(pat.astype(np.int8)), perm_type="column")
    if np.any(match < 0):
        bad_rows = np.flatnonzero(match < 0)
        matched_cols = set(int(c) for c in match if c >= 0)
        bad_cols = [c for c in range(n) if c not in matched_cols]
        names = ", ".join(unknowns[c] for c in bad_cols) or unknowns[int(bad_rows[0])]
        raise CircuitError(f"the circuit is structurally singular: no equation determines {names}")
    row_of = np.empty(n, dtype=int)
    row_of[match] = np.arange(n)
    # dep[j, i]: unknown j's equation reads unknown i
    dep = pat[row_of, :].copy()
    np.fill_diagonal(dep, False)
    ncomp, labels = connected_components(csr_matrix(dep.T.astype(np.int8)), directed=True, connection="strong")
    members: list[list[int]] = [[] for _ in range(ncomp)]
    for col in range(n):
        members[labels[col]].append(col)
    # inputs of each component (columns outside the component read by its rows)
    comp_inputs: list[list[int]] = []
    for comp in range(ncomp):
        cols = members[comp]
        rows = row_of[cols]
        reads = np.flatnonzero(pat[rows, :].any(axis=0))
        ins = [int(c) for c in reads if labels[c] != comp]
        if rhs_row in set(int(r) for r in rows):
            ins.append(RHS)
        comp_inputs.append(ins)
    # needed unknowns, walking back from the output (depth-first over inputs)
    needed: dict[int, set[int]] = {}
    stack = [output_col]
    seen = set()
    while stack:
        col = stack.pop()
        if col in seen or col == RHS:
            continue
        seen.add(col)
        comp = labels[col]
        needed.setdefault(comp, set()).add(col)
        if len(needed[comp]) == 1:
            stack.extend(comp_inputs[comp])
    # topological order of the needed components (Kahn)
    comps = list(needed)
    indeg = {c: 0 for c in comps}
    users: dict[int, list[int]] = {c: [] for c in comps}
    for c in comps:
        srcs = {labels[i] for i in comp_inputs[c] if i != RHS}
        for s in srcs:
            if s in indeg:
                indeg[c] += 1
                users[s].append(c)
    order = []
    ready = [c for c in comps if indeg[c] == 0]
    while ready:
        c = ready.pop()
        order.append(c)
        for u in users[c]:
            indeg[u] -= 1
            if indeg[u] == 0:
                ready.append(u)
    blocks = []
    for c in order:
        cols = members[c]
        blocks.append(Block(cols=list(cols), rows=[int(row_of[j]) for j in cols],
                            inputs=comp_inputs[c], needed=sorted(needed[c])))
    return tuple(blocks)


def degree_bounds(g_pat: np.ndarray, c_pat: np.ndarray) -> tuple[int, int]:
    """Lowest and highest power of ``s`` that ``det(G + s*C)`` can contain.

    Computed from the structure only, as the minimum and maximum number of
    C-entries over the perfect matchings of the pattern (assignment problem;
    Murota, *Matrices and Matroids for Systems Analysis*, Springer, 2000,
    sec. 2.2 on the degree of a determinant of a matrix pencil).

    Parameters
    ----------
    g_pat, c_pat : ndarray of bool, shape (n, n)
        Where G and C are structurally non-zero.

    Returns
    -------
    (lo, hi) : tuple of int
        ``(-1, -1)`` when the determinant is structurally zero.
    """
    from scipy.optimize import linear_sum_assignment

    n = g_pat.shape[0]
    if n == 0:
        return 0, 0
    any_pat = g_pat | c_pat
    big = 4.0 * n + 4.0
    # highest degree: reward C entries
    cost_hi = np.where(c_pat, -1.0, 0.0)
    cost_hi = np.where(any_pat, cost_hi, big)
    r, c = linear_sum_assignment(cost_hi)
    if not np.all(any_pat[r, c]):
        return -1, -1
    hi = int(round(-cost_hi[r, c].sum()))
    # lowest degree: C-only entries cost 1
    cost_lo = np.where(g_pat, 0.0, 1.0)
    cost_lo = np.where(any_pat, cost_lo, big)
    r, c = linear_sum_assignment(cost_lo)
    lo = int(round(cost_lo[r, c].sum()))
    return lo, hi
