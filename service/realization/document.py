"""The JSON design document: write it, read it back, evaluate it, build its circuit.

The document (see the design notes) is the currency of the service: a person
or a component database may edit it (swap a value for one in stock) and send
it back.  :func:`evaluate_document` checks it strictly -- refs unique across
the design, every part the topology needs present and of the right kind,
values positive -- and re-derives every figure from ``topology`` +
``components`` + ``opamps``; nothing is silently substituted.
"""

from __future__ import annotations

import math
from typing import Any

from service.approximation.types import Section, SectionKind
from service.circuit import Circuit
from service.realization.analysis import StagePlan, analyze, cascade_circuit
from service.realization.design import (
    DEFAULT_GBW_ERROR, DEFAULT_OUTPUT_AMPLITUDE_V, DEFAULT_STAGE_PEAK_MARGIN_DB, check_realizes, check_strategy,
    get_topology,
)
from service.realization.errors import InvalidDocument, RealizationError, UnknownPartKind
from service.realization.results import Component, Design, OpAmpUse

_KINDS = ("resistor", "capacitor")
_ROOT = "design"


def _clean(x):
    """JSON-safe float (None for NaN/inf)."""
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


def _clean_dict(d: dict | None) -> dict | None:
    return None if d is None else {k: _clean(v) for k, v in d.items()}


def document_from_design(design: Design) -> dict:
    """The design document of ``design`` (plain JSON values).

    Returns
    -------
    dict
        ``response``, ``family``, ``order``, ``stages`` (each ``section``,
        ``topology``, ``strategy``, ``components``, ``opamps``, ``achieved``,
        ``achieved_macromodel``, ``opamp_requirement``, ``peak_gain_db``,
        ``peak_frequency_hz``, ``output_node``), ``requirement``,
        ``settings``, ``bom``, ``netlist``, ``summary``, ``warnings``,
        ``overall_gain``, ``output_peak_gain_db``.
    """
    stages = []
    for st in design.stages:
        stages.append({
            "section": st.section.as_dict(),
            "topology": st.topology,
            "strategy": st.strategy,
            "components": [c.as_dict() for c in st.components],
            "opamps": [u.as_dict() for u in st.opamps],
            "achieved": _clean_dict(st.achieved),
            "achieved_macromodel": _clean_dict(st.achieved_macromodel),
            "opamp_requirement": _clean_dict(st.opamp_requirement.as_dict()),
            "peak_gain_db": _clean(st.peak_gain_db),
            "peak_frequency_hz": _clean(st.peak_frequency_hz),
            "output_node": st.output_node,
        })
    return {
        "response": design.response,
        "family": design.family,
        "order": design.order,
        "stages": stages,
        "requirement": design.requirement,
        "settings": design.settings,
        "bom": [dict(r) for r in design.bom],
        "netlist": design.netlist,
        "summary": design.summary,
        "warnings": [w.as_dict() for w in design.warnings],
        "overall_gain": design.overall_gain,
        "output_peak_gain_db": _clean(design.output_peak_gain_db),
    }


def _number(value, field: str, *, positive: bool = True, allow_none: bool = False) -> float | None:
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InvalidDocument(f"{field} must be a number, got {value!r}", field=field)
    v = float(value)
    if not math.isfinite(v) or (positive and v <= 0):
        raise InvalidDocument(f"{field} must be a positive finite number, got {value!r}", field=field)
    return v


def _section(data: Any, field: str) -> Section:
    if not isinstance(data, dict):
        raise InvalidDocument(f"{field} must be an object with kind, order, f0_hz, q, fz_hz, gain", field=field)
    try:
        kind = SectionKind(data.get("kind"))
    except ValueError:
        raise InvalidDocument(
            f"unknown section kind {data.get('kind')!r}: expected one of {', '.join(k.value for k in SectionKind)}",
            field=f"{field}.kind") from None
    order = data.get("order", 2)
    if order not in (1, 2) or isinstance(order, bool):
        raise InvalidDocument(f"{field}.order must be 1 or 2", field=f"{field}.order")
    f0 = _number(data.get("f0_hz"), f"{field}.f0_hz")
    q = _number(data.get("q"), f"{field}.q", allow_none=True)
    if order == 2 and q is None:
        raise InvalidDocument(f"{field}.q is required for a second-order section", field=f"{field}.q")
    fz = _number(data.get("fz_hz"), f"{field}.fz_hz", allow_none=True)
    gain = _number(data.get("gain", 1.0), f"{field}.gain", positive=False)
    return Section(kind=kind, order=int(order), f0_hz=f0, q=q if order == 2 else None, fz_hz=fz, gain=gain)


def _claim_ref(entry: Any, field: str, seen: dict[str, str]) -> str:
    """The ``ref`` of a component or op-amp entry, recorded in ``seen``; InvalidDocument when the entry is
    not an object, its ref is missing or empty, or the ref was used before (refs are unique design-wide)."""
    if not isinstance(entry, dict):
        raise InvalidDocument(f"{field} must be an object", field=field)
    ref = entry.get("ref")
    if not isinstance(ref, str) or not ref:
        raise InvalidDocument(f"{field}.ref must be a non-empty string", field=f"{field}.ref")
    if ref in seen:
        raise InvalidDocument(f"ref {ref} repeats (first used at {seen[ref]}); refs must be unique",
                              field=f"{field}.ref")
    seen[ref] = field
    return ref


def plans_from_document(document: dict) -> tuple[list[StagePlan], dict]:
    """Read a design document into stage plans (strictly; see the module notes).

    Returns
    -------
    plans : list of StagePlan
    settings : dict
        The document's settings with defaults filled in.

    Raises
    ------
    InvalidDocument, UnknownPartKind, UnknownTopology, UnknownStrategy, UnsupportedSection
        With ``field`` naming the offending entry (``"design.stages[1].components[2].ref"``).
    """
    if not isinstance(document, dict):
        raise InvalidDocument("the design document must be an object", field=_ROOT)
    stages = document.get("stages")
    if not isinstance(stages, list) or not stages:
        raise InvalidDocument("the design document has no stages", field=f"{_ROOT}.stages")
    settings = dict(document.get("settings") or {})
    settings.setdefault("gbw_error", DEFAULT_GBW_ERROR)
    settings.setdefault("output_amplitude_v", DEFAULT_OUTPUT_AMPLITUDE_V)
    settings.setdefault("stage_peak_margin_db", DEFAULT_STAGE_PEAK_MARGIN_DB)
    ranges = settings.get("ranges") or {}
    seen: dict[str, str] = {}
    plans = []
    for i, st in enumerate(stages):
        sf = f"{_ROOT}.stages[{i}]"
        if not isinstance(st, dict):
            raise InvalidDocument(f"{sf} must be an object", field=sf)
        section = _section(st.get("section"), f"{sf}.section")
        topology = get_topology(st.get("topology"), f"{sf}.topology")
        strategies = check_realizes(topology, section, f"{sf}.topology")
        strategy = check_strategy(topology, section, st.get("strategy"), strategies, f"{sf}.strategy")
        specs = topology.parts(section, strategy)
        needed = {p.role: p for p in specs}
        comps_in = st.get("components")
        if not isinstance(comps_in, list):
            raise InvalidDocument(f"{sf}.components must be a list", field=f"{sf}.components")
        # Roles: given, or the topology's parts of that kind in order.
        by_kind_left = {k: [p.role for p in specs if p.kind == k] for k in _KINDS}
        given_roles = {c.get("role") for c in comps_in if isinstance(c, dict) and c.get("role")}
        for k in _KINDS:
            by_kind_left[k] = [r for r in by_kind_left[k] if r not in given_roles]
        comps: dict[str, Component] = {}
        for j, c in enumerate(comps_in):
            cf = f"{sf}.components[{j}]"
            ref = _claim_ref(c, cf, seen)
            kind = c.get("kind")
            if kind not in _KINDS:
                raise UnknownPartKind(f"{ref}: unknown part kind {kind!r}: expected resistor or capacitor",
                                      field=f"{cf}.kind")
            role = c.get("role")
            if not role:
                if not by_kind_left[kind]:
                    raise InvalidDocument(
                        f"{ref}: the {topology.name} topology ({strategy}) has no further {kind} position",
                        field=f"{cf}")
                role = by_kind_left[kind].pop(0)
            if role not in needed:
                raise InvalidDocument(
                    f"{ref}: the {topology.name} topology ({strategy}) has no part {role!r}; its parts are "
                    f"{', '.join(needed)}", field=f"{cf}.role")
            if needed[role].kind != kind:
                raise InvalidDocument(
                    f"{ref} ({role}) is a {kind} but the {topology.name} topology needs a {needed[role].kind} there",
                    field=f"{cf}.kind")
            if role in comps:
                raise InvalidDocument(f"{ref}: part {role} of stage {i + 1} is given twice", field=f"{cf}.role")
            value = _number(c.get("value"), f"{cf}.value")
            tol = _number(c.get("tolerance"), f"{cf}.tolerance", positive=False, allow_none=True)
            rng = ranges.get(kind)
            in_range = True if not rng else bool(rng[0] * (1 - 1e-9) <= value <= rng[1] * (1 + 1e-9))
            ideal = c.get("ideal")
            comps[role] = Component(
                ref=ref, role=role, kind=kind, value=value,
                ideal=float(ideal) if isinstance(ideal, (int, float)) and not isinstance(ideal, bool) else None,
                tolerance=tol, dielectric=c.get("dielectric") if kind == "capacitor" else None,
                part_id=c.get("part_id"), in_range=in_range)
        missing = [p for p in specs if p.role not in comps]
        if missing:
            names = ", ".join(f"{p.role} ({p.kind})" for p in missing)
            raise InvalidDocument(
                f"stage {i + 1}: the {topology.name} topology ({strategy}) needs {names}, which the stage lacks",
                field=f"{sf}.components")
        op_roles = list(topology.opamp_roles(section, strategy))
        ops_in = st.get("opamps")
        if not isinstance(ops_in, list):
            raise InvalidDocument(f"{sf}.opamps must be a list", field=f"{sf}.opamps")
        left = [r for r in op_roles if r not in {u.get("role") for u in ops_in if isinstance(u, dict)}]
        ops: dict[str, OpAmpUse] = {}
        for j, u in enumerate(ops_in):
            uf = f"{sf}.opamps[{j}]"
            ref = _claim_ref(u, uf, seen)
            role = u.get("role") or (left.pop(0) if left else None)
            if role not in op_roles or role in ops:
                raise InvalidDocument(
                    f"{ref}: the {topology.name} topology has op-amp positions {', '.join(op_roles)} only",
                    field=f"{uf}.role")
            ops[role] = OpAmpUse(
                ref=ref, role=role,
                gbw_hz=_number(u.get("gbw_hz"), f"{uf}.gbw_hz", allow_none=True),
                slew_v_per_us=_number(u.get("slew_v_per_us"), f"{uf}.slew_v_per_us", allow_none=True),
                a0_db=_number(u.get("a0_db"), f"{uf}.a0_db", allow_none=True),
                output_swing_v=_number(u.get("output_swing_v"), f"{uf}.output_swing_v", allow_none=True),
                supply_v=_number(u.get("supply_v"), f"{uf}.supply_v", allow_none=True),
                rout_ohm=_number(u.get("rout_ohm"), f"{uf}.rout_ohm", positive=False, allow_none=True),
                part_id=u.get("part_id"))
        missing_u = [r for r in op_roles if r not in ops]
        if missing_u:
            raise InvalidDocument(
                f"stage {i + 1}: the {topology.name} topology needs op-amp {', '.join(missing_u)}, "
                "which the stage lacks", field=f"{sf}.opamps")
        plans.append(StagePlan(section=section, topology=topology, strategy=strategy,
                               components=[comps[p.role] for p in specs], opamps=[ops[r] for r in op_roles]))
    return plans, settings


def evaluate_document(document: dict) -> Design:
    """Achieved figures, op-amp needs, summary, BOM, netlist and warnings of a design document.

    Parameters
    ----------
    document : dict
        A design document as :func:`document_from_design` writes it, possibly
        edited.  Only ``stages`` (``section``, ``topology``, ``strategy``,
        ``components``, ``opamps``) is required; ``requirement`` (with
        ``edges``) brings the summary back and ``settings`` the options.

    Returns
    -------
    Design
    """
    plans, settings = plans_from_document(document)
    order = document.get("order")
    if not isinstance(order, int) or isinstance(order, bool):
        order = sum(p.section.order for p in plans)
    return analyze(plans, response=document.get("response"), family=document.get("family"), order=order,
                   requirement=document.get("requirement"), settings=settings)


def design_to_circuit(design_or_document: Design | dict, *, opamp_model: str = "given") -> Circuit:
    """The whole filter as a circuit: ``VIN`` at node ``in``, output node ``out``.

    Parameters
    ----------
    design_or_document : Design or dict
    opamp_model : str
        ``"given"`` (each stage's op-amp macromodel; ideal where none is
        given) or ``"ideal"``.
    """
    if opamp_model not in ("given", "ideal"):
        raise RealizationError(f"opamp_model must be 'given' or 'ideal', got {opamp_model!r}",
                               field="opamp_model")
    if isinstance(design_or_document, Design):
        plans = design_or_document.plans
    else:
        plans, _ = plans_from_document(design_or_document)
    return cascade_circuit(plans, ideal=(opamp_model == "ideal"))
