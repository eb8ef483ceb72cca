"""Analyze a cascade of chosen parts with the circuit engine.

Given the stages of a design (target section, topology, strategy, parts with
their refs, op-amps), this module builds each stage's circuit, reads its
achieved f0, Q, gain and zero frequency back from the engine's poles and
zeros, finds the op-amp GBW and slew rate each stage needs, the peak gain of
every stage output, the loss at the requirement's edges, and assembles the
:class:`Design` with BOM, netlist and warnings.  Both the design path and the
evaluation of an edited document end here, so the two report the same figures
for the same parts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.approximation.types import Section
from service.circuit import Circuit, OpAmpModel, to_spice, transfer_function_zpk
from service.realization.cascade import analysis_grid, grid_peak
from service.realization.conditioning import check_stage_poles
from service.realization.fit import dominant_poles, fit_section, standard_shape, zpk_eval
from service.realization.gbw import GBW_SPREAD, required_gbw_sweep
from service.realization.opamp import DEFAULT_A0_DB, RULE_OF_THUMB, SLEW_RULE, gbw_rule_of_thumb, slew_required
from service.realization.results import AnalysisOptions, Component, Design, OpAmpRequirement, OpAmpUse, Stage
from service.realization.warnings import collect_warnings

#: Highest frequency considered for "where the stage passes signal", as a multiple
#: of the highest section frequency (a highpass passes up to the op-amp's own limit).
SIGNAL_BAND_FACTOR = 10.0


@dataclass
class StagePlan:
    """One stage to analyze: what it should do and what it is built from."""

    section: Section
    topology: object
    strategy: str
    components: list[Component]
    opamps: list[OpAmpUse]
    notes: list = field(default_factory=list)
    predistortion: object = None
    #: Other part choices for the stage, best first (each a full list of components with the same refs),
    #: as the selection ranked them; empty for a stage read from a document.
    alternatives: tuple = ()

    @property
    def refs(self) -> dict[str, str]:
        r = {c.role: c.ref for c in self.components}
        r.update({u.role: u.ref for u in self.opamps})
        return r

    @property
    def values(self) -> dict[str, float]:
        return {c.role: c.value for c in self.components}

    def model(self, gbw_hz: float | None = None) -> OpAmpModel | None:
        """The op-amp macromodel of this stage (None: ideal), or one with ``gbw_hz``."""
        u = self.opamps[0] if self.opamps else None
        a0_db = DEFAULT_A0_DB if (u is None or u.a0_db is None) else u.a0_db
        rout = 0.0 if (u is None or u.rout_ohm is None) else u.rout_ohm
        if gbw_hz is not None:
            return OpAmpModel(gbw_hz=float(gbw_hz), a0=10 ** (a0_db / 20), rout_ohm=rout)
        if u is None or u.gbw_hz is None:
            return None
        return OpAmpModel(gbw_hz=float(u.gbw_hz), a0=10 ** (a0_db / 20), rout_ohm=rout)


def build_stage(circuit: Circuit, plan: StagePlan, *, input_node: str, output_node: str, prefix: str,
                model: OpAmpModel | None) -> None:
    """Add one stage to ``circuit`` with its refs as element names."""
    plan.topology.build(circuit, plan.section, plan.strategy, plan.values, plan.refs,
                        input_node=input_node, output_node=output_node, prefix=prefix, opamp_model=model)


def stage_circuit(plan: StagePlan, model: OpAmpModel | None, title: str = "stage") -> Circuit:
    """The stage alone, driven by ``VIN`` at node ``in``, output at ``out``."""
    c = Circuit(title=title)
    c.add_voltage_source("VIN", "in", "0")
    build_stage(c, plan, input_node="in", output_node="out", prefix="s", model=model)
    return c


def cascade_circuit(plans: list[StagePlan], *, ideal: bool = False, title: str = "filter") -> Circuit:
    """The whole filter: ``VIN`` at ``in``, stage k output ``out<k>``, the last at ``out``."""
    c = Circuit(title=title)
    c.add_voltage_source("VIN", "in", "0")
    node = "in"
    for k, plan in enumerate(plans, start=1):
        out = "out" if k == len(plans) else f"out{k}"
        build_stage(c, plan, input_node=node, output_node=out, prefix=f"s{k}",
                    model=None if ideal else plan.model())
        node = out
    return c


def design_roots(plans: list[StagePlan], values: dict | None = None, *, ideal: bool = False):
    """Zeros, poles and gain of the whole filter (rad/s), one trial per row (a :class:`service.circuit.RootSet`).

    Parameters
    ----------
    plans : list of StagePlan
    values : dict of str to ndarray (T,), optional
        Per-trial values by ref (``"U3.gbw_hz"`` style keys for op-amp GBW), as
        :meth:`service.circuit.Circuit.with_values` takes them; default the nominal values.
    ideal : bool
        Ideal op-amps instead of the stages' macromodels.

    Returns
    -------
    RootSet
        The product of the stages (each driven by the ideal output of the one before), ``pole_group``
        the stage index from 0 -- or, when op-amps have output resistance and the stages load each other,
        the whole circuit at once with ``pole_group`` -1.
    """
    from service.circuit.roots import RootSet, transfer_roots

    loaded = not ideal and any((u.rout_ohm or 0.0) > 0 for p in plans for u in p.opamps)
    if loaded:
        circuit = cascade_circuit(plans)
        if values:
            circuit = circuit.with_values(values)
        roots = transfer_roots(circuit)
        return RootSet(roots.zeros, roots.poles, roots.log_gain, np.full(roots.poles.shape[1], -1))
    parts = []
    for plan in plans:
        c = stage_circuit(plan, None if ideal else plan.model())
        if values:
            refs = set(plan.refs.values())
            mine = {k: v for k, v in values.items() if k.split(".")[0] in refs}
            if mine:
                c = c.with_values(mine)
        parts.append(transfer_roots(c))
    return RootSet.cascade(parts)


def _zpk(plan: StagePlan, model) -> tuple[np.ndarray, np.ndarray, float]:
    z, p, k = transfer_function_zpk(stage_circuit(plan, model), output="out")
    return np.asarray(z, dtype=complex), np.asarray(p, dtype=complex), float(np.real(k))


def analyze(plans: list[StagePlan], *, response: str | None, family: str | None, order: int,
            options: AnalysisOptions = AnalysisOptions(), part_ranges: dict | None = None,
            part_series: dict | None = None, notes: list | None = None, stopbands_hz=()) -> Design:
    """Achieved figures, op-amp needs, peaks, BOM, netlist and warnings.

    Parameters
    ----------
    plans : list of StagePlan
        In cascade order.
    options : AnalysisOptions
        What the GBW, slew-rate and peaking figures are for.
    part_ranges, part_series : dict, optional
        Allowed range (ohm or F) and series per part kind, recorded on the design.
    notes : list of DesignWarning, optional
        Cautions found before the analysis (gain shortfalls).
    stopbands_hz : sequence of (float, float)
        The requirement's stopbands (Hz), for the mains caution.
    """
    sections = [p.section for p in plans]
    grid = analysis_grid(sections)
    s_grid = 2j * np.pi * grid
    error = float(options.gbw_error)

    ideal_zpk = [_zpk(p, None) for p in plans]
    check_stage_poles(plans, ideal_zpk)
    achieved = [fit_section(p.section, *zk) for p, zk in zip(plans, ideal_zpk)]
    models = [p.model() for p in plans]
    macro_zpk = [(_zpk(p, m) if m is not None else None) for p, m in zip(plans, models)]
    achieved_macro = [
        (fit_section(p.section, *zk) if zk is not None else None) for p, zk in zip(plans, macro_zpk)
    ]
    used_zpk = [m if m is not None else i for m, i in zip(macro_zpk, ideal_zpk)]

    # Gains from the filter input to each stage output (circuit engine poles and zeros).
    def cumulative(f_hz: np.ndarray) -> np.ndarray:
        s = 2j * np.pi * np.asarray(f_hz, dtype=float)
        h = np.array([zpk_eval(*zk, s) for zk in used_zpk])
        return np.abs(np.cumprod(h, axis=0))

    cum = cumulative(grid)
    peaks, fpeaks = grid_peak(cumulative, grid, cum)
    out_level = float(peaks[-1]) if peaks[-1] > 0 else 1.0
    v_in = float(options.output_amplitude_v) / out_level
    f_top = SIGNAL_BAND_FACTOR * max([s.f0_hz for s in sections] + [s.fz_hz or 0.0 for s in sections])

    stages: list[Stage] = []
    for k, plan in enumerate(plans):
        sec = plan.section
        # Frequencies where this output carries signal: within 3 dB of its peak.
        passing = (cum[k] >= peaks[k] / math.sqrt(2)) & (grid <= f_top)
        f_sig = float(grid[passing].max()) if passing.any() else float(fpeaks[k])
        f_sig = max(f_sig, float(min(fpeaks[k], f_top)))
        v_peak = v_in * float(peaks[k])
        rule = gbw_rule_of_thumb(sec.gain, sec.q, sec.f0_hz, error)
        ref = achieved[k]
        gbw_pre = None
        if plan.opamps:
            u = plan.opamps[0]
            a0 = 10 ** ((DEFAULT_A0_DB if u.a0_db is None else u.a0_db) / 20)
            sweep = dict(a0=a0, rout_ohm=0.0 if u.rout_ohm is None else u.rout_ohm)
            gbw_req = required_gbw_sweep(
                lambda model, plan=plan: stage_circuit(plan, model), ref,
                dominant_poles(sec, ideal_zpk[k][1]), error, rule, **sweep)
            if u.gbw_hz is not None:
                # with an op-amp given the stage is predistorted for it: what it needs then
                gbw_pre = required_gbw_sweep(
                    lambda model, plan=plan: stage_circuit(plan, model), ref,
                    dominant_poles(sec, ideal_zpk[k][1]), error, rule * GBW_SPREAD, spread=GBW_SPREAD, **sweep)
        else:
            gbw_req = None
        pre = plan.predistortion
        req = OpAmpRequirement(
            error=error, gbw_rule_hz=rule, gbw_required_hz=gbw_req,
            slew_required_v_per_us=slew_required(f_sig, v_peak) if plan.opamps else 0.0,
            signal_frequency_hz=f_sig, output_peak_v=v_peak, gbw_rule=RULE_OF_THUMB, slew_rule=SLEW_RULE,
            gbw_required_predistorted_hz=gbw_pre, gbw_spread=GBW_SPREAD if gbw_pre is not None else None,
            predistorted=pre is not None,
            design_section=None if pre is None else {"f0_hz": pre.section.f0_hz, "q": pre.section.q,
                                                     "fz_hz": pre.section.fz_hz, "gain": pre.section.gain},
        )
        stages.append(Stage(
            index=k, section=sec, topology=plan.topology.name, strategy=plan.strategy,
            components=list(plan.components), opamps=list(plan.opamps), achieved=achieved[k],
            achieved_macromodel=achieved_macro[k], opamp_requirement=req,
            peak_gain_db=float(20 * np.log10(peaks[k])) if peaks[k] > 0 else float("-inf"),
            peak_frequency_hz=float(fpeaks[k]),
            output_node="out" if k == len(plans) - 1 else f"out{k + 1}",
        ))

    design = Design(
        response=response, family=family, order=order, stages=stages, options=options,
        part_ranges=dict(part_ranges or {}), part_series=dict(part_series or {}),
        overall_gain=float(np.prod([p.section.gain for p in plans])),
        output_peak_gain_db=float(20 * np.log10(out_level)),
    )
    design.plans = list(plans)
    design.notes = list(notes or [])
    design.bom = _bom(plans)
    circuit = cascade_circuit(plans)
    lo = 10 ** math.floor(math.log10(grid[0]) + 1e-9)
    hi = 10 ** math.ceil(math.log10(grid[-1]) - 1e-9)
    design.netlist = to_spice(circuit, output="out", ac=("dec", 125, float(lo), float(hi)))
    design.warnings = collect_warnings(design, plans, notes or [], stopbands_hz)
    return design


def _bom(plans: list[StagePlan]) -> list[dict]:
    rows = []
    for plan in plans:
        for c in plan.components:
            rows.append({"ref": c.ref, "kind": c.kind, "value": c.value, "tolerance": c.tolerance,
                         "dielectric": c.dielectric if c.kind == "capacitor" else None, "part_id": c.part_id})
        for u in plan.opamps:
            rows.append({"ref": u.ref, "kind": "opamp", "value": None, "tolerance": None, "dielectric": None,
                         "part_id": u.part_id})
    return rows
