"""DC operating point: node voltages with the supplies, the op-amps' offsets and bias currents.

The MNA system at ``s = 0`` (Ho, Ruehli and Brennan, IEEE Trans. CAS-22(6),
1975): capacitors are open, inductors short, the input source holds its DC
value (0 V unless given), each supply its voltage.  An op-amp's
:class:`~.netlist.OpAmpSources` add its offset ``vos`` in series with the
non-inverting input (the constraint row) and its bias current ``ib`` drawn
from each input node (the node rows); the single-pole macromodel keeps its
finite DC gain ``a0``.  This is what SPICE's ``.op`` computes for the same
linear circuit (Nagel, "SPICE2: A computer program to simulate semiconductor
circuits", UCB/ERL M520, 1975, DC analysis).

Superposition gives each group of sources' share in one solve with several
right-hand sides (:func:`dc_contributions`), e.g. the output offset caused
by each stage's op-amps.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Mapping

import numpy as np

from .errors import CircuitError
from .mna import MnaSystem, build_mna
from .netlist import GROUND, Circuit, ElementKind

CONDITION_LIMIT = 1e13
"""Largest condition number (after row and column equilibration) of a solvable DC system."""


@dataclass(frozen=True)
class DcSolution:
    """Node voltages and branch currents at DC.

    Attributes
    ----------
    voltages : dict of str to ndarray, shape (T,)
        Voltage of every node (ground excluded) to ground, V.
    currents : dict of str to ndarray, shape (T,)
        Current of every source, supply, VCVS and op-amp output branch, A
        (leaving the element's first node into the element).
    """

    voltages: dict[str, np.ndarray]
    currents: dict[str, np.ndarray]

    def voltage(self, node: str) -> np.ndarray:
        """Voltage of ``node`` (V, shape (T,)); ground is 0."""
        if node == GROUND:
            return np.zeros_like(next(iter(self.voltages.values())))
        try:
            return self.voltages[node]
        except KeyError:
            raise CircuitError(f"{node!r} is not a node of the circuit", field="node") from None


def _check_dc_paths(circuit: Circuit) -> None:
    """Raise naming a node that only capacitors (or inputs of controlled sources) connect."""
    parent = {node: node for node in circuit.nodes}
    parent[GROUND] = GROUND

    def find(a):
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for el in circuit.elements:
        if el.kind in (ElementKind.RESISTOR, ElementKind.INDUCTOR, ElementKind.VOLTAGE_SOURCE,
                       ElementKind.SUPPLY, ElementKind.VCVS):
            a, b = find(el.nodes[0]), find(el.nodes[1])
            if a != b:
                parent[a] = b
        elif el.kind is ElementKind.OPAMP:
            a = find(el.nodes[2])
            if a != find(GROUND):
                parent[a] = find(GROUND)
    ground = find(GROUND)
    for node in circuit.nodes:
        if find(node) != ground:
            users = [el.name for el in circuit.elements if node in el.nodes]
            raise CircuitError(f"node {node!r} has no DC path to ground (it connects to {', '.join(users)} "
                               "through capacitors or inputs only): its DC voltage is undefined", field="circuit")


def _rhs(circuit: Circuit, system: MnaSystem, active: set[str] | None, input_dc_v: float) -> np.ndarray:
    """Right-hand side (n,) of the DC system with the sources of the ``active`` elements (None: all)."""
    b = np.zeros(system.size)
    row = {label: i for i, label in enumerate(system.unknowns)}
    for el in circuit.elements:
        if active is not None and el.name not in active:
            continue
        if el.kind is ElementKind.VOLTAGE_SOURCE:
            b[row[f"I({el.name})"]] += input_dc_v
        elif el.kind is ElementKind.SUPPLY:
            b[row[f"I({el.name})"]] += float(el.value)
        elif el.kind is ElementKind.OPAMP and el.sources is not None:
            src = el.sources
            plus, minus, _ = el.nodes
            # ideal: V(+) + vos - V(-) = 0; macromodel: V(y)/a0 - (V(+) + vos - V(-)) = 0
            b[row[f"I({el.name})"]] += -src.vos_v if el.value is None else src.vos_v
            for node in (plus, minus):
                if node != GROUND:
                    b[system.node_index[node]] -= src.ib_a
    return b


def _solve(circuit: Circuit, rhs_sets: list[tuple[set[str] | None, float]]) -> tuple[MnaSystem, np.ndarray]:
    """Solve the DC system for each (active set, input DC volts); x of shape (K, T, n)."""
    circuit.validate()
    _check_dc_paths(circuit)
    system = build_mna(circuit)
    g, _ = system.stamp()                                                      # (T, n, n)
    r = np.max(np.abs(g), axis=2, keepdims=True)
    r[r == 0] = 1.0
    gs = g / r
    c = np.max(np.abs(gs), axis=1, keepdims=True)
    c[c == 0] = 1.0
    gs = gs / c
    cond = np.linalg.cond(gs)
    if not np.all(np.isfinite(cond) & (cond < CONDITION_LIMIT)):
        raise CircuitError("the circuit has no unique DC operating point (e.g. an integrator without DC "
                           "feedback, or a loop of supplies and inductors)", field="circuit")
    b = np.stack([_rhs(circuit, system, active, v) for active, v in rhs_sets])      # (K, n)
    bs = b[:, None, :] / r[None, :, :, 0]                                          # (K, T, n)
    y = np.linalg.solve(gs[None], bs[..., None])[..., 0]
    return system, y / c[None, :, 0, :]


def _solution(system: MnaSystem, x: np.ndarray) -> DcSolution:
    volts = {node: x[:, i].copy() for node, i in system.node_index.items()}
    currents = {label[2:-1]: x[:, i].copy() for i, label in enumerate(system.unknowns) if label.startswith("I(")}
    return DcSolution(volts, currents)


def dc_operating_point(circuit: Circuit, *, input_dc_v: float = 0.0) -> DcSolution:
    """DC node voltages of ``circuit`` with every supply, offset and bias current on.

    Parameters
    ----------
    circuit : Circuit
        May carry ``T`` trials.
    input_dc_v : float
        DC voltage of the input source, V.

    Returns
    -------
    DcSolution

    Raises
    ------
    CircuitError
        A node without a DC path to ground, or no unique operating point.
    """
    v = float(input_dc_v)
    if not np.isfinite(v):
        raise CircuitError("input_dc_v must be finite (V)", field="input_dc_v")
    system, x = _solve(circuit, [(None, v)])
    return _solution(system, x[0])


def dc_contributions(circuit: Circuit, groups: Mapping[str, Iterable[str]], *,
                     input_dc_v: float = 0.0) -> dict[str, DcSolution]:
    """Each group of sources' share of the DC operating point (superposition, one solve).

    Parameters
    ----------
    circuit : Circuit
    groups : mapping of str to iterable of str
        Group name -> names of the elements whose DC sources (supplies, the
        input source, op-amp offsets and bias currents) are on in that group.
    input_dc_v : float
        DC voltage of the input source when a group includes it, V.

    Returns
    -------
    dict of str to DcSolution
        The voltages each group causes alone; the groups' shares add up to
        :func:`dc_operating_point` when together they cover every source once.
    """
    names = {el.name for el in circuit.elements}
    sets = []
    for key, members in groups.items():
        members = set(members)
        unknown = sorted(members - names)
        if unknown:
            raise CircuitError(f"group {key!r} names {', '.join(unknown)}, not elements of the circuit",
                               field="groups")
        sets.append((members, float(input_dc_v)))
    if not sets:
        return {}
    system, x = _solve(circuit, sets)
    return {key: _solution(system, x[i]) for i, key in enumerate(groups)}


__all__ = ["DcSolution", "dc_contributions", "dc_operating_point"]
