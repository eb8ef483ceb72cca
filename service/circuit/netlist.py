"""Netlist model: named nodes, elements, per-trial values.

A :class:`Circuit` is an ordered list of elements between named nodes (ground
is ``"0"``).  Every numeric value is a scalar or a one-dimensional array with
one value per Monte Carlo trial; all arrays of one circuit share the same
length ``T`` (:attr:`Circuit.trials`).

The element set follows the modified nodal analysis of Ho, Ruehli and
Brennan [1]_: R, C, L, one independent voltage source (the input), VCVS,
VCCS, the ideal operational amplifier as a nullor (Tellegen; see Chua and
Lin [2]_, ch. 3) and a single-pole op-amp macromodel
``A(s) = a0 / (1 + s*a0/wt)``, ``wt = 2*pi*gbw_hz`` [3]_.

References
----------
.. [1] C.-W. Ho, A. E. Ruehli, P. A. Brennan, "The modified nodal approach to
   network analysis", IEEE Trans. Circuits and Systems, CAS-22(6), 1975.
.. [2] L. O. Chua, P.-M. Lin, *Computer-Aided Analysis of Electronic
   Circuits*, Prentice-Hall, 1975.
.. [3] S. Franco, *Design with Operational Amplifiers and Analog Integrated
   Circuits*, 4th ed., McGraw-Hill, 2015, sec. 6.1 (open-loop gain
   ``a(jf) = a0 / (1 + jf/fb)``, ``ft = a0*fb``).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace
from enum import Enum
from typing import Mapping

import numpy as np

from .errors import CircuitError

GROUND = "0"

_NODE_RE = re.compile(r"^[A-Za-z0-9_.:#+\-\[\]<>/]+$")
_NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_.:#+\-\[\]]*$")


class ElementKind(str, Enum):
    """Kind of a circuit element."""

    RESISTOR = "resistor"
    CAPACITOR = "capacitor"
    INDUCTOR = "inductor"
    VOLTAGE_SOURCE = "voltage_source"
    VCVS = "vcvs"
    VCCS = "vccs"
    OPAMP = "opamp"
    SUPPLY = "supply"


@dataclass(frozen=True)
class OpAmpModel:
    """Single-pole operational-amplifier macromodel.

    ``A(s) = a0 / (1 + s*a0/wt)`` with ``wt = 2*pi*gbw_hz`` (rad/s), followed
    by an output resistance ``rout_ohm`` in series with the output.  See
    Franco, *Design with Operational Amplifiers*, 4th ed., sec. 6.1.

    Parameters
    ----------
    gbw_hz : float or ndarray, shape (T,)
        Gain-bandwidth product, Hz (> 0).
    a0 : float or ndarray, shape (T,)
        DC open-loop gain, V/V (> 0).
    rout_ohm : float or ndarray, shape (T,)
        Output resistance, ohm (>= 0).  Zero (in every trial) makes the
        output an ideal voltage source.
    name : str
        Model name used for the SPICE subcircuit.
    """

    gbw_hz: float | np.ndarray
    a0: float | np.ndarray = 1e5
    rout_ohm: float | np.ndarray = 0.0
    name: str = "OPAMP"


@dataclass(frozen=True)
class OpAmpSources:
    """Input-referred sources of a real op-amp: noise densities and DC errors.

    The voltage sources (noise ``en`` and offset ``vos``) are in series with
    the non-inverting input (``V(+)`` as the amplifier sees it is
    ``V(+) + vos + en``); the current sources (noise ``in`` and bias ``ib``)
    flow from each input node into the op-amp, independently at the two
    inputs (the usual input-referred op-amp noise model: Motchenbacher and
    Connelly, *Low-Noise Electronic System Design*, Wiley, 1993, ch. 2, from
    memory).  Noise densities with 1/f corners follow
    ``e^2(f) = en^2 (1 + fc/f)`` (same form for ``in``).

    Attributes
    ----------
    en_v_rthz : float
        Input voltage noise density, V/sqrt(Hz) (>= 0).
    in_a_rthz : float
        Input current noise density at each input, A/sqrt(Hz) (>= 0).
    en_corner_hz, in_corner_hz : float
        1/f corner frequencies, Hz (>= 0; 0 = white).
    vos_v : float
        Input offset voltage, V (either sign).
    ib_a : float
        Input bias current into each input, A (either sign).
    """

    en_v_rthz: float = 0.0
    in_a_rthz: float = 0.0
    en_corner_hz: float = 0.0
    in_corner_hz: float = 0.0
    vos_v: float = 0.0
    ib_a: float = 0.0

    def __post_init__(self):
        for name in ("en_v_rthz", "in_a_rthz", "en_corner_hz", "in_corner_hz", "vos_v", "ib_a"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float, np.floating, np.integer)):
                raise CircuitError(f"{name} must be a number, got {v!r}", field=name)
            if not np.isfinite(v):
                raise CircuitError(f"{name} must be finite, got {v!r}", field=name)
            if name not in ("vos_v", "ib_a") and v < 0:
                raise CircuitError(f"{name} must not be negative, got {v!r}", field=name)
            object.__setattr__(self, name, float(v))

    @property
    def noisy(self) -> bool:
        """Whether any noise density is non-zero."""
        return self.en_v_rthz > 0 or self.in_a_rthz > 0


@dataclass(frozen=True)
class Element:
    """One element of a circuit.

    Attributes
    ----------
    name : str
        Element name, as given (the component reference, e.g. ``"R1"``).
    kind : ElementKind
        What the element is.
    nodes : tuple of str
        Terminal nodes: ``(p, n)`` for R, C, L and the source;
        ``(p, n, cp, cn)`` for VCVS and VCCS; ``(plus, minus, output)`` for
        an op-amp.
    value : float, ndarray of shape (T,), OpAmpModel or None
        Ohm, farad, henry, V/V (VCVS), siemens (VCCS), the AC amplitude in
        volts (source), the DC voltage (supply), the op-amp model (``None``
        = ideal nullor).
    sources : OpAmpSources or None
        Op-amps only: input-referred noise and DC error sources (None: none).
    """

    name: str
    kind: ElementKind
    nodes: tuple[str, ...]
    value: object
    sources: OpAmpSources | None = None


def _as_value(name: str, what: str, value, *, positive: bool = False, nonnegative: bool = False):
    """Validate a scalar or per-trial value; return a float or a float ndarray (T,)."""
    arr = np.asarray(value, dtype=float) if not isinstance(value, np.ndarray) else value.astype(float, copy=False)
    if arr.ndim > 1:
        raise CircuitError(f"{name}: {what} must be a scalar or a 1-D array with one value per trial, got shape {arr.shape}")
    if arr.ndim == 1 and arr.size == 0:
        raise CircuitError(f"{name}: {what} array is empty")
    if not np.all(np.isfinite(arr)):
        raise CircuitError(f"{name}: {what} must be finite")
    if positive and not np.all(arr > 0):
        raise CircuitError(f"{name}: {what} must be positive, got {_describe(arr)}")
    if nonnegative and not np.all(arr >= 0):
        raise CircuitError(f"{name}: {what} must be non-negative, got {_describe(arr)}")
    if arr.ndim == 0:
        return float(arr)
    arr = arr.copy()
    arr.flags.writeable = False
    return arr


def _describe(arr: np.ndarray) -> str:
    if arr.ndim == 0:
        return repr(float(arr))
    return f"minimum {float(np.min(arr))!r} over {arr.size} trials"


def _trial_len(value) -> int | None:
    if isinstance(value, np.ndarray):
        return int(value.shape[0])
    return None


_UNITS = {
    ElementKind.RESISTOR: "resistance (ohm)",
    ElementKind.CAPACITOR: "capacitance (F)",
    ElementKind.INDUCTOR: "inductance (H)",
}


class Circuit:
    """A linear circuit for AC analysis, possibly with per-trial values.

    Parameters
    ----------
    title : str
        Free text; the first line of an exported SPICE netlist.

    Notes
    -----
    Elements are added with the ``add_*`` methods, which validate names,
    nodes and values immediately and raise :class:`CircuitError`.  Topology
    checks that need the whole circuit (a missing input, floating nodes)
    run in :meth:`validate`, which every analysis calls.
    """

    def __init__(self, title: str = "circuit"):
        self.title = str(title)
        self._elements: list[Element] = []
        self._names: set[str] = set()
        self._trials = 1
        self._trial_owner: str | None = None

    # ------------------------------------------------------------------ views
    @property
    def elements(self) -> tuple[Element, ...]:
        """Ordered, read-only view of the elements."""
        return tuple(self._elements)

    @property
    def nodes(self) -> tuple[str, ...]:
        """Node names in order of first appearance, ground ``"0"`` excluded."""
        seen: dict[str, None] = {}
        for el in self._elements:
            for node in el.nodes:
                if node != GROUND:
                    seen.setdefault(node, None)
        return tuple(seen)

    @property
    def trials(self) -> int:
        """Number of trials ``T``: 1 if every value is scalar, else the common array length."""
        return self._trials

    @property
    def input_source(self) -> Element | None:
        """The independent voltage source, or ``None`` if not added yet."""
        for el in self._elements:
            if el.kind is ElementKind.VOLTAGE_SOURCE:
                return el
        return None

    def element(self, name: str) -> Element:
        """The element called ``name``; :class:`CircuitError` if there is none."""
        for el in self._elements:
            if el.name == name:
                return el
        raise CircuitError(f"no element named {name!r}")

    def __repr__(self) -> str:
        return f"Circuit(title={self.title!r}, elements={len(self._elements)}, trials={self._trials})"

    # ------------------------------------------------------------ building
    def _check_name(self, name: str) -> str:
        if not isinstance(name, str) or not _NAME_RE.match(name):
            raise CircuitError(f"element name {name!r} must start with a letter and contain no spaces or SPICE delimiters")
        if name in self._names:
            raise CircuitError(f"{name}: duplicate element name")
        return name

    def _check_nodes(self, name: str, *nodes: str) -> tuple[str, ...]:
        out = []
        for node in nodes:
            if not isinstance(node, str) or not _NODE_RE.match(node):
                raise CircuitError(f"{name}: node name {node!r} is not valid (non-empty, no spaces or SPICE delimiters)")
            out.append(node)
        return tuple(out)

    def _register_trials(self, name: str, *values) -> None:
        for value in values:
            n = _trial_len(value)
            if n is None:
                continue
            if self._trial_owner is None and self._trials == 1:
                self._trials = n
                self._trial_owner = name
            elif n != self._trials:
                raise CircuitError(
                    f"{name}: value has {n} trials but {self._trial_owner} has {self._trials}; "
                    "every per-trial array of a circuit must have the same length"
                )

    def _append(self, el: Element, *values) -> Element:
        self._register_trials(el.name, *values)
        self._elements.append(el)
        self._names.add(el.name)
        return el

    def _add_two_terminal(self, kind: ElementKind, name, p, n, value) -> Element:
        name = self._check_name(name)
        nodes = self._check_nodes(name, p, n)
        if p == n:
            raise CircuitError(f"{name}: both terminals on node {p!r}")
        v = _as_value(name, _UNITS[kind], value, positive=True)
        return self._append(Element(name, kind, nodes, v), v)

    def add_resistor(self, name: str, p: str, n: str, value) -> Element:
        """Add a resistor of ``value`` ohm (scalar or shape (T,), > 0)."""
        return self._add_two_terminal(ElementKind.RESISTOR, name, p, n, value)

    def add_capacitor(self, name: str, p: str, n: str, value) -> Element:
        """Add a capacitor of ``value`` farad (scalar or shape (T,), > 0)."""
        return self._add_two_terminal(ElementKind.CAPACITOR, name, p, n, value)

    def add_inductor(self, name: str, p: str, n: str, value) -> Element:
        """Add an inductor of ``value`` henry (scalar or shape (T,), > 0)."""
        return self._add_two_terminal(ElementKind.INDUCTOR, name, p, n, value)

    def add_voltage_source(self, name: str, p: str, n: str, ac: float = 1.0) -> Element:
        """Add the input: an independent voltage source of AC amplitude ``ac`` volts.

        Transfer functions are ``V(output) / V(p, n)``, so the amplitude only
        matters for the exported netlist.  A circuit has exactly one.
        """
        name = self._check_name(name)
        nodes = self._check_nodes(name, p, n)
        if p == n:
            raise CircuitError(f"{name}: both terminals on node {p!r}")
        if self.input_source is not None:
            raise CircuitError(f"{name}: the circuit already has an input source ({self.input_source.name}); exactly one is allowed")
        v = _as_value(name, "AC amplitude (V)", ac)
        if isinstance(v, np.ndarray) or v == 0.0:
            raise CircuitError(f"{name}: AC amplitude must be a non-zero scalar")
        return self._append(Element(name, ElementKind.VOLTAGE_SOURCE, nodes, v))

    def add_supply(self, name: str, p: str, n: str, dc_v: float) -> Element:
        """Add a supply rail: ``V(p) - V(n) = dc_v`` volts at DC, an AC short (zero AC amplitude).

        Supplies take part in the DC operating point (:mod:`.dc`) and are
        written to the SPICE netlist; AC and noise analyses see a short.
        """
        name = self._check_name(name)
        nodes = self._check_nodes(name, p, n)
        if p == n:
            raise CircuitError(f"{name}: both terminals on node {p!r}")
        v = _as_value(name, "DC voltage (V)", dc_v)
        if isinstance(v, np.ndarray):
            raise CircuitError(f"{name}: DC voltage must be a scalar")
        return self._append(Element(name, ElementKind.SUPPLY, nodes, v))

    def add_vcvs(self, name: str, p: str, n: str, cp: str, cn: str, gain) -> Element:
        """Add a VCVS: ``V(p) - V(n) = gain * (V(cp) - V(cn))`` (gain in V/V)."""
        name = self._check_name(name)
        nodes = self._check_nodes(name, p, n, cp, cn)
        if p == n:
            raise CircuitError(f"{name}: both output terminals on node {p!r}")
        v = _as_value(name, "gain (V/V)", gain)
        return self._append(Element(name, ElementKind.VCVS, nodes, v), v)

    def add_vccs(self, name: str, p: str, n: str, cp: str, cn: str, gm) -> Element:
        """Add a VCCS: current ``gm * (V(cp) - V(cn))`` (gm in siemens) flows from ``p`` through the source to ``n``."""
        name = self._check_name(name)
        nodes = self._check_nodes(name, p, n, cp, cn)
        if p == n:
            raise CircuitError(f"{name}: both output terminals on node {p!r}")
        v = _as_value(name, "transconductance (S)", gm)
        return self._append(Element(name, ElementKind.VCCS, nodes, v), v)

    def add_opamp(self, name: str, plus: str, minus: str, output: str, model: OpAmpModel | None = None,
                  sources: OpAmpSources | None = None) -> Element:
        """Add an operational amplifier.

        Parameters
        ----------
        name : str
            Reference, e.g. ``"U1"``.
        plus, minus, output : str
            Non-inverting input, inverting input and output nodes; the output
            is referenced to ground.
        model : OpAmpModel or None
            ``None`` for the ideal op-amp (a nullor: ``V(plus) = V(minus)``,
            no input current, any output current).
        """
        name = self._check_name(name)
        nodes = self._check_nodes(name, plus, minus, output)
        if output == GROUND:
            raise CircuitError(f"{name}: output cannot be ground")
        if plus == minus:
            raise CircuitError(f"{name}: both inputs on node {plus!r}")
        values = ()
        if model is not None:
            if not isinstance(model, OpAmpModel):
                raise CircuitError(f"{name}: model must be an OpAmpModel or None")
            model = OpAmpModel(
                gbw_hz=_as_value(name, "gbw_hz", model.gbw_hz, positive=True),
                a0=_as_value(name, "a0", model.a0, positive=True),
                rout_ohm=_as_value(name, "rout_ohm", model.rout_ohm, nonnegative=True),
                name=str(model.name),
            )
            rout = np.asarray(model.rout_ohm)
            if rout.ndim and np.any(rout == 0) and np.any(rout > 0):
                raise CircuitError(f"{name}: rout_ohm must be zero in every trial or positive in every trial")
            values = (model.gbw_hz, model.a0, model.rout_ohm)
        if sources is not None and not isinstance(sources, OpAmpSources):
            raise CircuitError(f"{name}: sources must be an OpAmpSources or None")
        return self._append(Element(name, ElementKind.OPAMP, nodes, model, sources), *values)

    # ---------------------------------------------------------- derivation
    def with_values(self, values: Mapping[str, object]) -> "Circuit":
        """A new circuit with some element values replaced.

        Parameters
        ----------
        values : mapping of str to float or ndarray (T,)
            Keys are element names (``"R1"``) or op-amp model fields
            (``"U1.gbw_hz"``, ``"U1.a0"``, ``"U1.rout_ohm"``).  An ideal
            op-amp given a model field becomes a macromodel with the defaults
            of :class:`OpAmpModel` for the other fields (``gbw_hz`` is then
            required).

        Returns
        -------
        Circuit
            A copy; this circuit is unchanged.
        """
        by_name: dict[str, object] = {}
        model_fields: dict[str, dict[str, object]] = {}
        for key, val in values.items():
            if "." in key:
                ref, field = key.split(".", 1)
                if field not in ("gbw_hz", "a0", "rout_ohm"):
                    raise CircuitError(f"{key}: unknown op-amp model field {field!r} (gbw_hz, a0, rout_ohm)")
                model_fields.setdefault(ref, {})[field] = val
            else:
                by_name[key] = val
        known = {el.name: el for el in self._elements}
        for ref in list(by_name) + list(model_fields):
            if ref not in known:
                raise CircuitError(f"{ref}: no such element")
        for ref in model_fields:
            if known[ref].kind is not ElementKind.OPAMP:
                raise CircuitError(f"{ref}: model fields apply to op-amps only")
        out = Circuit(self.title)
        for el in self._elements:
            if el.kind is ElementKind.OPAMP:
                model = el.value
                if el.name in by_name:
                    model = by_name[el.name]
                if el.name in model_fields:
                    fields = model_fields[el.name]
                    if model is None:
                        if "gbw_hz" not in fields:
                            raise CircuitError(f"{el.name}: ideal op-amp needs gbw_hz to become a macromodel")
                        model = OpAmpModel(**fields)
                    else:
                        model = replace(model, **fields)
                out.add_opamp(el.name, *el.nodes, model=model, sources=el.sources)
                continue
            value = by_name.get(el.name, el.value)
            if el.kind is ElementKind.RESISTOR:
                out.add_resistor(el.name, *el.nodes, value)
            elif el.kind is ElementKind.CAPACITOR:
                out.add_capacitor(el.name, *el.nodes, value)
            elif el.kind is ElementKind.INDUCTOR:
                out.add_inductor(el.name, *el.nodes, value)
            elif el.kind is ElementKind.VOLTAGE_SOURCE:
                out.add_voltage_source(el.name, *el.nodes, value)
            elif el.kind is ElementKind.SUPPLY:
                out.add_supply(el.name, *el.nodes, value)
            elif el.kind is ElementKind.VCVS:
                out.add_vcvs(el.name, *el.nodes, value)
            elif el.kind is ElementKind.VCCS:
                out.add_vccs(el.name, *el.nodes, value)
        return out

    def with_opamp_sources(self, sources: Mapping[str, OpAmpSources | None]) -> "Circuit":
        """A new circuit with the input-referred sources of some op-amps replaced.

        Parameters
        ----------
        sources : mapping of str to OpAmpSources or None
            Op-amp name -> its sources (None removes them).

        Returns
        -------
        Circuit
            A copy; this circuit is unchanged.
        """
        known = {el.name: el for el in self._elements}
        for ref, src in sources.items():
            if ref not in known:
                raise CircuitError(f"{ref}: no such element")
            if known[ref].kind is not ElementKind.OPAMP:
                raise CircuitError(f"{ref}: input-referred sources apply to op-amps only")
            if src is not None and not isinstance(src, OpAmpSources):
                raise CircuitError(f"{ref}: sources must be an OpAmpSources or None")
        out = self.with_values({})
        out._elements = [replace(el, sources=sources[el.name]) if el.name in sources else el
                         for el in out._elements]
        return out

    def trial(self, index: int) -> "Circuit":
        """A single-trial circuit holding the values of trial ``index``."""
        if not -self._trials <= index < self._trials:
            raise CircuitError(f"trial {index} out of range for a circuit of {self._trials} trials", field="trial")
        pick = {}
        for el in self._elements:
            if el.kind is ElementKind.OPAMP and el.value is not None:
                m = el.value
                for f in ("gbw_hz", "a0", "rout_ohm"):
                    v = getattr(m, f)
                    if isinstance(v, np.ndarray):
                        pick[f"{el.name}.{f}"] = float(v[index])
            elif isinstance(el.value, np.ndarray):
                pick[el.name] = float(el.value[index])
        return self.with_values(pick)

    # ----------------------------------------------------------- checking
    def validate(self, output: str | None = None) -> None:
        """Check the whole circuit; raise :class:`CircuitError` naming the fault.

        Checks: there is an input source; ``output`` (if given) is a node of
        the circuit; every node has a path to ground through elements that
        fix node voltages (R, C, L, sources, VCVS and op-amp outputs; a node
        reached only by op-amp or controlled-source inputs, or only by VCCS
        outputs, is floating).
        """
        if self.input_source is None:
            raise CircuitError("the circuit has no input voltage source; add one with add_voltage_source")
        nodes = self.nodes
        if output is not None and output not in nodes:
            raise CircuitError(f"output node {output!r} is not a node of the circuit", field="output")
        parent = {node: node for node in nodes}
        parent[GROUND] = GROUND

        def find(a: str) -> str:
            while parent[a] != a:
                parent[a] = parent[parent[a]]
                a = parent[a]
            return a

        def union(a: str, b: str) -> None:
            ra, rb = find(a), find(b)
            if ra != rb:
                parent[ra] = rb

        for el in self._elements:
            if el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR, ElementKind.INDUCTOR,
                           ElementKind.VOLTAGE_SOURCE, ElementKind.VCVS, ElementKind.SUPPLY):
                union(el.nodes[0], el.nodes[1])
            elif el.kind is ElementKind.OPAMP:
                union(el.nodes[2], GROUND)
        ground = find(GROUND)
        for node in nodes:
            if find(node) != ground:
                users = [el.name for el in self._elements if node in el.nodes]
                raise CircuitError(
                    f"node {node!r} is floating: no path to ground through R, C, L, sources or op-amp outputs "
                    f"(it connects to {', '.join(users)})"
                )


def values_for_trials(value, trials: int, sl: slice | None = None) -> np.ndarray:
    """Broadcast a scalar or (T,) value to a float array of shape (len(sl),)."""
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        n = trials if sl is None else len(range(*sl.indices(trials)))
        return np.full(n, float(arr))
    return arr if sl is None else arr[sl]


__all__ = ["Circuit", "Element", "ElementKind", "OpAmpModel", "OpAmpSources", "GROUND", "values_for_trials"]
