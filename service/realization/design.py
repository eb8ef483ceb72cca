"""From an approximation's sections to a buildable design.

:func:`design_filter` orders the sections, picks a topology and strategy for
each, distributes the gain, chooses part values from what the caller can buy
(:mod:`service.realization.selection`), and hands the stages to
:func:`service.realization.analysis.analyze` for the achieved figures, op-amp
needs, BOM, netlist, summary and warnings.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from service.approximation.types import Section
from service.circuit import OpAmpModel
from service.realization.analysis import StagePlan, analyze
from service.realization.cascade import distribute_gains, gain_freedom, order_sections
from service.realization.errors import (
    RealizationError, UnknownStrategy, UnknownTopology, UnsupportedSection, WrongLength,
)
from service.realization.opamp import FIGURES, OpAmpSpec
from service.realization.parts import PartsPolicy, resolve_kind
from service.realization.results import AnalysisOptions, Component, Design, DesignWarning, OpAmpUse
from service.realization.selection import select_values
from service.realization.topologies import TOPOLOGIES, auto_topology

DEFAULT_STAGE_PEAK_MARGIN_DB = 1.0
DEFAULT_OUTPUT_AMPLITUDE_V = 1.0
DEFAULT_GBW_ERROR = 0.01
#: Difference (dB) between the cascade's gain and the approximation's above which it is reported.
GAIN_MISMATCH_DB = 0.01


def _per_section(value, n: int, name: str) -> list:
    """A scalar option repeated per section, or a list checked for length."""
    if isinstance(value, (list, tuple)):
        if len(value) != n:
            raise WrongLength(
                f"{name} lists {len(value)} entries but the approximation has {n} sections",
                field=name,
            )
        return list(value)
    return [value] * n


def get_topology(name: str, field: str):
    """The registered topology ``name`` or :class:`UnknownTopology`."""
    t = TOPOLOGIES.get(name) if isinstance(name, str) else None
    if t is None:
        raise UnknownTopology(
            f"unknown topology {name!r}: expected 'auto' or one of {', '.join(sorted(TOPOLOGIES))}", field=field)
    return t


def check_realizes(topology, section: Section, field: str) -> tuple[str, ...]:
    """The strategies ``topology`` offers for ``section``; :class:`UnsupportedSection` if none."""
    kinds = getattr(topology, "kinds", frozenset())
    ok = section.kind in kinds and section.order == getattr(topology, "order", section.order)
    strategies: tuple[str, ...] = ()
    if ok:
        try:
            strategies = tuple(topology.strategies(section))
        except RealizationError:
            strategies = ()
    if not strategies:
        why = f"it realizes {', '.join(sorted(k.value for k in kinds))}"
        if ok and hasattr(topology, "strategy_applicable"):
            reasons = [f"{name}: {topology.strategy_applicable(section, name)}"
                       for name in topology.strategy_names(section.kind)
                       if topology.strategy_applicable(section, name)]
            if reasons:
                why = "; ".join(reasons)
        raise UnsupportedSection(
            f"the {topology.name} topology cannot realize this {section.kind.value} section of order "
            f"{section.order} (f0 {section.f0_hz:.6g} Hz, gain {section.gain:.6g}): {why}",
            field=field,
        )
    return strategies


def check_strategy(topology, section: Section, strategy: str | None, strategies, field: str) -> str:
    if strategy is None:
        return strategies[0]
    if strategy not in strategies:
        raise UnknownStrategy(
            f"the {topology.name} topology offers no strategy {strategy!r} for a {section.kind.value} section: "
            f"expected one of {', '.join(strategies)}", field=field)
    return strategy


def _check_options(impedance_ohm, stage_peak_margin_db, output_amplitude_v, gbw_error):
    if impedance_ohm is not None and not (math.isfinite(impedance_ohm) and impedance_ohm > 0):
        raise RealizationError("impedance_ohm must be a positive resistance in ohm", field="impedance_ohm")
    if not (math.isfinite(stage_peak_margin_db) and stage_peak_margin_db >= 0):
        raise RealizationError("stage_peak_margin_db must be a non-negative number of dB",
                               field="stage_peak_margin_db")
    if not (math.isfinite(output_amplitude_v) and output_amplitude_v > 0):
        raise RealizationError("output_amplitude_v must be a positive peak voltage", field="output_amplitude_v")
    if not (0 < gbw_error < 0.5):
        raise RealizationError("gbw_error must be a relative error between 0 and 0.5", field="gbw_error")


def _enum_value(x):
    return getattr(x, "value", x)


def _fit_strategy(topology, section: Section, strategy: str, gain: float, *, forced: bool):
    """The stage section with ``gain`` and a strategy that realizes it.

    A distributed gain can fall outside what the chosen strategy accepts
    (a given-gain Sallen-Key needs |G| > 1).  Then another strategy of the same
    topology that realizes that gain is taken, unless the caller fixed the
    strategy; failing that the section keeps the approximation's gain.
    """
    stage = replace(section, gain=gain)
    try:
        if strategy in topology.strategies(stage):
            return stage, strategy
        options = () if forced else topology.strategies(stage)
    except RealizationError:
        options = ()
    for alt in options:
        try:
            f = topology.forced_gain(stage, alt)
        except RealizationError:
            continue
        if f is None or np.isclose(abs(f), abs(gain)):
            return stage, alt
    return section, strategy


def _components(specs, allowed, refs: dict, values: dict, ideal: dict) -> list[Component]:
    """The stage's parts with ``values`` (role -> ohm or F): tolerance, dielectric and part id from the
    allowed value each is (none for a value not among them), and whether it lies in the allowed range."""
    comps = []
    for p in specs:
        a = allowed[p.kind]
        v = float(values[p.role])
        j = int(a.index_of(np.array([v]))[0])
        listed = bool(np.isclose(a.values[j], v, rtol=1e-9, atol=0.0))
        comps.append(Component(
            ref=refs[p.role], role=p.role, kind=p.kind, value=v, ideal=ideal[p.role], tolerance=float(a.tolerance[j]),
            dielectric=a.dielectric[j] if p.kind == "capacitor" else None,
            part_id=a.part_id[j] if listed else None,
            in_range=bool(a.low * (1 - 1e-9) <= v <= a.high * (1 + 1e-9))))
    return comps


def design_filter(approximation, *, topology: str | list[str] = "auto", strategy: str | list[str] | None = None,
                  parts: PartsPolicy | dict | None = None, opamp: OpAmpSpec | dict | None = None,
                  exact: bool = False, impedance_ohm: float | None = None, section_order: str = "ascending_q",
                  stage_peak_margin_db: float = DEFAULT_STAGE_PEAK_MARGIN_DB,
                  output_amplitude_v: float = DEFAULT_OUTPUT_AMPLITUDE_V, gbw_error: float = DEFAULT_GBW_ERROR,
                  stopbands_hz=()) -> Design:
    """Realize an approximation as a cascade of op-amp stages with parts that can be bought.

    Parameters
    ----------
    approximation : Approximation
        Its ``sections`` (standard forms), ``response``, ``family``,
        ``order`` and, from a requirement, ``edges``.
    topology : str or list of str
        ``"auto"`` (the documented rule of :func:`auto_topology`), a
        registered name for every section, or one entry per section of the
        approximation, in the approximation's section order (each ``"auto"``
        or a name).
    strategy : str or list of str or None
        Design strategy for every section, or one per section (None: the
        topology's default or the automatic choice).
    parts : PartsPolicy or dict or None
        What can be bought (default E96 1 % resistors 1 kohm-1 Mohm, E12 5 %
        C0G capacitors 100 pF-10 uF).
    opamp : OpAmpSpec or dict or None
        The op-amp used in every position; None: ideal op-amps.
    exact : bool
        Keep computed values unsnapped.
    impedance_ohm : float or None
        Preferred resistor level (ohm).
    section_order : str
        ``"ascending_q"`` (default), ``"descending_q"``, ``"as_computed"`` or
        ``"max_dynamic_range"`` (:func:`service.realization.cascade.dynamic_range_order`).
    stage_peak_margin_db : float
        How far (dB) an intermediate stage output may peak above the filter's output level.
    output_amplitude_v : float
        Peak output voltage (V) the slew-rate and swing figures are for.
    gbw_error : float
        Relative f0/Q error the GBW figures are for (0.01 = 1 %).
    stopbands_hz : sequence of (float, float)
        The requirement's stopbands (Hz), for the mains caution.

    Returns
    -------
    Design

    Raises
    ------
    RealizationError
        With ``field`` set to the public field path (see the subclasses in
        :mod:`service.realization.errors`).
    """
    policy = PartsPolicy.from_dict(parts)
    spec = OpAmpSpec.from_dict(opamp)
    _check_options(impedance_ohm, stage_peak_margin_db, output_amplitude_v, gbw_error)
    sections = list(approximation.sections)
    if not sections:
        raise RealizationError("the approximation has no sections to realize", field="sections")
    n = len(sections)
    topo_in = _per_section(topology, n, "topology")
    strat_in = _per_section(strategy, n, "strategy")

    model = None if spec is None else OpAmpModel(gbw_hz=spec.gbw_hz, a0=spec.a0, rout_ohm=spec.rout_ohm)
    spans = tuple(float(a.values[-1] / a.values[0]) for a in (resolve_kind(policy, k) for k in ("resistor", "capacitor")))
    chosen = []
    for i, sec in enumerate(sections):
        name = topo_in[i]
        listed = isinstance(topology, (list, tuple))
        tfield = f"topology[{i}]" if listed else "topology"
        sfield = f"strategy[{i}]" if isinstance(strategy, (list, tuple)) else "strategy"
        given = TOPOLOGIES.get(name) if isinstance(name, str) else None
        if given is not None and given.order != sec.order:
            if listed:
                raise UnsupportedSection(
                    f"section {i + 1} is of order {sec.order}; the {name} topology named for it realizes "
                    f"order-{given.order} sections", field=tfield)
            # One name for every section: a section of the other order takes the automatic choice.
            name = "auto"
            if not isinstance(strategy, (list, tuple)):
                strat_in[i] = None
        if name == "auto" or name is None:
            t, auto_s = auto_topology(sec, opamp_model=model, gbw_error=gbw_error, spans=spans)
            strategies = check_realizes(t, sec, tfield)
            s = check_strategy(t, sec, strat_in[i], strategies, sfield) if strat_in[i] is not None else auto_s
        else:
            t = get_topology(name, tfield)
            strategies = check_realizes(t, sec, tfield)
            s = check_strategy(t, sec, strat_in[i], strategies, sfield)
        chosen.append((t, s))

    order = order_sections(sections, section_order, margin_db=stage_peak_margin_db,
                           freedoms=[gain_freedom(t, sec, s) for sec, (t, s) in zip(sections, chosen)],
                           internal=[len(t.opamp_roles(sec, s)) > 1 for sec, (t, s) in zip(sections, chosen)])
    ordered = [sections[i] for i in order]
    picks = [chosen[i] for i in order]
    total = float(np.prod([s.gain for s in sections]))
    freedoms = [gain_freedom(t, sec, s) for sec, (t, s) in zip(ordered, picks)]
    gains, info = distribute_gains(ordered, freedoms, total, stage_peak_margin_db)

    stage_secs = []
    for k, (sec, (t, s), g) in enumerate(zip(ordered, picks, gains)):
        stage_sec, s = _fit_strategy(t, sec, s, g, forced=strat_in[order[k]] is not None)
        picks[k] = (t, s)
        stage_secs.append(stage_sec)

    notes: list[DesignWarning] = []
    achieved_total = float(np.prod([sec.gain for sec in stage_secs]))
    if abs(20 * np.log10(abs(achieved_total) / abs(total))) > GAIN_MISMATCH_DB:
        notes.append(DesignWarning(
            "gain_mismatch",
            f"the stages' strategies impose gains whose product is {achieved_total:.4g} instead of "
            f"{total:.4g} ({20 * np.log10(abs(achieved_total) / abs(total)):+.3f} dB); no stage with a free "
            "gain is left to make up the difference"))

    kinds = {p.kind for sec, (t, s) in zip(stage_secs, picks) for p in t.parts(sec, s)}
    allowed = {k: resolve_kind(policy, k) for k in sorted(kinds)}

    plans: list[StagePlan] = []
    counters = {"resistor": 0, "capacitor": 0, "opamp": 0}
    prefix = {"resistor": "R", "capacitor": "C", "opamp": "U"}
    for k, (stage_sec, (t, s)) in enumerate(zip(stage_secs, picks)):
        sel = select_values(t, stage_sec, s, allowed, exact=exact, impedance_ohm=impedance_ohm,
                            field=f"stages[{k}]", opamp_model=model)
        refs = {}
        for p in t.parts(stage_sec, s):
            counters[p.kind] += 1
            refs[p.role] = f"{prefix[p.kind]}{counters[p.kind]}"
        comps = _components(t.parts(stage_sec, s), allowed, refs, sel.values, sel.ideal)
        alternatives = ()
        if sel.alternatives:
            k_alt = len(next(iter(sel.alternatives.values())))
            alternatives = tuple(
                _components(t.parts(stage_sec, s), allowed, refs,
                            {role: float(v[i]) for role, v in sel.alternatives.items()}, sel.ideal)
                for i in range(k_alt))
        ops = []
        for role in t.opamp_roles(stage_sec, s):
            counters["opamp"] += 1
            ref = f"U{counters['opamp']}"
            if spec is None:
                ops.append(OpAmpUse(ref=ref, role=role))
            else:
                ops.append(OpAmpUse(ref=ref, role=role, gbw_hz=spec.gbw_hz, slew_v_per_us=spec.slew_v_per_us,
                                    a0_db=spec.a0_db, output_swing_v=spec.output_swing_v, supply_v=spec.supply_v,
                                    rout_ohm=spec.rout_ohm, part_id=spec.part_id,
                                    **{k: getattr(spec, k) for k in FIGURES}))
        plans.append(StagePlan(section=stage_sec, topology=t, strategy=s, components=comps, opamps=ops,
                               predistortion=sel.predistortion, alternatives=alternatives))

    return analyze(plans, response=_enum_value(getattr(approximation, "response", None)),
                   family=_enum_value(getattr(approximation, "family", None)),
                   order=int(getattr(approximation, "order", sum(s.order for s in sections))),
                   options=AnalysisOptions(float(gbw_error), float(output_amplitude_v), float(stage_peak_margin_db)),
                   part_ranges={kind: (float(a.low), float(a.high)) for kind, a in allowed.items()},
                   part_series={kind: a.series for kind, a in allowed.items()},
                   notes=notes, stopbands_hz=stopbands_hz)
