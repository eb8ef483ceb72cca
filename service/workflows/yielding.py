"""Designs to a yield target: the cheapest tolerance grades whose boards pass, confirmed by Monte Carlo.

A design request may name, per part kind, the tolerance grades the caller can
buy with a relative cost (or stock entries of one value in several
tolerances, each with a cost), and a yield target with the Monte Carlo options
of ``/v1/tolerance``.  :func:`design_to_yield` then:

1. designs the filter (:func:`service.workflows.designing.design`, one
   design of its loop with the reselect step, as the cost model counts it:
   the search widens reserves and adds orders itself, step 6);
2. builds the first-order yield model of the design on its own boards
   (:mod:`service.tolerance.surrogate`, a seed derived from the request's, so
   that the boards the assignment is chosen on are not those it is judged
   on);
3. centres the design among the part search's alternative values of each
   stage (:mod:`service.tolerance.centering`, after Bandler, Liu and Tromp,
   1976), keeping the centred design only when the verifier says it meets the
   requirement;
4. assigns the cheapest grades that reach the target on the model's boards
   (:mod:`service.tolerance.assignment`, after Karafin, 1971), with a guard
   for the sampling difference between those boards and the confirmation's
   (:data:`GUARD_SIGMAS`);
5. confirms it by Monte Carlo with the engine and verdict of ``/v1/tolerance``
   (:func:`service.tolerance.confirmation.verified_yield`; the same trials,
   seed and options there give the same passing boards).  The target is
   *reached* when the lower end of the 95 % Wilson interval is at or above it.
   A confirmation that falls short calibrates the model (an offset of its
   worst margins so that it counts the boards the verifier passed) and steps
   4-5 run again;
6. when no assignment can reach the target, designs again with a wider
   reserve for the band that limits the yield (by the margin the model says
   is missing); once the passband reserve is at its end, with a wider
   stopband reserve, which takes one more order when the approximation needs
   it; and goes back to step 2.

Every step is bounded before the search starts by the cost model
(:func:`service.workflows.costs.yield_budget`); a target out of reach is a
422 naming the requirement edge and the parts that limit it.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from service.config import Settings
from service.deadline import DeadlineExceeded
from service.errors import RolloffError
from service.realization.analysis import StagePlan, analyze
from service.response.verification import Band, Criteria
from service.tolerance.assignment import (Assignment, Grade, GradeSearch, PartGrades, efficient, needed_passes,
                                          trials_for)
from service.tolerance.centering import center
from service.tolerance.confirmation import YieldCheck, verified_yield
from service.tolerance.sampling import (DEFAULT_TOLERANCE, VariedPart, resolve_distribution, resolve_temperature,
                                        varied_parts)
from service.tolerance.surrogate import deviates, linear_model
from service.workflows import costs
from service.workflows.approximating import approximate
from service.workflows.designing import DesignOutcome, DesignRequest, design
from service.workflows.designing import _finish as finish_design   # the loop's own finish: board, verdict, warnings
from service.workflows.errors import WorkflowError, YieldUnreachable
from service.workflows.policy import passband_margin, stopband_margin
from service.workflows.verdicts import design_criteria

#: Designs the yield search may make (the first included), before the cost model's bound.
MAX_ATTEMPTS = 4
#: Designs of the design loop in one round of the search (its reselect step included): what the cost model
#: counts per round; the search widens the reserves itself.
DESIGNS_PER_ROUND = 1
#: Monte Carlo confirmations of one search, before the cost model's bound.
MAX_CONFIRMATIONS = 3
#: Boards of the first-order model: at least, at most (twice the confirmation's, within these).
SURROGATE_TRIALS = (2000, 4000)
#: The model's boards come from the request's seed plus this (so they are not the confirmation's boards).
SURROGATE_SEED_OFFSET = 7_919
#: How far (standard deviations of the difference of the two shares) the model's boards must pass above
#: the share the confirmation needs, so that the confirmation, on independent boards, likely finds it.
GUARD_SIGMAS = 1.0
#: Largest passband reserve the yield search designs with, as a fraction of the ripple.
MAX_PASSBAND_FRACTION = 0.95
#: Largest stopband reserve (dB) the yield search designs with.
MAX_STOPBAND_MARGIN_DB = 60.0
#: Smallest widening of the passband reserve, as a fraction of the ripple; the stopband reserve's step (dB).
MIN_PASSBAND_STEP_FRACTION = 0.1
STOPBAND_STEP_DB = 6.0
#: The widening asked of a reserve, as a multiple of the margin the model says is missing.
WIDEN_FACTOR = 1.3
#: Parts reported as limiting a target out of reach.
LIMITING_PARTS = 5

REACHED_RULE = "reached when the lower end of the 95 % Wilson interval is at or above the target"
INTERVAL = "Wilson score, 95 % (E. B. Wilson, JASA 22 (1927) 209-212)"
VERDICT = ("each board verified on the whole band like a design, as /v1/tolerance does: the same trials, seed and "
           "options there draw the same boards and pass the same ones")
METHOD = ("first-order yield model from the part sensitivities on a fixed set of boards (Spence and Soin, Tolerance "
          "Design of Electronic Circuits, 1988); centring among the part search's alternative values (after "
          "Bandler, Liu and Tromp, IEEE Trans. Circuits and Systems 23, 1976); cheapest grades by marginal analysis "
          "of the tolerance-cost problem (after Karafin, Bell System Technical Journal 50, 1971); confirmed by "
          "Monte Carlo with the verifier")


@dataclass(frozen=True)
class GradeOffer:
    """A tolerance grade of a part kind the caller can buy: relative tolerance and relative cost (> 0)."""

    tolerance: float
    cost: float


@dataclass(frozen=True)
class StockOffer:
    """One stock entry as the request gives it, with its relative cost (None: not priced)."""

    kind: str
    value: float
    tolerance: float
    cost: float | None = None
    dielectric: str | None = None
    part_id: str | None = None


@dataclass(frozen=True)
class MonteCarloSpec:
    """The Monte Carlo options of ``/v1/tolerance`` a yield is judged with (see
    :func:`service.tolerance.run.run_tolerance`)."""

    trials: int = 1000
    seed: int = 0
    distribution: str | dict = "gaussian"
    temperature: dict | None = None
    tempco_ppm_per_c: dict | None = None
    gbw_spread: float | None = None

    def as_dict(self) -> dict:
        return {"trials": self.trials, "seed": self.seed, "distribution": self.distribution,
                "temperature": self.temperature, "tempco_ppm_per_c": self.tempco_ppm_per_c,
                "gbw_spread": self.gbw_spread}


@dataclass(frozen=True)
class YieldTarget:
    """The share of boards that must meet the requirement (0 < target < 1) and how boards are drawn."""

    target: float
    monte_carlo: MonteCarloSpec = field(default_factory=MonteCarloSpec)


@dataclass(frozen=True)
class GradedDesignRequest:
    """A design request with priced grades and, optionally, a yield target.

    Attributes
    ----------
    design : DesignRequest
    grades : dict of str to tuple of GradeOffer
        Per kind (``resistor``, ``capacitor``) of series parts.
    stock : tuple of StockOffer
        Every stock entry of the request (entries of one value form that value's grades).
    target : YieldTarget or None
    """

    design: DesignRequest
    grades: dict[str, tuple[GradeOffer, ...]] = field(default_factory=dict)
    stock: tuple[StockOffer, ...] = ()
    target: YieldTarget | None = None


@dataclass(frozen=True)
class CostSummary:
    """Relative cost of the parts' grades (the caller's unit), and the two ends for comparison."""

    total: float
    all_cheapest: float
    all_tightest: float
    priced_parts: int

    def as_dict(self) -> dict:
        return {"total": self.total, "all_cheapest": self.all_cheapest, "all_tightest": self.all_tightest,
                "priced_parts": self.priced_parts,
                "rule": "sum over the parts of their grade's relative cost (parts without a priced grade count 0)"}


@dataclass
class YieldRound:
    """One design of the yield search and what became of it."""

    passband_margin_db: float | None
    stopband_margin_db: float | None
    order: int
    opamps: int
    nominal_margin_db: float | None
    centred: bool = False
    cheapest: float | None = None
    tightest: float | None = None
    cost: float | None = None
    confirmations: list[dict] = field(default_factory=list)
    outcome: str = ""

    def as_dict(self) -> dict:
        return {"passband_margin_db": self.passband_margin_db, "stopband_margin_db": self.stopband_margin_db,
                "order": self.order, "opamps": self.opamps, "nominal_worst_margin_db": self.nominal_margin_db,
                "centred": self.centred, "estimated_yield_cheapest": self.cheapest,
                "estimated_yield_tightest": self.tightest, "assignment_cost": self.cost,
                "confirmations": list(self.confirmations), "outcome": self.outcome}


@dataclass
class YieldReport:
    """The confirmed yield of the returned design and how it was reached."""

    target: float
    check: YieldCheck
    spec: MonteCarloSpec
    rounds: list[YieldRound]

    @property
    def reached(self) -> bool:
        return self.check.ci95[0] >= self.target

    def as_dict(self) -> dict:
        c = self.check
        return {
            "target": self.target, "reached": self.reached, "fraction": c.fraction, "passed": c.passed,
            "trials": c.trials, "ci95_low": c.ci95[0], "ci95_high": c.ci95[1], "unstable": c.unstable,
            "failures_by_criterion": c.failures(), "monte_carlo": self.spec.as_dict(), "rule": REACHED_RULE,
            "interval": INTERVAL, "verdict": VERDICT, "method": METHOD,
            "rounds": [r.as_dict() for r in self.rounds],
        }


@dataclass
class GradedOutcome:
    """A design with its parts' grades: the design document, plus ``yield`` and ``cost``."""

    outcome: DesignOutcome
    report: YieldReport | None = None
    cost: CostSummary | None = None

    @property
    def document(self):
        return self.outcome.document

    @property
    def plans(self) -> list[StagePlan]:
        return self.outcome.plans

    def as_dict(self) -> dict:
        d = self.outcome.as_dict()
        if self.report is not None:
            d["yield"] = self.report.as_dict()
        if self.cost is not None:
            d["cost"] = self.cost.as_dict()
        return d


# ---------------------------------------------------------------------------------------------- grades


def _stock_kinds(request: GradedDesignRequest) -> set[str]:
    """Part kinds the request takes from its stock list."""
    parts = request.design.parts
    return {k for k in ("resistor", "capacitor") if parts is not None and parts.kind(k).stock is not None}


def _tempco_for(plans: list[StagePlan], draw_order, dist: dict, spec: MonteCarloSpec,
                dielectrics: set[str | None]) -> dict[tuple[str, str | None], float]:
    """Temperature-coefficient bound of every capacitor with each of ``dielectrics`` (the rule of
    :func:`service.tolerance.sampling.varied_parts`, overrides included)."""
    out = {}
    for d in dielectrics:
        swapped = [dataclasses.replace(p, components=[dataclasses.replace(c, dielectric=d) if c.kind == "capacitor"
                                                      else c for c in p.components]) for p in plans]
        for vp in varied_parts(swapped, draw_order, dist, spec.tempco_ppm_per_c, None):
            out[(vp.ref, d)] = vp.tempco_ppm_per_c
    return out


def part_grades(outcome: DesignOutcome, request: GradedDesignRequest, parts: list[VariedPart],
                spec: MonteCarloSpec) -> list[PartGrades]:
    """The grades every passive varied part may take, in the order of ``parts``."""
    comps = {c.ref: c for p in outcome.plans for c in p.components}
    stock_kinds = _stock_kinds(request)
    dist = resolve_distribution(spec.distribution)
    wanted = {s.dielectric for s in request.stock if s.kind == "capacitor"}
    tempcos = {}
    if wanted - {c.dielectric for c in comps.values() if c.kind == "capacitor"}:
        tempcos = _tempco_for(outcome.plans, outcome.document.draw_order(), dist, spec, wanted)
    out = []
    for vp in parts:
        if vp.kind == "opamp":
            continue
        c = comps[vp.ref]
        own = DEFAULT_TOLERANCE[c.kind] if c.tolerance is None else c.tolerance
        grades: list[Grade] = []
        if c.kind in stock_kinds:
            for s in request.stock:
                if s.kind == c.kind and math.isclose(s.value, c.value, rel_tol=1e-9):
                    tc = tempcos.get((c.ref, s.dielectric), vp.tempco_ppm_per_c) if c.kind == "capacitor" \
                        else vp.tempco_ppm_per_c
                    grades.append(Grade(s.tolerance, s.cost, tc, s.part_id, s.dielectric))
        else:
            grades = [Grade(g.tolerance, g.cost, vp.tempco_ppm_per_c) for g in request.grades.get(c.kind, ())]
        if not grades:
            grades = [Grade(own, None, vp.tempco_ppm_per_c, c.part_id, c.dielectric)]
        out.append(PartGrades(c.ref, efficient(grades)))
    return out


def graded(outcome: DesignOutcome, chosen: dict[str, Grade], stock_kinds: set[str]) -> DesignOutcome:
    """``outcome`` with each part of ``chosen`` in its grade (tolerance, cost; part id and dielectric of a
    stock grade).  Values, figures and the verdict do not depend on tolerances and are kept."""
    def comp(c):
        g = chosen.get(c.ref)
        if g is None:
            return c
        stock = c.kind in stock_kinds
        return dataclasses.replace(c, tolerance=g.tolerance, cost=g.cost,
                                   part_id=g.part_id if stock else c.part_id,
                                   dielectric=(g.dielectric or c.dielectric) if c.kind == "capacitor" else None)

    d = outcome.design
    stages = [dataclasses.replace(st, components=[comp(c) for c in st.components]) for st in d.stages]
    plans = [dataclasses.replace(p, components=[comp(c) for c in p.components]) for p in d.plans]
    by_ref = {c.ref: c for p in plans for c in p.components}
    bom = []
    for row in d.bom:
        row = dict(row)
        c = by_ref.get(row.get("ref"))
        if c is not None:
            row.update(tolerance=c.tolerance, part_id=c.part_id,
                       dielectric=c.dielectric if c.kind == "capacitor" else None)
        bom.append(row)
    realized = dataclasses.replace(d, stages=stages, plans=plans, bom=bom)
    doc = outcome.document
    document = dataclasses.replace(doc, stages=tuple(dataclasses.replace(
        se, components=tuple(comp(c) for c in se.components)) for se in doc.stages))
    return dataclasses.replace(outcome, design=realized, document=document)


def _cost_summary(grades: list[PartGrades], levels: np.ndarray) -> CostSummary:
    priced = sum(1 for p, lv in zip(grades, levels) if p.grades[lv].cost is not None)
    return CostSummary(total=float(sum(p.grades[lv].price for p, lv in zip(grades, levels))),
                       all_cheapest=float(sum(p.grades[0].price for p in grades)),
                       all_tightest=float(sum(p.grades[-1].price for p in grades)), priced_parts=priced)


def _chosen(grades: list[PartGrades], levels: np.ndarray) -> dict[str, Grade]:
    return {p.ref: p.grades[int(lv)] for p, lv in zip(grades, levels)}


# ---------------------------------------------------------------------------------------------- the search


def _check_request(request: GradedDesignRequest, settings: Settings) -> None:
    t = request.target
    if t is None:
        return
    req = request.design.requirement
    if not req.by_specification:
        raise WorkflowError("a yield target needs a requirement by passband_hz, stopband_hz, passband_ripple_db and "
                            "stopband_attenuation_db: a design by order states nothing to verify boards against",
                            field="yield")
    if not 0.0 < t.target < 1.0:
        raise WorkflowError(f"yield.target must lie strictly between 0 and 1, got {t.target!r}", field="yield.target")
    mc = t.monte_carlo
    costs.check_limit("max_trials", mc.trials, settings, field="yield.trials", what="trials")
    if needed_passes(t.target, mc.trials) is None:
        raise WorkflowError(
            f"with {mc.trials} trials the lower end of the 95 % Wilson interval stays below {t.target:g} even when "
            f"every board passes: the target needs at least {trials_for(t.target)} trials", field="yield.trials")
    # options read once, with /v1/tolerance's rules, before any work
    resolve_distribution(mc.distribution)
    resolve_temperature(mc.temperature)


def _stopbands(requirement) -> list[tuple[float, float]]:
    v = requirement.stopband_hz
    return [v] if isinstance(v, tuple) else []


def _centred(outcome: DesignOutcome, choice: tuple[int, ...], settings: Settings) -> DesignOutcome:
    """``outcome`` with each stage in its chosen alternative (-1: kept), re-analysed, put on its board and
    verified as the design loop finishes a design."""
    plans = [dataclasses.replace(p, components=list(p.alternatives[k])) if k >= 0 else p
             for p, k in zip(outcome.plans, choice)]
    d = outcome.design
    req = outcome.document.requirement
    realized = analyze(plans, response=d.response, family=d.family, order=d.order, options=d.options,
                       part_ranges=d.part_ranges, part_series=d.part_series, notes=d.notes,
                       stopbands_hz=_stopbands(req))
    document = dataclasses.replace(outcome.document, stages=tuple(dataclasses.replace(
        se, components=tuple(p.components)) for se, p in zip(outcome.document.stages, plans)))
    centred = finish_design(realized, document, settings)
    centred.steps = list(outcome.steps)
    return centred


@dataclass
class _Model:
    """One design's first-order model: its parts and grades, the search boards and the check boards."""

    outcome: DesignOutcome
    criteria: Criteria
    parts: list[VariedPart]
    grades: list[PartGrades]
    search: GradeSearch
    check: GradeSearch


def _model(outcome: DesignOutcome, request: GradedDesignRequest, t: YieldTarget) -> _Model:
    mc = t.monte_carlo
    plans = outcome.plans
    criteria = design_criteria(outcome.document.requirement, plans)
    dist = resolve_distribution(mc.distribution)
    temp = resolve_temperature(mc.temperature)
    parts = varied_parts(plans, outcome.document.draw_order(), dist, mc.tempco_ppm_per_c, mc.gbw_spread)
    grades = part_grades(outcome, request, parts, mc)
    ended = {i: s.checked_to_hz for i, s in enumerate(outcome.verdict.verdict.segments) if s.ended_hz is not None} \
        if outcome.verdict is not None and outcome.verdict.verdict.stable else None
    model = linear_model(plans, parts, criteria, ended_hz=ended)
    n_search = _model_trials(mc.trials)
    seed_search = (mc.seed + SURROGATE_SEED_OFFSET) % (2 ** 63)
    search = GradeSearch(model, deviates(parts, n_search, seed_search, temp), grades)
    check = GradeSearch(model, deviates(parts, mc.trials, mc.seed, temp), grades)
    return _Model(outcome, criteria, parts, grades, search, check)


def _model_trials(trials: int) -> int:
    return min(max(2 * trials, SURROGATE_TRIALS[0]), SURROGATE_TRIALS[1])


def _nominal(outcome: DesignOutcome) -> float | None:
    v = outcome.verdict
    return None if v is None else v.verdict.worst_margin_db


def _opamps(outcome: DesignOutcome) -> int:
    return sum(len(p.opamps) for p in outcome.plans)


def _calibrate(m: _Model, levels: np.ndarray, verified: np.ndarray) -> None:
    """Offset the model's worst margins so that it counts, on the confirmation's boards, the boards the
    verifier passed there (the model's own error, measured on boards it was not chosen on)."""
    w = np.sort(m.check.worst(m.check.gains(levels)) - m.check.offset_db)[::-1]
    n = int(verified.sum())
    if n >= w.size:
        return
    shift = -float(w[0]) - 1e-6 if n == 0 else -0.5 * float(w[n - 1] + w[n])
    offset = min(m.search.offset_db, shift)
    m.search.offset_db = offset
    m.check.offset_db = offset


def _goal(m: _Model, needed_check: int) -> int:
    """Boards of the model's own set that must pass so that the confirmation, on other boards, likely finds
    ``needed_check`` of its boards passing: the same share plus :data:`GUARD_SIGMAS` standard deviations of
    the difference of two binomial shares (the model's boards and the confirmation's)."""
    s, c = m.search, m.check
    f = needed_check / c.trials
    sd = math.sqrt(max(f * (1.0 - f), 1.0 / c.trials) * (1.0 / c.trials + 1.0 / s.trials))
    return min(s.trials, int(math.ceil((f + GUARD_SIGMAS * sd) * s.trials)))


def _assign(m: _Model, needed_check: int) -> Assignment | None:
    """Cheapest grades the model predicts to pass the goal of :func:`_goal` on its own boards (None: none)."""
    return m.search.assign(_goal(m, needed_check))


def _missing_margin(m: _Model, needed_check: int) -> tuple[Band, float]:
    """The band that limits the yield at the tightest grades and by how much (dB) its boards' worst margins
    would have to rise for enough of them to pass."""
    s = m.search
    seg, _, _ = s.limiting(s.top)
    band = m.criteria.limits[seg].band
    w = np.sort(s.worst(s.gains(s.top)))[::-1]
    k = max(0, min(s.trials, _goal(m, needed_check)) - 1)
    return band, max(0.0, -float(w[k]))


def _next_request(request: DesignRequest, outcome: DesignOutcome, band: Band, missing_db: float,
                  settings: Settings) -> tuple[DesignRequest, str] | None:
    """The next design: a wider reserve for ``band`` by what is missing, else one more order."""
    req = request.requirement
    s = outcome.document.settings
    pb = s.passband_margin_db if s.passband_margin_db is not None else passband_margin(req.passband_ripple_db,
                                                                                      request.passband_margin_db)
    sb = s.stopband_margin_db if s.stopband_margin_db is not None else stopband_margin(request.stopband_margin_db)
    cap = MAX_PASSBAND_FRACTION * req.passband_ripple_db
    if band is Band.PASSBAND and pb < cap * (1 - 1e-9):
        step = max(WIDEN_FACTOR * missing_db, MIN_PASSBAND_STEP_FRACTION * req.passband_ripple_db)
        new = min(cap, pb + step)
        return (dataclasses.replace(request, passband_margin_db=new, stopband_margin_db=sb),
                f"passband reserve {pb:.4g} dB to {new:.4g} dB")
    if sb < MAX_STOPBAND_MARGIN_DB:
        # a stopband that limits, or a passband reserve at its end: a wider stopband reserve (less excess
        # selectivity to spread over the stages' Q; one more order when the reserve needs it)
        step = max(WIDEN_FACTOR * missing_db if band is Band.STOPBAND else 0.0, STOPBAND_STEP_DB)
        new = min(MAX_STOPBAND_MARGIN_DB, sb + step)
        order = outcome.design.order
        try:
            more = approximate(req.tightened(pb, new), settings).order > order
        except DeadlineExceeded:
            raise
        except RolloffError:        # no order within the limit meets the wider reserve
            return None
        return (dataclasses.replace(request, passband_margin_db=pb, stopband_margin_db=new),
                f"stopband reserve {sb:.4g} dB to {new:.4g} dB" + (f" (order {order} to at least {order + 1})"
                                                                    if more else ""))
    return None


def _unreachable(t: YieldTarget, best: _Model, rounds: list[YieldRound]) -> YieldUnreachable:
    s = best.search
    seg, f, parts = s.limiting(s.top, LIMITING_PARTS)
    lim = best.criteria.limits[seg]
    fraction = s.passes(s.top) / s.trials
    stage_of = {p.ref: p.stage + 1 for p in best.parts}
    names = [best.grades[i].ref for i, _ in parts]
    limiting = {"band": lim.band.value, "start_hz": lim.start_hz,
                "stop_hz": lim.stop_hz if math.isfinite(lim.stop_hz) else None, "limit_db": lim.limit_db,
                "frequency_hz": f,
                "parts": [{"ref": best.grades[i].ref, "stage": stage_of.get(best.grades[i].ref), "share": share}
                          for i, share in parts]}
    last = rounds[-1] if rounds else None
    verified = [c for r in rounds for c in r.confirmations]
    best_check = max(verified, key=lambda c: c["passed"] / c["trials"]) if verified else None
    detail = (f"yield.target {t.target:g} cannot be reached: with every part at its tightest grade about "
              f"{100 * fraction:.1f} % of boards pass (first-order estimate) after {len(rounds)} design"
              f"{'s' if len(rounds) != 1 else ''}"
              + (f" (last: order {last.order}, passband reserve {last.passband_margin_db:.4g} dB, stopband reserve "
                 f"{last.stopband_margin_db:.4g} dB)" if last and last.passband_margin_db is not None else "")
              + (f"; the best confirmed by Monte Carlo passed {best_check['passed']} of {best_check['trials']} boards "
                 f"(Wilson interval {best_check['ci95_low']:.3f}-{best_check['ci95_high']:.3f})" if best_check else "")
              + f"; the {lim.band.value} from {lim.start_hz:g} Hz"
              + (f" to {lim.stop_hz:g} Hz" if math.isfinite(lim.stop_hz) else "")
              + f" limits it, worst near {f:.6g} Hz; the parts that limit it most: {', '.join(names)}. "
              "Offer tighter grades for them, relax the requirement, or lower the target")
    return YieldUnreachable(detail, field="yield.target",
                            details={"limiting": limiting, "estimated_best_yield": fraction,
                                     "best_confirmed": best_check, "rounds": [r.as_dict() for r in rounds]})


def _priced_only(request: GradedDesignRequest, outcome: DesignOutcome) -> GradedOutcome:
    """No target: every part at its cheapest grade."""
    spec = MonteCarloSpec()
    dist = resolve_distribution(spec.distribution)
    parts = varied_parts(outcome.plans, outcome.document.draw_order(), dist)
    grades = part_grades(outcome, request, parts, spec)
    levels = np.zeros(len(grades), dtype=int)
    out = graded(outcome, _chosen(grades, levels), _stock_kinds(request))
    return GradedOutcome(out, None, _cost_summary(grades, levels))


def design_to_yield(request: GradedDesignRequest, settings: Settings) -> GradedOutcome:
    """Design with priced grades, and to the yield target when one is given (see the module notes).

    Raises
    ------
    WorkflowError
        A target outside (0, 1), or one the trials cannot show (``field`` names it).
    LimitExceeded
        Trials or the whole search over the configured limits (``yield.trials``).
    YieldUnreachable
        No design and grades within the bounds reach the target: the limiting edge and parts.
    """
    _check_request(request, settings)
    t = request.target
    if t is None:
        return _priced_only(request, design(request.design, settings))
    mc = t.monte_carlo
    req = request.design.requirement
    pb0 = passband_margin(req.passband_ripple_db, request.design.passband_margin_db)
    sb0 = stopband_margin(request.design.stopband_margin_db)
    sections = len(approximate(req.tightened(pb0, sb0), settings).sections)
    model_trials = _model_trials(mc.trials)
    budget = costs.yield_budget(sections, mc.trials, model_trials, settings, most_attempts=MAX_ATTEMPTS,
                                most_confirmations=MAX_CONFIRMATIONS)
    needed = needed_passes(t.target, mc.trials)
    rounds: list[YieldRound] = []
    best: _Model | None = None
    confirmations = 0
    design_request = request.design
    attempt = 0
    while attempt < budget.attempts:
        # one design of the loop (with its reselect step), as the budget counts it: the search widens the
        # reserves or adds an order itself (step 6)
        outcome = design(design_request, settings, most_attempts=DESIGNS_PER_ROUND)
        if attempt == 0:   # the budget again with the design's own shape (never below one design and one check)
            budget = costs.yield_budget(len(outcome.plans), mc.trials, model_trials, settings,
                                        most_attempts=MAX_ATTEMPTS, most_confirmations=MAX_CONFIRMATIONS,
                                        opamps=_opamps(outcome), refuse=False)
        attempt += 1
        s = outcome.document.settings
        rnd = YieldRound(s.passband_margin_db, s.stopband_margin_db, outcome.design.order, _opamps(outcome),
                         _nominal(outcome))
        rounds.append(rnd)
        m = _model(outcome, request, t)
        centring = center(outcome.plans, m.search, goal=_goal(m, needed))
        if centring.changed:
            centred = _centred(outcome, centring.choice, settings)
            better = (_nominal(centred) or -math.inf) > (_nominal(outcome) or -math.inf)
            if centred.verdict.meets or (not outcome.verdict.meets and better):
                m = _model(centred, request, t)
                rnd.centred = True
                rnd.nominal_margin_db = _nominal(centred)
        s_ = m.search
        rnd.cheapest = s_.passes(np.zeros_like(s_.top)) / s_.trials
        rnd.tightest = s_.passes(s_.top) / s_.trials
        if best is None or rnd.tightest > best.search.passes(best.search.top) / best.search.trials:
            best = m
        confirmed: set[bytes] = set()
        raise_by = 0
        while confirmations < budget.confirmations:
            a = _assign(m, needed + raise_by)
            while a is not None and a.levels.tobytes() in confirmed and needed + raise_by < mc.trials:
                # the calibrated model proposes grades already confirmed short: ask it for more boards
                raise_by += max(1, needed - check.passed)
                a = _assign(m, min(needed + raise_by, mc.trials))
            if a is None or a.levels.tobytes() in confirmed:
                rnd.outcome = "the grades cannot reach the target on the model's boards"
                break
            confirmed.add(a.levels.tobytes())
            rnd.cost = a.cost
            result = graded(m.outcome, _chosen(m.grades, a.levels), _stock_kinds(request))
            check = verified_yield(result.plans, draw_order=result.document.draw_order(), criteria=m.criteria,
                                   trials=mc.trials, seed=mc.seed, distribution=mc.distribution,
                                   temperature=mc.temperature, tempco_ppm_per_c=mc.tempco_ppm_per_c,
                                   gbw_spread=mc.gbw_spread, max_trials=settings.max_trials)
            confirmations += 1
            rnd.confirmations.append({"passed": check.passed, "trials": check.trials, "fraction": check.fraction,
                                      "ci95_low": check.ci95[0], "ci95_high": check.ci95[1], "cost": a.cost})
            if check.ci95[0] >= t.target:
                rnd.outcome = "reached"
                return GradedOutcome(result, YieldReport(t.target, check, mc, rounds),
                                     _cost_summary(m.grades, a.levels))
            rnd.outcome = "the verified yield fell short; the model was calibrated against it"
            _calibrate(m, a.levels, check.passes())
        else:
            rnd.outcome = (rnd.outcome + "; " if rnd.outcome else "") + "no confirmation left in the work budget"
        if confirmations >= budget.confirmations or attempt >= budget.attempts:
            break
        band, missing = _missing_margin(m, needed)
        nxt = _next_request(design_request, m.outcome, band, missing, settings)
        if nxt is None:
            rnd.outcome += "; no wider reserve or further order to try"
            break
        design_request, why = nxt
        rnd.outcome += f"; next: {why}"
    raise _unreachable(t, best, rounds)


__all__ = ["GradeOffer", "StockOffer", "MonteCarloSpec", "YieldTarget", "GradedDesignRequest", "GradedOutcome",
           "YieldReport", "YieldRound", "CostSummary", "design_to_yield", "graded", "part_grades"]
