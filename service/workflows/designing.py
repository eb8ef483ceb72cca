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

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from service.approximation import Family, ResponseType
from service.config import Settings
from service.deadline import check as check_deadline
from service.errors import RolloffError
from service.realization import Design, DesignWarning, OpAmpSpec, PartsPolicy, design_filter
from service.realization.analysis import StagePlan, analyze
from service.realization.conditioning import UNIT_HINT
from service.realization.errors import InvalidDocument
from service.realization.results import AnalysisOptions
from service.workflows import costs, limits
from service.workflows.bom import bom_lines
from service.workflows.approximating import approximate
from service.workflows.document import DesignDocument, DesignSettings, PartRange, StageEntry
from service.workflows.electrical import BoardReport, SupplySettings, board_fields, on_board
from service.workflows.errors import UnrepresentableDesign
from service.response.verification import Band, verify
from service.workflows.policy import passband_margin, stopband_margin, widened, with_gain
from service.workflows.requirement import Requirement
from service.workflows.verdicts import DesignVerdict, circuit_roots, design_criteria, verify_design

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
    steps: list[DesignStep] = field(default_factory=list)
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
            "bom_lines": [line.as_dict() for line in bom_lines(d)],
            "netlist": d.netlist,
            "summary": _clean(self.summary()),
            "verdict": None if self.verdict is None else _clean(self.verdict.as_dict()),
            "steps": [_clean(st.as_dict()) for st in self.steps],
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
    return costs.CircuitShape.of(plans)


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


@dataclass(frozen=True)
class DesignStep:
    """One step of the design loop: what was done and what the verifier then said.

    Attributes
    ----------
    action : str
        ``design`` (the first design), ``reselect``, ``margin`` or ``order``.
    detail : str
        What changed, with values.
    order : int
        The transfer function's order after the step.
    passband_margin_db, stopband_margin_db : float
        The reserves (dB) the transfer function was computed with.
    status : str or None
        The verdict after the step (``meets``, ``misses``, ``unstable``, ``unproved``); None when the
        step could not be made (``detail`` says why).
    worst_margin_db : float or None
        The verdict's worst margin (dB) after the step.
    """

    action: str
    detail: str
    order: int
    passband_margin_db: float
    stopband_margin_db: float
    status: str | None
    worst_margin_db: float | None

    def as_dict(self) -> dict:
        return {"action": self.action, "detail": self.detail, "order": self.order,
                "passband_margin_db": self.passband_margin_db, "stopband_margin_db": self.stopband_margin_db,
                "status": self.status, "worst_margin_db": self.worst_margin_db}


def _finish(design: Design, document: DesignDocument, settings: Settings | None = None) -> DesignOutcome:
    design, board = on_board(design, document.settings, settings)
    verdict = None
    req = document.requirement
    if req is not None and req.by_specification:
        verdict = verify_design(design.plans, req)
    warnings = list(design.warnings) + stage_warnings(design) + (list(verdict.warnings) if verdict else [])
    return DesignOutcome(design, document, verdict, warnings, board=board)


def outcome_of(realized: Design, requirement: Requirement | None = None) -> DesignOutcome:
    """The document, verdict and warnings of a design realized directly (``service.realization.design_filter``).

    ``requirement`` (by specification) is what the verdict checks; None for no verdict.
    """
    document = DesignDocument(
        response=None if realized.response is None else ResponseType(realized.response),
        family=None if realized.family is None else Family(realized.family), order=realized.order,
        stages=_entries(realized.plans),
        requirement=requirement,
        settings=DesignSettings(
            gbw_error=realized.options.gbw_error, output_amplitude_v=realized.options.output_amplitude_v,
            stage_peak_margin_db=realized.options.stage_peak_margin_db,
            ranges={k: PartRange(*v) for k, v in realized.part_ranges.items()}, series=dict(realized.part_series)))
    return _finish(realized, document)


def design(request: DesignRequest, settings: Settings, *, most_attempts: int | None = None) -> DesignOutcome:
    """Design a filter for ``request`` and verify it, through the design loop (see the module notes).

    ``most_attempts`` bounds the designs the loop makes (default :data:`MAX_ATTEMPTS`, within the work budget);
    a caller that budgets the loop's work itself (the yield search) passes what it counted.

    Raises
    ------
    LimitExceeded, InfeasibleSpec, RealizationError, UnrepresentableDesign
        From the first design (a later step that cannot be made is recorded in the steps instead).
    """
    req = request.requirement
    costs.check_limit("max_stock_entries", request.stock_entries, settings, field="parts.stock",
                      what="stock entries")
    if not req.by_specification:
        outcome = _outcome(_attempt(request, settings, None, None, None), settings)
        outcome.steps = [DesignStep("design", "designed by order (no requirement to verify)", outcome.design.order,
                                    0.0, 0.0, None, None)]
        return outcome
    pb = passband_margin(req.passband_ripple_db, request.passband_margin_db)
    sb = stopband_margin(request.stopband_margin_db)
    current = _attempt(request, settings, pb, sb, None)
    attempts = costs.design_attempts(len(current.plans), settings,
                                     MAX_ATTEMPTS if most_attempts is None else max(1, most_attempts))
    steps = [_step("design", f"order {current.order} for the requirement tightened by {pb:.4g} dB "
                             f"(passband) and {sb:.4g} dB (stopband)", current)]
    current = _reselected(current, steps)
    best = current
    made = 1
    margin_steps = 0
    min_order = None
    while not best.verdict.meets and current.verdict.stable:
        missed = {seg.limit.band for seg in current.verdict.segments if not seg.met}
        npb, nsb = widened(req.passband_ripple_db, pb, sb, passband_missed=Band.PASSBAND in missed,
                           stopband_missed=Band.STOPBAND in missed)
        if margin_steps < MAX_MARGIN_STEPS and (npb, nsb) != (pb, sb):
            action = "margin"
            detail = (f"reserves widened to {npb:.4g} dB (passband) and {nsb:.4g} dB (stopband) for the "
                      f"{' and '.join(sorted(b.value for b in missed))} that missed")
            margin_steps += 1
            pb, sb = npb, nsb
        elif min_order is None:
            action = "order"
            min_order = current.order + 1
            detail = f"one more order ({min_order}) with the reserves {pb:.4g} dB and {sb:.4g} dB"
        else:
            break
        if made >= attempts:
            steps.append(DesignStep(action, f"{detail}: not made, the work budget (ROLLOFF_MAX_WORK) allows "
                                            f"{attempts} design{'s' if attempts != 1 else ''} of this size",
                                    best.order, pb, sb, None, None))
            break
        made += 1
        try:
            current = _attempt(request, settings, pb, sb, min_order)
        except RolloffError as exc:
            steps.append(DesignStep(action, f"{detail}: not possible ({exc})", best.order, pb, sb, None, None))
            if action == "order":
                break
            continue
        steps.append(_step(action, detail + f": order {current.order}", current))
        current = _reselected(current, steps)
        if _rank(current) > _rank(best):
            best = current
    outcome = _outcome(best, settings)
    outcome.steps = steps
    if not outcome.verdict.meets and len(steps) > 1:
        outcome.warnings.append(DesignWarning(
            "design_loop_exhausted",
            f"no design of the {len(steps)} steps tried meets the requirement; this one has the largest worst "
            f"margin ({outcome.verdict.verdict.worst_margin_db:.3g} dB); see steps (last: {steps[-1].action})"))
    return outcome


#: Designs the loop may make in all (the first included), before the cost model's own bound.
MAX_ATTEMPTS = 4
#: Times the loop widens the reserves before it adds an order.
MAX_MARGIN_STEPS = 2
#: Stages the ``reselect`` step revisits (those furthest off first).
RESELECT_STAGES = 3
#: Precision (dB) to which the reselect step locates each choice's worst margin.
RESELECT_PRECISION_DB = 1e-2


@dataclass
class _Candidate:
    """A design of the loop before its reply is made: as realized, its stages (re-selected or not), its
    document and its verdict (without the causes of a miss, which only the returned design needs)."""

    realized: Design
    plans: list[StagePlan]
    document: DesignDocument
    verdict: object   # Verdict, or None for a design by order
    pb: float | None
    sb: float | None

    @property
    def order(self) -> int:
        return self.realized.order


def _step(action: str, detail: str, candidate: _Candidate) -> DesignStep:
    v = candidate.verdict
    return DesignStep(action, detail, candidate.order, candidate.pb, candidate.sb, v.status, v.worst_margin_db)


def _rank(candidate: _Candidate) -> tuple:
    """Order of preference among the loop's designs: meeting, stable, then the larger worst margin."""
    v = candidate.verdict
    worst = v.worst_margin_db
    return (v.meets, v.stable, -math.inf if worst is None or not math.isfinite(worst) else worst)


def _plain_verdict(requirement: Requirement, plans: list[StagePlan]):
    return verify(circuit_roots(plans), design_criteria(requirement, plans)).verdict()


def _attempt(request: DesignRequest, settings: Settings, pb: float | None, sb: float | None,
             min_order: int | None) -> _Candidate:
    """One design of the loop: the transfer function for the tightened requirement, realized and verified."""
    req = request.requirement
    target = req if pb is None else req.tightened(pb, sb)
    approximation = with_gain(approximate(target, settings, min_order=min_order), request.gain)
    n_sections = len(approximation.sections)
    costs.check_design(costs.CircuitShape((4,) * n_sections, loaded=bool(request.opamp and request.opamp.rout_ohm)),
                       settings)
    try:
        realized = design_filter(
            approximation,
            topology=list(request.topology) if isinstance(request.topology, tuple) else request.topology,
            strategy=list(request.strategy) if isinstance(request.strategy, tuple) else request.strategy,
            parts=request.parts, opamp=request.opamp, exact=request.exact, impedance_ohm=request.impedance_ohm,
            section_order=req.section_order.value, stage_peak_margin_db=request.stage_peak_margin_db,
            output_amplitude_v=request.output_amplitude_v, gbw_error=request.gbw_error, stopbands_hz=_stopbands(req),
            reserves_db=None if pb is None else (pb, sb))
    except InvalidDocument as exc:   # the parts allowed put a stage decades from its section
        raise UnrepresentableDesign(
            str(exc).replace(UNIT_HINT, "the allowed parts (series, range or stock) cannot give the values this "
                                        "stage needs"), field="parts") from exc
    check_representable(realized)
    document = DesignDocument(
        response=req.response, family=req.family, order=approximation.order,
        stages=_entries(realized.plans), requirement=req,
        settings=DesignSettings(
            gbw_error=request.gbw_error, output_amplitude_v=request.output_amplitude_v,
            stage_peak_margin_db=request.stage_peak_margin_db, section_order=req.section_order,
            exact=request.exact, impedance_ohm=request.impedance_ohm,
            ranges={k: PartRange(*v) for k, v in realized.part_ranges.items()},
            series=dict(realized.part_series), passband_margin_db=pb, stopband_margin_db=sb,
            gain=request.gain, supply=request.supply))
    verdict = _plain_verdict(req, realized.plans) if req.by_specification else None
    return _Candidate(realized, list(realized.plans), document, verdict, pb, sb)


def _outcome(candidate: _Candidate, settings: Settings) -> DesignOutcome:
    """The reply of a candidate: its stages analysed again when they were re-selected, verified with causes."""
    realized = candidate.realized
    if any(a is not b for a, b in zip(candidate.plans, realized.plans)):
        d = realized
        realized = analyze(candidate.plans, response=d.response, family=d.family, order=d.order, options=d.options,
                           part_ranges=d.part_ranges, part_series=d.part_series, notes=d.notes,
                           stopbands_hz=_stopbands(candidate.document.requirement))
    return _finish(realized, candidate.document, settings)


def _entries(plans: list[StagePlan]) -> tuple[StageEntry, ...]:
    return tuple(StageEntry(p.section, p.topology.name, p.strategy, tuple(p.components), tuple(p.opamps))
                 for p in plans)


def _figure_error(stage) -> float:
    """How far a stage's figures are off (with its op-amp), weighted as its response feels them:
    f0 error times max(1, Q), Q error, and zero-frequency error times 3."""
    fig = stage.achieved_macromodel or stage.achieved
    q = stage.section.q or 0.5
    terms = [max(1.0, q) * abs(fig.get("f0_error") or 0.0), abs(fig.get("q_error") or 0.0),
             3.0 * abs(fig.get("fz_error") or 0.0)]
    return max(t for t in terms if math.isfinite(t)) if any(math.isfinite(t) for t in terms) else math.inf


def _reselected(candidate: _Candidate, steps: list[DesignStep]) -> _Candidate:
    """The ``reselect`` step (module notes) on a design that misses; ``candidate`` itself when it meets,
    is unstable, or no other choice does better."""
    v = candidate.verdict
    if v is None or v.meets or not v.stable:
        return candidate
    req = candidate.document.requirement
    plans = list(candidate.plans)
    criteria = design_criteria(req, plans)
    current = v.worst_margin_db
    ranked = sorted(range(len(plans)), key=lambda k: -_figure_error(candidate.realized.stages[k]))
    changed = []
    for k in ranked[:RESELECT_STAGES]:
        choices = plans[k].alternatives
        if len(choices) < 2:
            continue
        check_deadline("workflows.reselect")
        trials = len(choices)
        values = {c.ref: np.array([choice[j].value for choice in choices]) for j, c in enumerate(plans[k].components)}
        batch = verify(circuit_roots(plans, values), criteria, precision_db=RESELECT_PRECISION_DB,
                       located_trials=trials)
        with np.errstate(invalid="ignore"):
            worst = np.where(batch.stable, np.nanmin(batch.margin_db, axis=1), -np.inf)
        i = int(np.argmax(worst))
        if worst[i] > current + RESELECT_PRECISION_DB:
            plans[k] = dataclasses.replace(plans[k], components=list(choices[i]))
            changed.append((k, i, current, float(worst[i])))
            current = float(worst[i])
        if current >= 0.0:
            break
    if not changed:
        return candidate
    result = dataclasses.replace(candidate, plans=plans, verdict=_plain_verdict(req, plans),
                                 document=dataclasses.replace(candidate.document, stages=_entries(plans)))
    what = "; ".join(f"stage {k + 1} takes its part choice {i + 1} ({before:.3g} dB to {after:.3g} dB)"
                     for k, i, before, after in changed)
    steps.append(_step("reselect", what, result))
    return result


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
