"""Modified nodal analysis (MNA) stamps of a circuit: ``M(s) = G + s*C``.

Unknowns are the node voltages (ground excluded) followed by one branch
current per inductor, voltage source, supply, VCVS and op-amp, and one internal node
per op-amp macromodel with output resistance.  Stamps follow Ho, Ruehli and
Brennan, "The modified nodal approach to network analysis", IEEE Trans.
Circuits and Systems CAS-22(6), 1975, Table I; the ideal op-amp is a nullor
(row: ``V(plus) - V(minus) = 0``; column: free output current), see Vlach and
Singhal, *Computer Methods for Circuit Analysis and Design*, 2nd ed., Van
Nostrand Reinhold, 1994, sec. 2.6.  The macromodel row is the single-pole
open-loop gain written as ``(1/a0 + s/wt) * V(y) - (V(plus) - V(minus)) = 0``.

The right-hand side is 1 on the input source's branch row, so the solution is
the transfer function from the input to every unknown.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .errors import CircuitError
from .netlist import GROUND, Circuit, ElementKind


def _nonzero(v) -> bool:
    """Whether a stamp value (float, or ndarray over trials) is non-zero in any trial (NaN counts as non-zero)."""
    return bool(v.any()) if isinstance(v, np.ndarray) else v != 0


@dataclass
class MnaSystem:
    """Structure and stamp list of a circuit's MNA system.

    Attributes
    ----------
    size : int
        Number of unknowns ``n``.
    unknowns : list of str
        Label of each unknown: the node name for a node voltage,
        ``"I(<element>)"`` for a branch current, ``"<opamp>#o"`` for a
        macromodel internal node.
    node_index : dict of str to int
        Index of each node voltage among the unknowns.
    rhs_row : int
        Row of the input source's branch equation.
    trials : int
        Number of trials ``T``.
    entries : list of tuple
        ``(matrix, row, col, value)`` with ``matrix`` 0 for G, 1 for C and
        ``value`` a float or an ndarray of shape (T,).
    """

    size: int
    unknowns: list[str]
    node_index: dict[str, int]
    rhs_row: int
    trials: int
    entries: list[tuple[int, int, int, object]] = field(default_factory=list)

    def pattern(self) -> np.ndarray:
        """Structural non-zero pattern of ``G + s*C``, bool array of shape (n, n)."""
        pat = np.zeros((self.size, self.size), dtype=bool)
        for _, r, c, v in self.entries:
            if _nonzero(v):
                pat[r, c] = True
        return pat

    def stamp(self, sl: slice | None = None, rows=None, cols=None, *, trials_last: bool = False
              ) -> tuple[np.ndarray, np.ndarray]:
        """Assemble G and C for the trials in ``sl``.

        Parameters
        ----------
        sl : slice, optional
            Trials to assemble (default all).
        rows, cols : sequence of int, optional
            Sub-matrix to assemble (default the whole system).

        trials_last : bool
            Return shape (len(rows), len(cols), Tc) instead (each entry's
            trials contiguous).

        Returns
        -------
        G, C : ndarray, float64, shape (Tc, len(rows), len(cols))
            Conductance-like and capacitance-like parts; ``M(s) = G + s*C``.
        """
        t = self.trials if sl is None else len(range(*sl.indices(self.trials)))
        rows = range(self.size) if rows is None else rows
        cols = range(self.size) if cols is None else cols
        rmap = {r: i for i, r in enumerate(rows)}
        cmap = {c: i for i, c in enumerate(cols)}
        mats = np.zeros((2, len(rmap), len(cmap), t))
        for m, r, c, v in self.entries:
            i = rmap.get(r)
            j = cmap.get(c)
            if i is None or j is None:
                continue
            if isinstance(v, np.ndarray):
                mats[m, i, j] += v if sl is None else v[sl]
            else:
                mats[m, i, j] += v
        if trials_last:
            return mats[0], mats[1]
        mats = np.ascontiguousarray(mats.transpose(0, 3, 1, 2))
        return mats[0], mats[1]


def build_mna(circuit: Circuit) -> MnaSystem:
    """Build the MNA structure of ``circuit`` (validated first).

    Returns
    -------
    MnaSystem
    """
    circuit.validate()
    nodes = circuit.nodes
    node_index = {node: i for i, node in enumerate(nodes)}
    unknowns = list(nodes)
    entries: list[tuple[int, int, int, object]] = []
    rhs_row = -1

    def idx(node: str) -> int | None:
        return None if node == GROUND else node_index[node]

    def add(m: int, r, c, v) -> None:
        if r is not None and c is not None:
            entries.append((m, r, c, v))

    def conductance(m: int, p: str, n: str, g) -> None:
        i, j = idx(p), idx(n)
        add(m, i, i, g)
        add(m, j, j, g)
        neg = -g
        add(m, i, j, neg)
        add(m, j, i, neg)

    def new_unknown(label: str) -> int:
        unknowns.append(label)
        return len(unknowns) - 1

    def branch(k: int, p: str, n: str) -> None:
        """Current unknown k leaves node p into the branch and enters node n; row k gets V(p) - V(n)."""
        i, j = idx(p), idx(n)
        add(0, i, k, 1.0)
        add(0, j, k, -1.0)
        add(0, k, i, 1.0)
        add(0, k, j, -1.0)

    for el in circuit.elements:
        kind = el.kind
        if kind is ElementKind.RESISTOR:
            conductance(0, el.nodes[0], el.nodes[1], 1.0 / el.value)
        elif kind is ElementKind.CAPACITOR:
            conductance(1, el.nodes[0], el.nodes[1], el.value)
        elif kind is ElementKind.INDUCTOR:
            k = new_unknown(f"I({el.name})")
            branch(k, el.nodes[0], el.nodes[1])
            add(1, k, k, -el.value)
        elif kind is ElementKind.VOLTAGE_SOURCE:
            k = new_unknown(f"I({el.name})")
            branch(k, el.nodes[0], el.nodes[1])
            rhs_row = k
        elif kind is ElementKind.SUPPLY:
            k = new_unknown(f"I({el.name})")   # an AC short; its DC value enters only the DC solve
            branch(k, el.nodes[0], el.nodes[1])
        elif kind is ElementKind.VCVS:
            p, n, cp, cn = el.nodes
            k = new_unknown(f"I({el.name})")
            branch(k, p, n)
            add(0, k, idx(cp), -el.value)
            add(0, k, idx(cn), el.value)
        elif kind is ElementKind.VCCS:
            p, n, cp, cn = el.nodes
            gm = el.value
            add(0, idx(p), idx(cp), gm)
            add(0, idx(p), idx(cn), -gm)
            add(0, idx(n), idx(cp), -gm)
            add(0, idx(n), idx(cn), gm)
        elif kind is ElementKind.OPAMP:
            plus, minus, out = el.nodes
            model = el.value
            if model is None:
                k = new_unknown(f"I({el.name})")
                add(0, idx(out), k, 1.0)
                add(0, k, idx(plus), 1.0)
                add(0, k, idx(minus), -1.0)
                continue
            wt = 2.0 * np.pi * np.asarray(model.gbw_hz, dtype=float)
            inv_a0 = 1.0 / np.asarray(model.a0, dtype=float)
            inv_wt = 1.0 / wt
            inv_a0 = float(inv_a0) if inv_a0.ndim == 0 else inv_a0
            inv_wt = float(inv_wt) if inv_wt.ndim == 0 else inv_wt
            rout = np.asarray(model.rout_ohm, dtype=float)
            if np.all(rout == 0):
                y = idx(out)
            else:
                y = new_unknown(f"{el.name}#o")
                g = 1.0 / rout
                g = float(g) if g.ndim == 0 else g
                add(0, y, y, g)
                add(0, idx(out), idx(out), g)
                add(0, y, idx(out), -g)
                add(0, idx(out), y, -g)
            k = new_unknown(f"I({el.name})")
            add(0, y, k, 1.0)
            add(0, k, y, inv_a0)
            add(1, k, y, inv_wt)
            add(0, k, idx(plus), -1.0)
            add(0, k, idx(minus), 1.0)
    if rhs_row < 0:  # validate() guarantees a source; kept for safety
        raise CircuitError("the circuit has no input voltage source")
    return MnaSystem(len(unknowns), unknowns, node_index, rhs_row, circuit.trials, entries)
