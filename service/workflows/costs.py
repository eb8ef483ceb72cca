"""The cost model of every request: what a request will cost is checked against the limits before any work.

Each estimate counts the terms that cost time and memory -- stages and their
op-amps, the whole-circuit path that op-amps with output resistance force,
frequency and time points, Monte Carlo trials, sensitivity frequencies,
figures -- in *work units*, a measured proxy of CPU time: about
:data:`UNITS_PER_SECOND` units per second of one core on the machines the
service was measured on (see ``tests/bench/bench_limits.py``).  A request over
``ROLLOFF_MAX_WORK`` units is refused with a 422 naming the limit and what would
fit; a deadline (``service.deadline``) is the second line of defence.
"""

from __future__ import annotations

from dataclasses import dataclass

from service.config import Settings, setting_env
from service.errors import LimitExceeded

#: Work units per second of CPU (measured proxy; see the module notes).
UNITS_PER_SECOND = 16_000_000
#: Per-trial, per-point cost apart from the circuit (percentile stores, per-trial figures), in stage units
#: (halved once the percentiles came from selection and the reply from whole-array encoding).
PER_TRIAL_POINT_WEIGHT = 1
#: Frequencies every Monte Carlo trial is evaluated at whatever the caller's grid (metric grid, verification).
METRIC_GRID_POINTS = 400
#: A stage of n op-amps costs about n^2 units per trial and point; a loaded circuit (op-amps with output
#: resistance, solved whole) costs about (unknowns)^3 / LOADED_DIVISOR per trial and point.
LOADED_DIVISOR = 8
#: Units per trial and point of one stage by topology, where more than (op-amps)^2: measured by Monte Carlo
#: of one to thirteen stages (CPU per trial and point x UNITS_PER_SECOND: multiple-feedback 2.2,
#: Delyiannis-Friend notch 2.5-3.6, twin-T notch 1.3, Sallen-Key 0.3-0.9), with about a third to spare.
TOPOLOGY_POINT_UNITS = {"multiple_feedback": 3.0, "delyiannis_friend_notch": 4.5, "twin_t_notch": 2.0}
#: Unknowns of the MNA system per stage (a generous average over the topologies).
UNKNOWNS_PER_STAGE = 9
#: Fixed cost of analysing one stage (poles, zeros, op-amp requirement search): units.
STAGE_ANALYSIS_UNITS = 400_000
#: Cost of verifying one Monte Carlo trial, per stage (its roots, then the perturbation bound or, for a board
#: it cannot prove -- every failing board --, the full search): units, measured (about 56 us of CPU per stage
#: and board here when every board fails, bench_limits' verified documents at their limit).
VERIFICATION_UNITS_PER_STAGE = 900
#: Cost of one verification of a design (the full search), per stage: units.
VERIFICATION_UNITS_PER_DESIGN_STAGE = 200_000
#: Cost of one SVG figure (a response's or a tolerance run's, with the response's passband detail): units.
#: Measured with ``tests/bench/bench_figures.py`` (CPU time of one drawing, after the first): medians of
#: 145-220 ms, upper quartiles up to 240 ms, on a loaded 2-core machine; about 220 ms here.
FIGURE_UNITS = 3_500_000


def check_limit(name: str, asked: float, settings: Settings, *, field: str, what: str) -> None:
    """Raise :class:`LimitExceeded` when ``asked`` exceeds the setting ``name``."""
    value = getattr(settings, name)
    if asked > value:
        raise LimitExceeded(
            f"{what} {asked:g} exceeds the limit {name} = {value} (set by {setting_env(name)})",
            limit=name, value=value, setting=setting_env(name), field=field)


def grid_points(grid, settings: Settings, *, field: str = "frequencies") -> int:
    """Points of a frequency grid (a FrequencyGrid, a list, or None for the default), checked against
    ``ROLLOFF_MAX_FREQUENCY_POINTS`` with the request's field name."""
    if grid is None:
        return 0
    points = getattr(grid, "points", None)
    if points is not None:
        check_limit("max_frequency_points", points, settings, field=f"{field}.points", what="frequency points")
        return int(points)
    check_limit("max_frequency_points", len(grid), settings, field=field, what="frequency points")
    return len(grid)


@dataclass(frozen=True)
class CircuitShape:
    """What a design's circuit costs to evaluate: its stages, op-amps per stage, each stage's topology
    (when known), and whether it is loaded (op-amps with output resistance: solved whole)."""

    opamps_per_stage: tuple[int, ...]
    loaded: bool = False
    #: Topology name per stage (empty: not known yet, weighed by op-amps alone).
    topologies: tuple[str, ...] = ()

    @classmethod
    def of(cls, plans) -> "CircuitShape":
        """The shape of a realized design (a sequence of StagePlan)."""
        return cls(tuple(len(p.opamps) for p in plans),
                   loaded=any((u.rout_ohm or 0.0) > 0 for p in plans for u in p.opamps),
                   topologies=tuple(str(getattr(p.topology, "name", p.topology)) for p in plans))

    @property
    def stages(self) -> int:
        return len(self.opamps_per_stage)

    def point_weight(self) -> float:
        """Units per trial and frequency point: per stage the larger of (op-amps)^2 and its topology's
        measured weight (:data:`TOPOLOGY_POINT_UNITS`)."""
        if self.loaded:
            n = UNKNOWNS_PER_STAGE * self.stages
            return n ** 3 / LOADED_DIVISOR
        names = self.topologies or ("",) * self.stages
        return float(sum(max(max(1, k) ** 2, TOPOLOGY_POINT_UNITS.get(t, 1.0))
                         for k, t in zip(self.opamps_per_stage, names)))


def _refuse(units: float, settings: Settings, *, field: str, what: str, fits: str = "") -> None:
    if units > settings.max_work:
        raise LimitExceeded(
            f"{what} is estimated at {units:,.0f} work units, above the limit max_work = {settings.max_work:,} "
            f"(set by ROLLOFF_MAX_WORK; about {settings.max_work / UNITS_PER_SECOND:.1f} s of CPU)"
            + (f"; {fits}" if fits else ""),
            limit="max_work", value=settings.max_work, setting="ROLLOFF_MAX_WORK", field=field)


def analysis_units(shape: CircuitShape, verifications: int = 1) -> float:
    """Evaluating a design once: stage analyses, the whole-circuit roots when loaded, verifications."""
    units = STAGE_ANALYSIS_UNITS * shape.stages * (1 + (max(shape.opamps_per_stage, default=0) > 1))
    if shape.loaded:
        units += (UNKNOWNS_PER_STAGE * shape.stages) ** 3 * 40
    return units + verifications * VERIFICATION_UNITS_PER_DESIGN_STAGE * max(1, shape.stages)


def check_design(shape: CircuitShape, settings: Settings, *, verifications: int = 3, field: str = "order") -> None:
    """A design or evaluation of ``shape`` (verified up to ``verifications`` times) fits the budget."""
    _refuse(analysis_units(shape, verifications), settings, field=field, what="analysing this design")


#: Cost of one design of the design loop (transfer function, part search, analysis, verification) and of
#: its reselect step, per stage: units (measured at most about 55 ms per stage each here, on every third
#: requirement of ``tests/realization/requirement_cases.py``).
DESIGN_ATTEMPT_UNITS_PER_STAGE = 900_000
RESELECT_UNITS_PER_STAGE = 900_000


def design_attempts(stages: int, settings: Settings, most: int) -> int:
    """How many designs of ``stages`` stages the design loop may make (1 to ``most``) within
    ``ROLLOFF_MAX_WORK``: the first (already admitted by :func:`check_design`) and as many more as the
    budget left after it holds."""
    per = (DESIGN_ATTEMPT_UNITS_PER_STAGE + RESELECT_UNITS_PER_STAGE) * max(1, stages)
    return max(1, min(most, int(settings.max_work // per)))


def response_units(shape: CircuitShape | None, points: int, time_points: int, *, figure: bool = False) -> float:
    """Work units of a response of a circuit (or, with ``shape`` None, of a transfer function)."""
    units = 0.0
    if shape is not None:
        units += analysis_units(shape, 1) + points * shape.point_weight() * 4
    return units + time_points * 50 + (FIGURE_UNITS if figure else 0)


def check_response(shape: CircuitShape | None, points: int, time_points: int, settings: Settings, *,
                   figure: bool = False) -> None:
    """A response of a circuit (or, with ``shape`` None, of a transfer function) fits the budget."""
    _refuse(response_units(shape, points, time_points, figure=figure), settings, field="frequencies",
            what="this response")


def check_tolerance(shape: CircuitShape, trials: int, points: int, sensitivity_points: int, settings: Settings, *,
                    verified: bool, figure: bool = False) -> None:
    """A Monte Carlo run fits the budget; the problem says how many trials would fit."""
    check_limit("max_trials", trials, settings, field="trials", what="trials")
    points = max(points, METRIC_GRID_POINTS)
    per_trial = points * (shape.point_weight() + PER_TRIAL_POINT_WEIGHT)
    if verified:
        per_trial += VERIFICATION_UNITS_PER_STAGE * sum(max(1, k) for k in shape.opamps_per_stage)
        if shape.loaded:
            per_trial += (UNKNOWNS_PER_STAGE * shape.stages) ** 3 * 20
    fixed = analysis_units(shape, 2 if figure else 1) + (FIGURE_UNITS if figure else 0)  # a figure: nominal verdict
    # sensitivity and worst case: two circuit evaluations per part and frequency
    parts = shape.stages * 6
    fixed += sensitivity_points * parts * 2 * shape.point_weight() * 50
    units = fixed + trials * per_trial
    fits = max(0, int((settings.max_work - fixed) // per_trial)) if per_trial else trials
    _refuse(units, settings, field="trials", what=f"a Monte Carlo run of {trials:,} trials at {points} points",
            fits=f"use at most {fits:,} trials at {points} points")


#: The roots of one Monte Carlo board's circuit, per stage: units (the verifier's own cost per board is
#: VERIFICATION_UNITS_PER_STAGE per op-amp, as for /v1/tolerance).
ROOTS_UNITS_PER_STAGE = 300
#: Op-amps per stage assumed before a design exists (the worst the automatic topologies use).
OPAMPS_PER_STAGE_BOUND = 4
#: Passive parts per stage assumed for the first-order yield model (a generous average of the topologies).
PARTS_PER_STAGE = 8
#: First-order model, centring and grade search on one board for one part: units (their array passes over
#: the critical frequencies, summed over the search's moves; measured in tests/bench/bench_yield.py).
SURROGATE_UNITS_PER_BOARD_PART = 100


@dataclass(frozen=True)
class YieldBudget:
    """What a yield-targeted design may do: designs and Monte Carlo confirmations, and their total work."""

    attempts: int
    confirmations: int
    units: float


def yield_budget(stages: int, trials: int, model_trials: int, settings: Settings, *, most_attempts: int,
                 most_confirmations: int, opamps: int | None = None, refuse: bool = True) -> YieldBudget:
    """Bound the whole yield search before it starts (``trials`` per confirmation).

    One design (with its reselect step), its first-order model on ``model_trials`` boards, and one
    confirmation must fit ``ROLLOFF_MAX_WORK`` -- else (with ``refuse``) a 422 naming ``yield.trials`` with
    what fits; ``opamps`` is the design's op-amp count once known (before: a bound per stage).  The
    rest of the budget buys further designs (wider reserves, more order), then further confirmations
    (calibration rounds), up to the given most.
    """
    check_limit("max_trials", trials, settings, field="yield.trials", what="trials")
    stages = max(1, stages)
    design = (DESIGN_ATTEMPT_UNITS_PER_STAGE + RESELECT_UNITS_PER_STAGE) * stages
    model = model_trials * PARTS_PER_STAGE * stages * SURROGATE_UNITS_PER_BOARD_PART
    n_opamps = OPAMPS_PER_STAGE_BOUND * stages if opamps is None else max(stages, opamps)
    per_trial = VERIFICATION_UNITS_PER_STAGE * n_opamps + ROOTS_UNITS_PER_STAGE * stages
    confirm = trials * per_trial
    first = design + model + confirm
    fits = max(0, int((settings.max_work - design - model) // per_trial))
    if refuse:
        _refuse(first, settings, field="yield.trials",
                what=f"a yield-targeted design with {trials:,} trials per Monte Carlo confirmation",
                fits=f"use at most {fits:,} trials")
    left = max(0.0, settings.max_work - first)
    extra = int(min(most_attempts - 1, left // (design + model)))
    attempts, left = 1 + extra, left - extra * (design + model)
    more = int(min(most_confirmations - 1, left // confirm))
    confirmations = 1 + more
    return YieldBudget(attempts, confirmations,
                       attempts * (design + model) + confirmations * confirm)


def check_compare(sections: list[int], trials: int, settings: Settings, *, yield_units_per_board_part: float) -> None:
    """A comparison that realizes every meeting family (``sections`` each) and estimates its yield on ``trials``
    boards fits the budget; the problem names ``parts`` (the field that asks for the designs)."""
    stages = sum(max(1, s) for s in sections)
    units = stages * (DESIGN_ATTEMPT_UNITS_PER_STAGE + trials * PARTS_PER_STAGE * yield_units_per_board_part)
    _refuse(units, settings, field="parts",
            what=f"realizing {len(sections)} families ({stages} stages) with {trials:,} boards each",
            fits="compare without parts (op-amps and GBW by the automatic topology rule), or with fewer trials")


#: Noise analysis: units per frequency point per unit of the circuit's point weight (one adjoint solve of the
#: stages), and per noise source and point (its transfer and density); measured through the workflow (about
#: 25 ms of CPU for four stages on 2,500 points here).
NOISE_POINT_FACTOR = 10
NOISE_SOURCE_UNITS = 4
#: Headroom: each op-amp output (and the filter's) is one AC solve on the grid plus the peak refinement (two
#: zooms of 41 points), after preparing the circuit's stages for that output (about 5 ms of CPU each).
HEADROOM_POINT_FACTOR = 8
HEADROOM_REFINE_POINTS = 82
HEADROOM_UNITS_PER_OUTPUT = 80_000
#: A supply: the bias network, the coupling capacitor search, DC solves and the passband check, per stage: units.
SUPPLY_UNITS_PER_STAGE = 200_000


@dataclass(frozen=True)
class LevelsWork:
    """The noise, headroom and supply work of one request on a design's circuit.

    Attributes
    ----------
    noise_points : int
        Frequencies of the noise analysis (shown and integration grid together); 0 for none.
    noise_sources : int
        Noise sources of the circuit (resistors, three per noisy op-amp).
    headroom_points : int
        Frequencies of the level analysis; 0 for none.
    opamps : int
        Op-amp outputs analysed (the mid-rail buffer included).
    supply : bool
        A supply's bias network and DC operating point are computed.
    """

    noise_points: int = 0
    noise_sources: int = 0
    headroom_points: int = 0
    opamps: int = 0
    supply: bool = False


#: A loaded circuit (solved whole) costs about this many units per unknown of its MNA system per frequency point
#: of a noise analysis, and per point and op-amp output of the level analysis (measured here: its solves are
#: small dense systems, far below the whole-circuit AC weight of :meth:`CircuitShape.point_weight`).
NOISE_LOADED_UNITS_PER_UNKNOWN = 40
HEADROOM_LOADED_UNITS_PER_UNKNOWN = 10


def levels_units(shape: CircuitShape, work: LevelsWork) -> float:
    """Work units of the noise, headroom and supply analyses of ``shape``."""
    unknowns = UNKNOWNS_PER_STAGE * shape.stages
    if shape.loaded:
        noise_point = NOISE_LOADED_UNITS_PER_UNKNOWN * unknowns
        level_point = HEADROOM_LOADED_UNITS_PER_UNKNOWN * unknowns
    else:
        noise_point = NOISE_POINT_FACTOR * shape.point_weight()
        level_point = HEADROOM_POINT_FACTOR * shape.point_weight()
    units = work.noise_points * (noise_point + work.noise_sources * NOISE_SOURCE_UNITS)
    if work.headroom_points:
        outputs = work.opamps + 1
        units += outputs * (HEADROOM_UNITS_PER_OUTPUT + (work.headroom_points + HEADROOM_REFINE_POINTS) * level_point)
    if work.supply:
        units += SUPPLY_UNITS_PER_STAGE * max(1, shape.stages)
    return units


def check_levels(shape: CircuitShape, work: LevelsWork, settings: Settings, *, field: str,
                 base_units: float = 0.0) -> None:
    """The noise, headroom and supply analyses (on top of ``base_units`` already counted) fit the budget;
    the problem names ``field`` (e.g. ``noise.points_per_decade``)."""
    units = base_units + levels_units(shape, work)
    _refuse(units, settings, field=field, what="the noise, headroom and supply analyses of this design")
