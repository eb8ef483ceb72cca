"""What each family of a comparison costs to build: op-amps, GBW, and with parts the share of boards that pass.

For every family that meets the requirement, :func:`add_build_figures` adds
to its comparison row:

- ``opamps``: op-amps of its sections with ``topology: "auto"``;
- ``gbw_needed_hz``: the largest gain-bandwidth its stages need;
- with ``parts`` given, ``predicted_yield``: a quick first-order estimate of
  the share of Monte Carlo boards that meet the requirement, and
  ``design_meets``: whether the nominal circuit does.

Without parts the figures come from the automatic topology rule alone
(:func:`service.realization.topologies.auto_topology`) and the GBW from the
rule of thumb ``|G| Q f0 / error`` (R. Mancini, *Op Amps for Everyone*, TI
2002, ch. 16, from memory).  With parts each family is realized as
``/v1/designs`` realizes it on its first step (the transfer function for the
requirement tightened by the default reserves, ``auto`` topologies, parts
snapped to the caller's series or stock; no design loop), its GBW need is
the one the stages report (after predistortion when an op-amp is given), and
the yield is the first-order model of :mod:`service.tolerance.surrogate` on
``trials`` boards with each part at its tolerance -- quick, and not verified
board by board (``/v1/tolerance`` does that for a design).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from service.config import Settings
from service.deadline import DeadlineExceeded
from service.errors import LimitExceeded, RolloffError
from service.realization import OpAmpSpec, PartsPolicy, auto_topology, design_filter
from service.realization.opamp import gbw_rule_of_thumb
from service.realization.parts import resolve_kind
from service.response.comparison import Comparison
from service.tolerance.sampling import resolve_distribution, resolve_temperature, varied_parts
from service.tolerance.statistics import wilson_interval
from service.tolerance.surrogate import deviates, linear_model, log_deviations
from service.workflows import costs
from service.workflows.approximating import approximate
from service.workflows.designing import outcome_of
from service.workflows.policy import passband_margin, stopband_margin
from service.workflows.requirement import Requirement
from service.workflows.verdicts import design_criteria
from service.workflows.yielding import MonteCarloSpec

RULE_BASIS = "rule of thumb |G| Q f0 / error per section (Mancini, Op Amps for Everyone, ch. 16)"
STAGE_BASIS = "the designed stages' own need with the single-pole op-amp model"
PREDISTORTED_BASIS = "the designed stages' need after predistortion for the given op-amp"
YIELD_METHOD = ("first-order model from the part sensitivities on Monte Carlo boards drawn as /v1/tolerance draws "
                "them (Spence and Soin, Tolerance Design of Electronic Circuits, 1988); not verified board by board")
#: The quick yield's work per board and part (units; one evaluation of the first-order model).
QUICK_YIELD_UNITS_PER_BOARD_PART = 10


def _auto_figures(row, opamp: OpAmpSpec | None, gbw_error: float) -> None:
    model = None
    if opamp is not None:
        from service.circuit import OpAmpModel

        model = OpAmpModel(gbw_hz=float(opamp.gbw_hz), a0=opamp.a0, rout_ohm=float(opamp.rout_ohm or 0.0))
    # the value spans of the default parts, as /v1/designs gives the automatic rule without parts
    spans = tuple(float(a.values[-1] / a.values[0]) for a in (resolve_kind(PartsPolicy(), k)
                                                             for k in ("resistor", "capacitor")))
    count, gbw = 0, 0.0
    for sec in row.approximation.sections:
        topology, strategy = auto_topology(sec, opamp_model=model, gbw_error=gbw_error, spans=spans)
        count += len(topology.opamp_roles(sec, strategy))
        gbw = max(gbw, gbw_rule_of_thumb(sec.gain, sec.q, sec.f0_hz, gbw_error))
    row.opamps, row.gbw_needed_hz, row.gbw_basis = count, gbw, RULE_BASIS


def _tightened(requirement: Requirement, row, settings: Settings):
    """The family's transfer function for the requirement tightened by the default reserves (as /v1/designs)."""
    req = dataclasses.replace(requirement, family=row.family)
    return req, approximate(req.tightened(passband_margin(req.passband_ripple_db, None), stopband_margin(None)),
                            settings)


def _built_figures(row, req: Requirement, approximation, parts: PartsPolicy, opamp: OpAmpSpec | None,
                   gbw_error: float, mc: MonteCarloSpec, settings: Settings) -> None:
    realized = design_filter(approximation, topology="auto", parts=parts, opamp=opamp, gbw_error=gbw_error,
                             section_order=req.section_order.value)
    outcome = outcome_of(realized, req)
    plans = outcome.plans
    row.opamps = sum(len(p.opamps) for p in plans)
    needs = []
    for st in realized.stages:
        r = st.opamp_requirement
        need = r.gbw_required_predistorted_hz if (opamp is not None and r.gbw_required_predistorted_hz) \
            else r.gbw_required_hz
        if need is not None and math.isfinite(need):
            needs.append(need)
    row.gbw_needed_hz = max(needs) if needs else None
    row.gbw_basis = PREDISTORTED_BASIS if opamp is not None else STAGE_BASIS
    row.design_meets = bool(outcome.verdict.meets)
    criteria = design_criteria(req, plans)
    vp = varied_parts(plans, outcome.document.draw_order(), resolve_distribution(mc.distribution),
                      mc.tempco_ppm_per_c, mc.gbw_spread)
    model = linear_model(plans, vp, criteria)
    dev = deviates(vp, mc.trials, mc.seed, resolve_temperature(mc.temperature))
    passive = [p for p in vp if p.kind != "opamp"]
    tol = np.array([p.tolerance for p in passive])
    tc = np.array([p.tempco_ppm_per_c for p in passive])
    worst = model.margins(model.gains(log_deviations(dev, tol, tc), model.base_gains(dev))).min(axis=-1)
    if not outcome.verdict.verdict.stable:
        worst = np.full(mc.trials, -np.inf)
    passed = int((worst >= 0).sum())
    lo, hi = wilson_interval(passed, mc.trials)
    row.predicted_yield = {"fraction": passed / mc.trials, "ci95_low": lo, "ci95_high": hi, "trials": mc.trials,
                           "passed": passed, "method": YIELD_METHOD}


def add_build_figures(comparison: Comparison, requirement: Requirement, settings: Settings, *,
                      parts: PartsPolicy | None = None, opamp: OpAmpSpec | None = None, gbw_error: float = 0.01,
                      monte_carlo: MonteCarloSpec | None = None) -> None:
    """Add op-amps, GBW needed and (with ``parts``) the quick yield to every meeting row, in place.

    Raises
    ------
    LimitExceeded
        With parts: the designs of all meeting families over ``ROLLOFF_MAX_WORK`` (``field`` ``parts``),
        or trials over ``ROLLOFF_MAX_TRIALS`` (``yield.trials``).
    """
    rows = [r for r in comparison.families if r.meets and r.approximation is not None]
    if parts is None:
        for r in rows:
            try:
                _auto_figures(r, opamp, gbw_error)
            except DeadlineExceeded:
                raise
            except RolloffError as exc:
                r.reason = (r.reason + "; " if r.reason else "") + f"no automatic topology: {exc.message}"
        return
    mc = monte_carlo or MonteCarloSpec()
    costs.check_limit("max_trials", mc.trials, settings, field="yield.trials", what="trials")
    built = []
    for r in rows:
        try:
            built.append((r, *_tightened(requirement, r, settings)))
        except (LimitExceeded, DeadlineExceeded):
            raise
        except RolloffError as exc:
            r.reason = (r.reason + "; " if r.reason else "") + f"not built: {exc.message}"
    costs.check_compare([len(a.sections) for _, _, a in built], mc.trials, settings,
                        yield_units_per_board_part=QUICK_YIELD_UNITS_PER_BOARD_PART)
    for r, req, approximation in built:
        try:
            _built_figures(r, req, approximation, parts, opamp, gbw_error, mc, settings)
        except (LimitExceeded, DeadlineExceeded):
            raise
        except RolloffError as exc:
            r.reason = (r.reason + "; " if r.reason else "") + f"not built with these parts: {exc.message}"


__all__ = ["add_build_figures", "RULE_BASIS", "YIELD_METHOD"]
