"""Design, then verify; evaluate an edited document.  The two ways a design document comes to be.

:func:`design` turns a :class:`DesignRequest` into a circuit with parts
(transfer function for the requirement tightened by the margin policy,
realization, representable-range check) and verifies the circuit against the
requirement *as asked*.  :func:`evaluate` re-derives every figure of a
(possibly edited) :class:`DesignDocument` and verifies it the same way.  Both
return a :class:`DesignOutcome`, whose :meth:`~DesignOutcome.as_dict` is the
design document of the replies.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.approximation import Family, ResponseType
from service.config import Settings
from service.realization import Design, DesignWarning, OpAmpSpec, PartsPolicy, design_filter
from service.realization.analysis import StagePlan, analyze
from service.realization.results import AnalysisOptions
from service.workflows import costs, limits
from service.workflows.approximating import approximate
from service.workflows.document import DesignDocument, DesignSettings, PartRange, StageEntry
from service.workflows.electrical import BoardReport, SupplySettings, board_fields, on_board
from service.workflows.errors import UnrepresentableDesign
from service.workflows.policy import passband_margin, stopband_margin, with_gain
from service.workflows.requirement import Requirement
from service.workflows.verdicts import DesignVerdict, circuit_roots, verify_design

#: Relative f0 or Q error of a stage (with its op-amp) beyond which it is reported, as a multiple of the
#: allowed error the GBW figures are for (``gbw_error``, default 1 %).
STAGE_ERROR_FACTOR = 2.0


@dataclass(frozen=True)
class DesignRequest:
    """What ``POST /v1/designs`` asks for.

    Attributes
    ----------
    requirement : Requirement
    topology : str or tuple of str
        ``"auto"``, a topology name, or one per section.
    strategy : str or tuple of str or None
    parts : PartsPolicy or None
    opamp : OpAmpSpec or None
        The op-amp in every position (None: ideal).
    exact : bool
    gain : float
        Overall passband gain (V/V).
    impedance_ohm : float or None
    stage_peak_margin_db, output_amplitude_v, gbw_error : float
    passband_margin_db : float or None
        Requirement designs: passband reserve (dB); None for the policy default.
    stopband_margin_db : float or None
    stock_entries : int
        How many stock entries the parts name (for the limit).
    supply : SupplySettings or None
        The board's rails (kept in the document's settings).
    """

    requirement: Requirement
    topology: str | tuple[str, ...] = "auto"
    strategy: str | tuple[str, ...] | None = None
    parts: PartsPolicy | None = None
    opamp: OpAmpSpec | None = None
    exact: bool = False
    gain: float = 1.0
    impedance_ohm: float | None = None
    stage_peak_margin_db: float = 1.0
    output_amplitude_v: float = 1.0
    gbw_error: float = 0.01
    passband_margin_db: float | None = None
    stopband_margin_db: float | None = None
    stock_entries: int = 0
    supply: SupplySettings | None = None


@dataclass
class DesignOutcome:
    """A realized design, its document, its verdict and every warning."""

    design: Design
    document: DesignDocument
    verdict: DesignVerdict | None
    warnings: list[DesignWarning] = field(default_factory=list)
    board: BoardReport | None = None

    @property
    def plans(self) -> list[StagePlan]:
        return self.design.plans

    def summary(self) -> dict:
        v = self.verdict
        if v is None:
            return {"meets": None, "status": None, "worst_margin_db": None, "edges": []}
        return {"meets": v.meets, "status": v.verdict.status, "worst_margin_db": v.verdict.worst_margin_db,
                "edges": _edges(self)}

    def as_dict(self) -> dict:
        """The design document (plain JSON values; non-finite floats as null)."""
        d = self.design
        stages = []
        for st in d.stages:
            stages.append({
                "number": st.index + 1,
                "section": st.section.as_dict(), "topology": st.topology, "strategy": st.strategy,
                "components": [c.as_dict() for c in st.components], "opamps": [u.as_dict() for u in st.opamps],
                "achieved": _clean(st.achieved), "achieved_macromodel": _clean(st.achieved_macromodel),
                "opamp_requirement": _clean(st.opamp_requirement.as_dict()),
                "peak_gain_db": _clean(st.peak_gain_db), "peak_frequency_hz": _clean(st.peak_frequency_hz),
                "output_node": st.output_node,
            })
        doc = self.document
        return {
            "response": None if doc.response is None else doc.response.value,
            "family": None if doc.family is None else doc.family.value,
            "order": doc.order,
            "stages": stages,
            "requirement": None if doc.requirement is None else doc.requirement.to_json(),
            "settings": doc.settings.to_json(),
            "bom": [dict(r) for r in d.bom],
            "netlist": d.netlist,
            "summary": _clean(self.summary()),
            "verdict": None if self.verdict is None else _clean(self.verdict.as_dict()),
            "warnings": [w.as_dict() for w in self.warnings],
            "overall_gain": d.overall_gain,
            "output_peak_gain_db": _clean(d.output_peak_gain_db),
            **_clean(board_fields(self.board)),
        }


def _clean(x):
    if isinstance(x, dict):
        return {k: _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, (float, np.floating)):
        return float(x) if math.isfinite(x) else None
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def _edges(outcome: DesignOutcome) -> list[dict]:
    """Loss at each requirement edge (dB below the verdict's reference gain), with the circuit's roots."""
    req = outcome.document.requirement
    v = outcome.verdict
    if req is None or not req.by_specification or v is None or not v.verdict.stable:
        return []
    edges = []
    for band, e, limit in (("passband", req.passband_hz, req.passband_ripple_db),
                           ("stopband", req.stopband_hz, req.stopband_attenuation_db)):
        for f in (e if isinstance(e, tuple) else (e,)):
            edges.append((band, float(f), limit))
    roots = circuit_roots(outcome.plans)
    g = roots.log_magnitude(2 * math.pi * np.array([f for _, f, _ in edges]))[0] * 20 / math.log(10)
    ref = v.verdict.reference_gain_db
    out = []
    for (band, f, limit), gain in zip(edges, g):
        loss = ref - float(gain)
        margin = limit - loss if band == "passband" else loss - limit
        out.append({"frequency_hz": f, "band": band, "loss_db": loss, "required_db": limit,
                    "margin_db": 0.0 if abs(margin) <= 1e-9 else margin})
    return out


def _stopbands(requirement: Requirement | None) -> list[tuple[float, float]]:
    if requirement is None:
        return []
    for key in ("stopband_hz", "cutoff_hz"):
        v = getattr(requirement, key)
        if isinstance(v, tuple):
            return [v]
    return []


def _shape(plans: list[StagePlan]) -> costs.CircuitShape:
    return costs.CircuitShape(tuple(len(p.opamps) for p in plans),
                              loaded=any((u.rout_ohm or 0.0) > 0 for p in plans for u in p.opamps))


def check_representable(design: Design) -> None:
    """Refuse (422) a design whose parts or gains leave what the service represents and reads back."""
    for st in design.stages:
        for c in st.components:
            lo, hi = limits.VALUE_RANGE[c.kind]
            if not (lo <= c.value <= hi):
                unit = "ohm" if c.kind == "resistor" else "F"
                raise UnrepresentableDesign(
                    f"stage {st.index + 1}: {c.ref} would be {c.value:.4g} {unit}, outside the {lo:g}-{hi:g} {unit} "
                    "the service represents; widen the parts (series, range or stock) or change the impedance level",
                    field="parts")
        g = st.section.gain
        if not abs(g) <= limits.MAX_SECTION_GAIN:
            raise UnrepresentableDesign(f"stage {st.index + 1}: a section gain of {g:.4g} exceeds "
                                        f"{limits.MAX_SECTION_GAIN:g}", field="gain")


def stage_warnings(design: Design) -> list[DesignWarning]:
    """Stages whose achieved f0 or Q (with their op-amp) is off by more than the stated limit."""
    out = []
    limit = STAGE_ERROR_FACTOR * design.options.gbw_error
    for st in design.stages:
        fig = st.achieved_macromodel or st.achieved
        which = "with its op-amp" if st.achieved_macromodel else "with ideal op-amps"
        for name, label, target in (("f0_error", "f0", st.section.f0_hz), ("q_error", "Q", st.section.q)):
            err = fig.get(name)
            if err is None or not math.isfinite(err) or abs(err) <= limit:
                continue
            got = fig.get("f0_hz" if name == "f0_error" else "q")
            unit = " Hz" if name == "f0_error" else ""
            out.append(DesignWarning(
                "stage_off_target",
                f"stage {st.index + 1}: {label} {got:.4g}{unit} {which} against {target:.4g}{unit} "
                f"({100 * err:+.3g} %, limit +-{100 * limit:.3g} %)", stage=st.index + 1))
    return out


def _finish(design: Design, document: DesignDocument, settings: Settings | None = None) -> DesignOutcome:
    design, board = on_board(design, document.settings, settings)
    verdict = None
    req = document.requirement
    if req is not None and req.by_specification:
        verdict = verify_design(design.plans, req)
    warnings = list(design.warnings) + stage_warnings(design) + (list(verdict.warnings) if verdict else [])
    return DesignOutcome(design, document, verdict, warnings, board)


def outcome_of(realized: Design, requirement: Requirement | None = None) -> DesignOutcome:
    """The document, verdict and warnings of a design realized directly (``service.realization.design_filter``).

    ``requirement`` (by specification) is what the verdict checks; None for no verdict.
    """
    document = DesignDocument(
        response=None if realized.response is None else ResponseType(realized.response),
        family=None if realized.family is None else Family(realized.family), order=realized.order,
        stages=tuple(StageEntry(p.section, p.topology.name, p.strategy, tuple(p.components), tuple(p.opamps))
                     for p in realized.plans),
        requirement=requirement,
        settings=DesignSettings(
            gbw_error=realized.options.gbw_error, output_amplitude_v=realized.options.output_amplitude_v,
            stage_peak_margin_db=realized.options.stage_peak_margin_db,
            ranges={k: PartRange(*v) for k, v in realized.part_ranges.items()}, series=dict(realized.part_series)))
    return _finish(realized, document)


def design(request: DesignRequest, settings: Settings) -> DesignOutcome:
    """Design a filter for ``request`` and verify it (see the module notes).

    Raises
    ------
    LimitExceeded, InfeasibleSpec, RealizationError, UnrepresentableDesign
    """
    req = request.requirement
    costs.check_limit("max_stock_entries", request.stock_entries, settings, field="parts.stock",
                      what="stock entries")
    target = req
    pb_margin = sb_margin = None
    if req.by_specification:
        pb_margin = passband_margin(req.passband_ripple_db, request.passband_margin_db)
        sb_margin = stopband_margin(request.stopband_margin_db)
        target = req.tightened(pb_margin, sb_margin)
    approximation = with_gain(approximate(target, settings), request.gain)
    n_sections = len(approximation.sections)
    costs.check_design(costs.CircuitShape((4,) * n_sections, loaded=bool(request.opamp and request.opamp.rout_ohm)),
                       settings)
    realized = design_filter(
        approximation, topology=list(request.topology) if isinstance(request.topology, tuple) else request.topology,
        strategy=list(request.strategy) if isinstance(request.strategy, tuple) else request.strategy,
        parts=request.parts, opamp=request.opamp, exact=request.exact, impedance_ohm=request.impedance_ohm,
        section_order=req.section_order.value, stage_peak_margin_db=request.stage_peak_margin_db,
        output_amplitude_v=request.output_amplitude_v, gbw_error=request.gbw_error, stopbands_hz=_stopbands(req))
    check_representable(realized)
    document = DesignDocument(
        response=req.response, family=req.family, order=approximation.order,
        stages=tuple(StageEntry(p.section, p.topology.name, p.strategy, tuple(p.components), tuple(p.opamps))
                     for p in realized.plans),
        requirement=req,
        settings=DesignSettings(
            gbw_error=request.gbw_error, output_amplitude_v=request.output_amplitude_v,
            stage_peak_margin_db=request.stage_peak_margin_db, section_order=req.section_order,
            exact=request.exact, impedance_ohm=request.impedance_ohm,
            ranges={k: PartRange(*v) for k, v in realized.part_ranges.items()},
            series=dict(realized.part_series), passband_margin_db=pb_margin, stopband_margin_db=sb_margin,
            gain=request.gain, supply=request.supply))
    return _finish(realized, document, settings)


def evaluate(document: DesignDocument, settings: Settings, *, path: str = "") -> DesignOutcome:
    """Every figure of a (possibly edited) design document again, verified against its requirement.

    ``path`` prefixes error fields (``"design"`` when the document is a request member).
    """
    plans = document.plans(path)
    costs.check_design(_shape(plans), settings, field=(path + ".stages") if path else "stages")
    s = document.settings
    order = document.order if document.order is not None else sum(p.section.order for p in plans)
    realized = analyze(
        plans, response=None if document.response is None else document.response.value,
        family=None if document.family is None else document.family.value, order=order,
        options=AnalysisOptions(s.gbw_error, s.output_amplitude_v, s.stage_peak_margin_db),
        part_ranges={k: (r.low, r.high) for k, r in s.ranges.items()}, part_series=dict(s.series),
        stopbands_hz=_stopbands(document.requirement))
    return _finish(realized, document, settings)


def evaluate_json(data, settings: Settings, *, path: str = "") -> DesignOutcome:
    """:func:`evaluate` of a document given as JSON (read strictly by :meth:`DesignDocument.from_json`)."""
    return evaluate(DesignDocument.from_json(data, path), settings, path=path)
