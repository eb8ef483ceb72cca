"""Supplies: the filter on the board's rails, its DC operating point and output offsets.

Split rails (``v_neg < 0 < v_pos``) leave the circuit as designed: signal
ground is 0 V.  A single rail (``v_neg = 0``) gets a generic transformation
at the cascade level, the same for every topology (the usual single-supply
practice: Mancini (ed.), *Op Amps for Everyone*, TI 2002, ch. 4
"Single-supply op amp design techniques"; Horowitz and Hill, *The Art of
Electronics*, 3rd ed., 2015, sec. 4.6, from memory):

- a mid-rail node ``vmid``: a divider of two equal resistors across the
  rail with a decoupling capacitor, buffered by a follower op-amp
  (``mid_rail="buffered"``, the default: a low-impedance signal ground) or
  used directly (``"divider"``);
- every element of the stages that returned to ground returns to ``vmid``
  (grounded resistors and capacitors, op-amp reference inputs);
- the input: when no op-amp output's DC level depends on the input's DC
  level (the first stage blocks DC), the source stays ground-referenced;
  otherwise a response with no DC passband (highpass, bandpass) gets a
  coupling capacitor and a bias resistor to ``vmid`` (``"ac"``), and one
  that passes DC (lowpass, bandstop) is driven from a source referred to
  mid-rail (``"dc"``; the netlist's ``VIN`` sits between ``in`` and ``vmid``).

New parts continue the design's numbering (``R<n+1>``, ``C<m+1>``, ``U<k+1>``)
and join the BOM.  The DC operating point (:func:`service.circuit.dc_operating_point`)
places every op-amp output; each must lie within its output range (the
rails less the op-amp's ``rail_headroom_v``, and its ``output_swing_v``
about the bias point when given).  The output offset of every stage (the
op-amps' ``vos_v`` and ``ib_a``) comes from the same solve, by superposition
per stage.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

import numpy as np

from service.circuit import (GROUND, Circuit, ElementKind, ac_response, dc_contributions, dc_operating_point,
                             to_spice)
from service.components import series_values_in_range
from service.realization.analysis import StagePlan, cascade_circuit
from service.realization.cascade import analysis_grid
from service.realization.errors import RealizationError
from service.realization.opamp import FIGURES, OpAmpSpec, check_figures, sources_of
from service.realization.results import Component, Design, DesignWarning, OpAmpUse

#: Largest rail magnitude accepted, V.
MAX_RAIL_V = 100.0
#: Total span above which the usual high-voltage caution is shown, V (the SELV limit for DC, IEC 61140, from memory).
CAUTION_SPAN_V = 60.0
#: Resistance of the mid-rail divider and of the input bias resistor, ohm (nearest value of the design's series).
BIAS_RESISTANCE_OHM = 100e3
#: The decoupling capacitor puts the divider's corner this factor below the lowest section frequency.
DECOUPLING_FACTOR = 100.0
#: The input coupling corner sits this factor below the lowest passband frequency (first try).
COUPLING_FACTOR = 50.0
#: Largest change of the passband response the input coupling may cause, dB.
COUPLING_CHANGE_DB = 0.005
#: Range of the input coupling capacitor, F (it may exceed the filter's capacitor range: a film or
#: electrolytic part, noted in the warnings).
COUPLING_RANGE_F = (1e-9, 1e-3)
#: An op-amp output whose DC level moves less than this per volt of input DC is DC-isolated from the input.
DC_ISOLATION = 1e-9

MID_RAIL_MODES = ("buffered", "divider")
INPUT_COUPLINGS = ("auto", "dc", "ac", "none")


@dataclass(frozen=True)
class Supply:
    """The board's supply rails.

    Attributes
    ----------
    v_pos, v_neg : float
        Rail voltages, V (``v_neg <= 0 < v_pos``; ``v_neg = 0`` is a single rail).
    """

    v_pos: float
    v_neg: float = 0.0

    def __post_init__(self):
        for name in ("v_pos", "v_neg"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise RealizationError(f"supply.{name} must be a finite number of volts", field=f"supply.{name}")
            if abs(v) > MAX_RAIL_V:
                raise RealizationError(f"supply.{name} must lie within +/-{MAX_RAIL_V:g} V, got {v!r}",
                                       field=f"supply.{name}")
        if not self.v_pos > self.v_neg:
            raise RealizationError(
                f"supply.v_pos ({self.v_pos:g} V) must be above supply.v_neg ({self.v_neg:g} V): the rails are "
                f"{'reversed' if self.v_pos < self.v_neg else 'equal (zero span)'}", field="supply")
        if self.v_neg > 0:
            raise RealizationError("supply.v_neg must be 0 (single rail) or negative (split rails); ground must "
                                   "lie at or between the rails", field="supply.v_neg")
        if self.v_pos <= 0:
            raise RealizationError("supply.v_pos must be positive", field="supply.v_pos")

    @property
    def single_rail(self) -> bool:
        """Whether the negative rail is ground."""
        return self.v_neg == 0

    @property
    def span_v(self) -> float:
        """``v_pos - v_neg``, V."""
        return self.v_pos - self.v_neg

    @property
    def bias_v(self) -> float:
        """Signal ground of the stages: mid-rail on a single rail, else 0 V."""
        return self.v_pos / 2 if self.single_rail else 0.0

    @classmethod
    def from_dict(cls, data) -> "Supply | None":
        """From the plain ``supply`` field (None stays None)."""
        if data is None or isinstance(data, Supply):
            return data
        if not isinstance(data, dict):
            raise RealizationError("supply must be an object {v_pos, v_neg}", field="supply")
        unknown = set(data) - {"v_pos", "v_neg"}
        if unknown:
            name = sorted(unknown)[0]
            raise RealizationError(f"unknown supply field {name!r}", field=f"supply.{name}")
        if "v_pos" not in data:
            raise RealizationError("supply.v_pos is required", field="supply.v_pos")
        return cls(v_pos=data["v_pos"], v_neg=data.get("v_neg", 0.0))


@dataclass(frozen=True)
class OpAmpBias:
    """The DC operating point of one op-amp output.

    Attributes
    ----------
    ref : str
    stage : int or None
        Stage number (from 1); None for the mid-rail buffer.
    node : str
        Output node.
    dc_v : float
        DC output voltage, V (to ground).
    offset_v : float
        ``dc_v`` minus its value without offsets and bias currents, V.
    low_v, high_v : float or None
        The output range (V); None when neither rails nor swing are known.
    within : bool or None
        Whether ``low_v <= dc_v <= high_v``.
    """

    ref: str
    stage: int | None
    node: str
    dc_v: float
    offset_v: float
    low_v: float | None
    high_v: float | None
    within: bool | None

    def as_dict(self) -> dict:
        return {"ref": self.ref, "stage": self.stage, "node": self.node, "dc_v": self.dc_v,
                "offset_v": self.offset_v, "low_v": self.low_v, "high_v": self.high_v, "within": self.within}


@dataclass(frozen=True)
class StageOffset:
    """Output DC offset of one stage.

    Attributes
    ----------
    stage : int
        From 1.
    node : str
        The stage's output node.
    offset_v : float
        DC offset at the stage output (all op-amps up to it), V.
    share_at_output_v : float
        This stage's op-amps' own share of the filter's output offset, V.
    """

    stage: int
    node: str
    offset_v: float
    share_at_output_v: float

    def as_dict(self) -> dict:
        return {"stage": self.stage, "node": self.node, "offset_v": self.offset_v,
                "share_at_output_v": self.share_at_output_v}


@dataclass
class FilterCircuit:
    """The whole filter as built on its supply, with what the analyses need.

    Attributes
    ----------
    circuit : Circuit
        ``VIN`` drives ``in``; output node ``out``; op-amps carry their noise
        and DC sources; a single rail adds ``VPOS`` and the bias network.
    stage_of : dict of str to int
        Ref of every stage part and op-amp -> stage number (from 1).
    opamp_outputs : dict of str to str
        Op-amp ref -> output node.
    opamp_stage : dict of str to int or None
    output_limits : dict of str to (float or None, float or None)
        Op-amp ref -> absolute output range, V.
    supply : Supply or None
    bias_v : float
        Signal ground of the stages, V.
    input_bias_v : float
        DC level around which the input swings (the source's reference, or
        ``vmid`` after a coupling capacitor), V.
    input_coupling : str
        ``"none"`` (no supply or ground-referenced source), ``"dc"``
        (source referred to mid-rail) or ``"ac"`` (coupling capacitor).
    components, opamps : list
        Parts added for the supply (bias network, coupling), refs continuing
        the design's numbering.
    notes : list of DesignWarning
    """

    circuit: Circuit
    stage_of: dict[str, int]
    opamp_outputs: dict[str, str]
    opamp_stage: dict[str, int | None]
    output_limits: dict[str, tuple[float | None, float | None]]
    supply: Supply | None = None
    bias_v: float = 0.0
    input_bias_v: float = 0.0
    input_coupling: str = "none"
    components: list[Component] = field(default_factory=list)
    opamps: list[OpAmpUse] = field(default_factory=list)
    notes: list[DesignWarning] = field(default_factory=list)


@dataclass
class SupplyReport:
    """DC operating point, offsets and the changed circuit of a design on its supply.

    Attributes
    ----------
    supply : Supply or None
    bias_v : float
    input_coupling : str
    input_bias_v : float
    opamp_bias : list of OpAmpBias
        Every op-amp output, in circuit order.
    stage_offsets : list of StageOffset
    output_offset_v : float
        DC offset at the filter output, V.
    ac_change_db : float or None
        Largest change of the response in the passband (within 3 dB of the
        peak) that the supply's network causes, dB, on the design's analysis
        grid (1/100 of the lowest to 100x the highest section frequency);
        None on split rails.
    components, opamps : list
        Parts added for the supply.
    bom : list of dict
        The whole BOM (design parts, then the added parts).
    netlist : str
        SPICE netlist of the circuit on its supply (``.ac``).
    warnings : list of DesignWarning
    """

    supply: Supply | None
    bias_v: float
    input_coupling: str
    input_bias_v: float
    opamp_bias: list[OpAmpBias]
    stage_offsets: list[StageOffset]
    output_offset_v: float
    ac_change_db: float | None
    components: list[Component]
    opamps: list[OpAmpUse]
    bom: list[dict]
    netlist: str
    warnings: list[DesignWarning]
    circuit: Circuit = field(repr=False, default=None)

    def as_dict(self) -> dict:
        return {
            "supply": None if self.supply is None else {"v_pos": self.supply.v_pos, "v_neg": self.supply.v_neg},
            "bias_v": self.bias_v, "input_coupling": self.input_coupling, "input_bias_v": self.input_bias_v,
            "opamp_bias": [b.as_dict() for b in self.opamp_bias],
            "stage_offsets": [s.as_dict() for s in self.stage_offsets],
            "output_offset_v": self.output_offset_v, "ac_change_db": self.ac_change_db,
            "components": [c.as_dict() for c in self.components], "opamps": [u.as_dict() for u in self.opamps],
            "bom": [dict(r) for r in self.bom], "netlist": self.netlist,
            "warnings": [w.as_dict() for w in self.warnings],
        }


# ----------------------------------------------------------------------------------------------- helpers


def _plans(design) -> tuple[list[StagePlan], dict]:
    """Stage plans and part settings (``ranges``, ``series`` per kind) of a Design or a list of plans."""
    if isinstance(design, Design):
        if not design.plans:
            raise RealizationError("the design carries no stage plans to build a circuit from", field="design")
        return list(design.plans), {"ranges": {k: list(v) for k, v in design.part_ranges.items()},
                                    "series": dict(design.part_series)}
    if isinstance(design, (list, tuple)) and design and all(isinstance(p, StagePlan) for p in design):
        return list(design), {}
    raise RealizationError("expected a Design or a list of stage plans", field="design")


def _kind_settings(settings: dict, kind: str, default_range, default_series: str):
    rng = (settings.get("ranges") or {}).get(kind) or default_range
    series = (settings.get("series") or {}).get(kind) or default_series
    return (float(rng[0]), float(rng[1])), str(series)


def _next_numbers(plans: list[StagePlan]) -> dict[str, int]:
    """Next free number of each ref prefix (R, C, U) after the design's refs."""
    top = {"R": 0, "C": 0, "U": 0}
    for p in plans:
        for ref in [c.ref for c in p.components] + [u.ref for u in p.opamps]:
            m = re.fullmatch(r"([RCU])(\d+)", ref)
            if m:
                top[m.group(1)] = max(top[m.group(1)], int(m.group(2)))
    return {k: v + 1 for k, v in top.items()}


def _series_value(series: str | None, rng, target: float, *, at_least: bool, default_series: str) -> float:
    """A value of ``series`` within ``rng``: the nearest to ``target``, or the smallest >= it (else the largest)."""
    lo, hi = rng
    vals = series_values_in_range(series or default_series, lo, hi)
    if vals.size == 0:
        return float(min(max(target, lo), hi))
    if at_least:
        ok = vals[vals >= target * (1 - 1e-12)]
        return float(ok[0] if ok.size else vals[-1])
    return float(vals[np.argmin(np.abs(np.log(vals / target)))])


def _copy(dst: Circuit, el, nodes) -> None:
    """Add element ``el`` to ``dst`` on ``nodes``."""
    k = el.kind
    if k is ElementKind.RESISTOR:
        dst.add_resistor(el.name, *nodes, el.value)
    elif k is ElementKind.CAPACITOR:
        dst.add_capacitor(el.name, *nodes, el.value)
    elif k is ElementKind.INDUCTOR:
        dst.add_inductor(el.name, *nodes, el.value)
    elif k is ElementKind.VCVS:
        dst.add_vcvs(el.name, *nodes, el.value)
    elif k is ElementKind.VCCS:
        dst.add_vccs(el.name, *nodes, el.value)
    elif k is ElementKind.OPAMP:
        dst.add_opamp(el.name, *nodes, model=el.value, sources=el.sources)
    elif k is ElementKind.SUPPLY:
        dst.add_supply(el.name, *nodes, el.value)
    else:  # the input source is placed by the caller
        raise RealizationError(f"unexpected element {el.name} in a stage", field="design")


def _use_of(plans, opamp: OpAmpSpec | None):
    """Every op-amp use in order, with ``opamp``'s figures where the use gives none."""
    for k, p in enumerate(plans, start=1):
        for u in p.opamps:
            yield k, u


def _figure(u: OpAmpUse, spec: OpAmpSpec | None, name: str):
    v = getattr(u, name, None)
    if v is None and spec is not None:
        v = getattr(spec, name, None)
    return v


def _merged_sources(u: OpAmpUse, spec: OpAmpSpec | None):
    class _Merged:
        pass
    m = _Merged()
    for name in ("en_nv_rthz", "in_pa_rthz", "en_corner_hz", "in_corner_hz", "vos_v", "ib_a"):
        setattr(m, name, _figure(u, spec, name))
    return sources_of(m)


def _limits(u: OpAmpUse, spec: OpAmpSpec | None, supply: Supply | None, bias: float):
    """Absolute output range (low, high) of an op-amp, V (None where unknown)."""
    lo = hi = None
    if supply is not None:
        h = _figure(u, spec, "rail_headroom_v") or 0.0
        lo, hi = supply.v_neg + h, supply.v_pos - h
        if hi <= lo:
            raise RealizationError(
                f"{u.ref}: rail_headroom_v {h:g} V on each side leaves no output range within the "
                f"{supply.span_v:g} V supply", field="opamp.rail_headroom_v")
    swing = _figure(u, spec, "output_swing_v")
    if swing is not None:
        lo = bias - swing if lo is None else max(lo, bias - swing)
        hi = bias + swing if hi is None else min(hi, bias + swing)
    return lo, hi


def _passband(h: np.ndarray) -> np.ndarray:
    """Where ``|h|`` is within 3 dB of its peak (bool mask)."""
    mag = np.abs(h)
    return mag >= mag.max() / math.sqrt(2)


# ------------------------------------------------------------------------------------------ the circuit


def filter_circuit(design, *, supply: Supply | dict | None = None, opamp: OpAmpSpec | dict | None = None,
                   mid_rail: str = "buffered", input_coupling: str = "auto") -> FilterCircuit:
    """The whole filter on its supply, op-amps carrying their noise and DC figures.

    Parameters
    ----------
    design : Design, dict or list of StagePlan
        A design, a design document, or stage plans.
    supply : Supply, dict or None
        ``{"v_pos", "v_neg"}`` in V; None: the circuit as designed (ground-referenced).
    opamp : OpAmpSpec, dict or None
        Figures used where a stage's op-amp entry gives none (noise, DC,
        swing); its ``gbw_hz`` and the rest of the macromodel are not
        applied (the design's op-amps keep theirs).
    mid_rail : {"buffered", "divider"}
        Single rail: the mid-rail node driven by a follower, or the
        decoupled divider alone.
    input_coupling : {"auto", "dc", "ac", "none"}
        Single rail: see the module notes; ``"auto"`` chooses.

    Returns
    -------
    FilterCircuit

    Raises
    ------
    RealizationError
        Invalid supply (``field="supply..."``), options, or figures.
    """
    plans, settings = _plans(design)
    supply = Supply.from_dict(supply)
    spec = OpAmpSpec.from_dict(opamp) if isinstance(opamp, dict) and "gbw_hz" in opamp else opamp
    if isinstance(opamp, dict) and "gbw_hz" not in opamp:
        spec = _FiguresOnly.from_dict(opamp)
    if mid_rail not in MID_RAIL_MODES:
        raise RealizationError(f"mid_rail must be one of {', '.join(MID_RAIL_MODES)}, got {mid_rail!r}",
                               field="supply.mid_rail")
    if input_coupling not in INPUT_COUPLINGS:
        raise RealizationError(f"input_coupling must be one of {', '.join(INPUT_COUPLINGS)}, got "
                               f"{input_coupling!r}", field="supply.input_coupling")
    for k, u in _use_of(plans, spec):
        check_figures(u, f"stages[{k - 1}].opamps[{u.ref}]")
    base = cascade_circuit(plans)
    stage_of, outputs, stage_opamp = {}, {}, {}
    for k, p in enumerate(plans, start=1):
        for c in p.components:
            stage_of[c.ref] = k
        for u in p.opamps:
            stage_of[u.ref] = k
            stage_opamp[u.ref] = k
    sources = {u.ref: _merged_sources(u, spec) for _, u in _use_of(plans, spec)}
    base = base.with_opamp_sources({r: s for r, s in sources.items() if s is not None})
    for el in base.elements:
        if el.kind is ElementKind.OPAMP:
            outputs[el.name] = el.nodes[2]
    bias = supply.bias_v if supply is not None else 0.0
    limits = {u.ref: _limits(u, spec, supply, bias) for _, u in _use_of(plans, spec)}
    result = FilterCircuit(base, stage_of, outputs, dict(stage_opamp), limits, supply=supply, bias_v=bias)
    if supply is not None and supply.span_v > CAUTION_SPAN_V:
        result.notes.append(DesignWarning(
            "high_voltage", f"the {supply.span_v:g} V supply is above {CAUTION_SPAN_V:g} V DC, beyond safety "
            "extra-low voltage: treat it as hazardous, follow local electrical codes and have the design "
            "reviewed by a qualified person"))
    if supply is None or not supply.single_rail:
        return result
    return _single_rail(plans, settings, base, result, spec, mid_rail, input_coupling)


class _FiguresOnly:
    """Op-amp figures without a macromodel (an ``opamp`` given only for noise, DC or swing)."""

    _NAMES = ("en_nv_rthz", "in_pa_rthz", "en_corner_hz", "in_corner_hz", "vos_v", "ib_a", "rail_headroom_v",
              "output_swing_v")

    @classmethod
    def from_dict(cls, data: dict):
        unknown = set(data) - set(cls._NAMES)
        if unknown:
            name = sorted(unknown)[0]
            raise RealizationError(f"unknown op-amp figure {name!r}", field=f"opamp.{name}")
        obj = cls()
        for n in cls._NAMES:
            setattr(obj, n, data.get(n))
        check_figures(obj, "opamp")
        if obj.output_swing_v is not None and not (math.isfinite(obj.output_swing_v) and obj.output_swing_v > 0):
            raise RealizationError("opamp.output_swing_v must be positive", field="opamp.output_swing_v")
        return obj


def _single_rail(plans, settings, base: Circuit, result: FilterCircuit, spec, mid_rail: str,
                 coupling: str) -> FilterCircuit:
    supply = result.supply
    nxt = _next_numbers(plans)
    first_use = plans[0].opamps[0] if plans and plans[0].opamps else None
    settings_r = _kind_settings(settings, "resistor", (1e3, 1e6), "E96")
    settings_c = _kind_settings(settings, "capacitor", (100e-12, 10e-6), "E12")
    r_bias = _series_value(settings_r[1], settings_r[0], BIAS_RESISTANCE_OHM, at_least=False, default_series="E96")
    f_low = min(p.section.f0_hz for p in plans)
    c_need = 1.0 / (2 * math.pi * (r_bias / 2) * f_low / DECOUPLING_FACTOR)
    c_dec = _series_value(settings_c[1], settings_c[0], c_need, at_least=True, default_series="E12")

    refs = {"top": f"R{nxt['R']}", "bottom": f"R{nxt['R'] + 1}", "dec": f"C{nxt['C']}"}
    nxt["R"] += 2
    nxt["C"] += 1
    c = Circuit(title=base.title)
    mid = "vmid"
    div = "vdiv" if mid_rail == "buffered" else mid
    c.add_supply("VPOS", "vpos", GROUND, supply.v_pos)
    c.add_resistor(refs["top"], "vpos", div, r_bias)
    c.add_resistor(refs["bottom"], div, GROUND, r_bias)
    c.add_capacitor(refs["dec"], div, GROUND, c_dec)
    comps = [Component(refs["top"], "bias_top", "resistor", r_bias, None, None, None, None),
             Component(refs["bottom"], "bias_bottom", "resistor", r_bias, None, None, None, None),
             Component(refs["dec"], "bias_decoupling", "capacitor", c_dec, None, None, None, None)]
    ops = []
    if mid_rail == "buffered":
        ref_u = f"U{nxt['U']}"
        nxt["U"] += 1
        model = plans[0].model() if plans and plans[0].opamps else None
        src = _merged_sources(first_use, spec) if first_use is not None else None
        c.add_opamp(ref_u, div, mid, mid, model=model, sources=src)
        use = OpAmpUse(ref=ref_u, role="mid_rail_buffer", **({} if first_use is None else {
            k: getattr(first_use, k) for k in ("gbw_hz", "slew_v_per_us", "a0_db", "output_swing_v", "supply_v",
                                               "rout_ohm", "part_id", "en_nv_rthz", "in_pa_rthz", "en_corner_hz",
                                               "in_corner_hz", "vos_v", "ib_a", "rail_headroom_v")}))
        ops.append(use)
        result.opamp_outputs[ref_u] = mid
        result.opamp_stage[ref_u] = None
        result.output_limits[ref_u] = _limits(use, spec, supply, supply.bias_v)

    def node(n):
        return mid if n == GROUND else n

    stage_els = [el for el in base.elements if el.kind is not ElementKind.VOLTAGE_SOURCE]
    src_el = base.input_source
    if coupling == "auto":
        coupling = _auto_coupling(base, plans)
    first_in = src_el.nodes[0]
    if coupling == "ac":
        r_in, c_in = f"R{nxt['R']}", f"C{nxt['C']}"
        nxt["R"] += 1
        nxt["C"] += 1
        c_value, change = _coupling_capacitor(base, plans, stage_els, r_bias, settings_c[1])
        c.add_voltage_source(src_el.name, "in", GROUND, src_el.value)
        c.add_capacitor(c_in, "in", "in_ac", c_value)
        c.add_resistor(r_in, "in_ac", mid, r_bias)
        comps += [Component(c_in, "input_coupling", "capacitor", c_value, None, None, None, None),
                  Component(r_in, "input_bias", "resistor", r_bias, None, None, None, None)]
        rename = {first_in: "in_ac"}
        result.input_bias_v = supply.bias_v
        f_c = 1 / (2 * math.pi * r_bias * c_value)
        result.notes.append(DesignWarning(
            "input_ac_coupled", f"the input is AC-coupled through {c_in} with {r_in} to mid-rail "
            f"(corner about {f_c:.3g} Hz with {r_in} alone; the passband changes by {change:.2g} dB)"))
        grid = analysis_grid([p.section for p in plans])
        h = np.abs(ac_response(base, grid[:1])[0])
        if h[0] >= np.abs(ac_response(base, grid)[0]).max() / math.sqrt(2):
            result.notes.append(DesignWarning(
                "input_ac_coupled_dc_passband", f"the response passes DC but the input is AC-coupled: {c_in} "
                f"removes the passband below about {f_c:.3g} Hz (kept from {grid[0]:.3g} Hz up)"))
        if c_value > settings_c[0][1] * (1 + 1e-9):
            result.notes.append(DesignWarning(
                "coupling_capacitor_large", f"{c_in} ({c_value:.3g} F) is above the design's capacitor range: a "
                "film or electrolytic part (mind its polarity: the input side sits at the source's level, the "
                f"other at {supply.bias_v:g} V)"))
    elif coupling == "dc":
        c.add_voltage_source(src_el.name, "in", mid, src_el.value)
        rename = {}
        result.input_bias_v = supply.bias_v
        result.notes.append(DesignWarning(
            "input_mid_rail", f"the input source must be referred to mid-rail ({supply.bias_v:g} V): the filter "
            "passes DC, so a ground-referenced source would shift every stage's operating point"))
    else:
        c.add_voltage_source(src_el.name, "in", GROUND, src_el.value)
        rename = {}
        result.input_bias_v = 0.0
    for el in stage_els:
        _copy(c, el, tuple(rename.get(n, node(n)) for n in el.nodes))
    result.circuit = c
    result.input_coupling = coupling
    result.components = comps
    result.opamps = ops
    if c_dec < c_need * (1 - 1e-9):
        result.notes.append(DesignWarning(
            "mid_rail_corner", f"the mid-rail decoupling {refs['dec']} is the largest capacitor of the range; the "
            f"divider's noise corner is {1 / (2 * math.pi * (r_bias / 2) * c_dec):.3g} Hz"))
    return result


def _auto_coupling(base: Circuit, plans) -> str:
    """``"none"`` when the input's DC level reaches no op-amp output, else ``"ac"`` when the response has
    no passband at its lowest analysis frequency (40 dB below the peak), else ``"dc"``."""
    share = dc_contributions(base, {"input": [base.input_source.name]}, input_dc_v=1.0)["input"]
    outs = [el.nodes[2] for el in base.elements if el.kind is ElementKind.OPAMP]
    if all(abs(float(share.voltage(n)[0])) < DC_ISOLATION for n in outs):
        return "none"
    grid = analysis_grid([p.section for p in plans])
    h = np.abs(ac_response(base, grid)[0])
    return "ac" if h[0] < h.max() * 10 ** (-40 / 20) else "dc"


def _coupling_capacitor(base: Circuit, plans, stage_els, r_bias: float, series: str) -> tuple[float, float]:
    """The smallest capacitor of the series (within :data:`COUPLING_RANGE_F`) that keeps the passband within
    :data:`COUPLING_CHANGE_DB`, and the change it causes (dB), found with the circuit engine (the stage's own
    input impedance loads the coupling)."""
    grid = analysis_grid([p.section for p in plans])
    h0 = ac_response(base, grid)[0]
    band = _passband(h0)
    f_pass = float(grid[band].min())
    need = COUPLING_FACTOR / (2 * math.pi * r_bias * f_pass)
    lo, hi = COUPLING_RANGE_F
    value, change = hi, math.inf
    for _ in range(24):
        value = _series_value(series, (lo, hi), need, at_least=True, default_series="E12")
        probe = Circuit("probe")
        probe.add_voltage_source("VIN", "in", GROUND)
        probe.add_capacitor("CIN", "in", "in_ac", value)
        probe.add_resistor("RIN", "in_ac", GROUND, r_bias)
        first = base.input_source.nodes[0]
        for el in stage_els:
            _copy(probe, el, tuple("in_ac" if n == first else n for n in el.nodes))
        h = ac_response(probe, grid)[0]
        change = float(np.max(np.abs(20 * np.log10(np.abs(h[band]) / np.abs(h0[band])))))
        if change <= COUPLING_CHANGE_DB or value >= hi * (1 - 1e-12):
            break
        need = value * max(1.2, math.sqrt(change / COUPLING_CHANGE_DB))
    return value, change


# ------------------------------------------------------------------------------------------ the report


def supply_report(design, *, supply: Supply | dict | None, opamp: OpAmpSpec | dict | None = None,
                  mid_rail: str = "buffered", input_coupling: str = "auto") -> SupplyReport:
    """DC operating point of every op-amp output, output offsets, the added parts and the netlist.

    Parameters are those of :func:`filter_circuit`.

    Returns
    -------
    SupplyReport

    Raises
    ------
    RealizationError
        Invalid supply or options (``field`` names it).
    CircuitError
        A circuit with no DC operating point.
    """
    plans, settings = _plans(design)
    fc = filter_circuit(design, supply=supply, opamp=opamp, mid_rail=mid_rail, input_coupling=input_coupling)
    circuit = fc.circuit
    supplies = [el.name for el in circuit.elements if el.kind is ElementKind.SUPPLY]
    op_refs = [el.name for el in circuit.elements if el.kind is ElementKind.OPAMP]
    groups = {"supply": supplies}
    for k in range(1, len(plans) + 1):
        groups[f"stage {k}"] = [r for r in op_refs if fc.opamp_stage.get(r) == k]
    groups["bias"] = [r for r in op_refs if fc.opamp_stage.get(r) is None]
    total = dc_operating_point(circuit, input_dc_v=0.0)
    shares = dc_contributions(circuit, groups)
    nominal = shares["supply"]
    bias_rows, warnings = [], list(fc.notes)
    for ref in op_refs:
        n = fc.opamp_outputs[ref]
        v = float(total.voltage(n)[0])
        off = v - float(nominal.voltage(n)[0])
        lo, hi = fc.output_limits.get(ref, (None, None))
        within = None
        if lo is not None or hi is not None:
            within = bool((lo is None or v >= lo) and (hi is None or v <= hi))
            if not within:
                warnings.append(DesignWarning(
                    "dc_outside_swing", f"{ref}'s output sits at {v:.4g} V at DC, outside its output range "
                    f"[{_fmt(lo)}, {_fmt(hi)}] V", stage=fc.opamp_stage.get(ref)))
        bias_rows.append(OpAmpBias(ref, fc.opamp_stage.get(ref), n, v, off, lo, hi, within))
    stage_rows = []
    for k, p in enumerate(plans, start=1):
        node = "out" if k == len(plans) else f"out{k}"
        off = float(total.voltage(node)[0] - nominal.voltage(node)[0])
        share = float(shares[f"stage {k}"].voltage("out")[0])
        stage_rows.append(StageOffset(k, node, off, share))
    out_offset = float(total.voltage("out")[0] - nominal.voltage("out")[0])
    ac_change = None
    if fc.supply is not None and fc.supply.single_rail:
        grid = analysis_grid([p.section for p in plans])
        ref_circuit = filter_circuit(plans, supply=None, opamp=opamp).circuit
        h0 = ac_response(ref_circuit, grid)[0]
        h1 = ac_response(circuit, grid)[0]
        band = _passband(h0)
        ac_change = float(np.max(np.abs(20 * np.log10(np.abs(h1[band]) / np.abs(h0[band])))))
    bom = []
    for p in plans:
        for c in p.components:
            bom.append(_bom_row(c))
        for u in p.opamps:
            bom.append({"ref": u.ref, "kind": "opamp", "value": None, "tolerance": None, "dielectric": None,
                        "part_id": u.part_id})
    bom += [_bom_row(c) for c in fc.components]
    bom += [{"ref": u.ref, "kind": "opamp", "value": None, "tolerance": None, "dielectric": None,
             "part_id": u.part_id} for u in fc.opamps]
    grid = analysis_grid([p.section for p in plans])
    lo_f = 10 ** math.floor(math.log10(grid[0]) + 1e-9)
    hi_f = 10 ** math.ceil(math.log10(grid[-1]) - 1e-9)
    netlist = to_spice(circuit, output="out", ac=("dec", 125, float(lo_f), float(hi_f)))
    return SupplyReport(fc.supply, fc.bias_v, fc.input_coupling, fc.input_bias_v, bias_rows, stage_rows, out_offset,
                        ac_change, list(fc.components), list(fc.opamps), bom, netlist, warnings, circuit)


def with_supply(design: Design, *, supply: Supply | dict | None, opamp: OpAmpSpec | dict | None = None,
                mid_rail: str = "buffered", input_coupling: str = "auto") -> tuple[Design, SupplyReport | None]:
    """The design on its supply: BOM, netlist and warnings of the circuit the board gets.

    Parameters are those of :func:`supply_report`; ``supply=None`` returns ``(design, None)``.

    Returns
    -------
    (Design, SupplyReport or None)
        A copy of ``design`` whose ``bom`` and ``netlist`` are the report's
        (bias network and coupling included on a single rail), whose
        ``warnings`` add the report's.
    """
    if supply is None:
        return design, None
    rep = supply_report(design, supply=supply, opamp=opamp, mid_rail=mid_rail, input_coupling=input_coupling)
    out = replace(design, bom=list(rep.bom), netlist=rep.netlist, warnings=list(design.warnings) + rep.warnings)
    return out, rep


def _bom_row(c: Component) -> dict:
    return {"ref": c.ref, "kind": c.kind, "value": c.value, "tolerance": c.tolerance,
            "dielectric": c.dielectric if c.kind == "capacitor" else None, "part_id": c.part_id}


def _fmt(x) -> str:
    return "none" if x is None else f"{x:.4g}"


__all__ = ["FilterCircuit", "OpAmpBias", "StageOffset", "Supply", "SupplyReport", "filter_circuit",
           "supply_report", "with_supply", "MID_RAIL_MODES", "INPUT_COUPLINGS"]
