"""The yield search as a workflow: its design is confirmed by an independent tolerance run (another seed), and
the cost model bounds its work before any of it starts."""

from __future__ import annotations

import pytest

from service import create_app
from service.config import Settings
from service.errors import LimitExceeded
from service.tolerance.statistics import wilson_interval
from service.workflows import costs, designing, yielding
from service.workflows.document import DesignDocument
from service.workflows.errors import YieldUnreachable
from service.workflows.tolerancing import ToleranceRequest, tolerance
from service.workflows.yielding import GradedDesignRequest, design_to_yield
from tests.workflows.test_design_loop import MISSING_FIRST

R_GRADES = [{"tolerance": 0.01, "cost": 1}, {"tolerance": 0.001, "cost": 3}]
C_GRADES = [{"tolerance": 0.05, "cost": 1}, {"tolerance": 0.02, "cost": 1.5}, {"tolerance": 0.01, "cost": 2.5}]
# A 5th-order Chebyshev lowpass (0.25 dB to 2 kHz, 50 dB from 5 kHz) with a 5 MHz op-amp and uniform resistors.
BODY = {
    "response": "lowpass", "family": "chebyshev1", "passband_hz": "2kHz", "stopband_hz": "5kHz",
    "passband_ripple_db": 0.25, "stopband_attenuation_db": 50,
    "parts": {"resistors": {"series": "E96", "grades": R_GRADES},
              "capacitors": {"series": "E12", "grades": C_GRADES}},
    "opamp": {"gbw_hz": "5MHz"},
    "yield": {"target": 0.85, "trials": 800, "seed": 11, "distribution": {"resistor": "uniform"}},
}
OTHER_SEED = 424_242


def _request(body: dict) -> GradedDesignRequest:
    """The typed request the design view hands to the workflow (read by the view's own schema)."""
    from service.api.schemas.designs import DesignRequestSchema
    app = create_app({"TESTING": True})
    with app.test_request_context():
        request = DesignRequestSchema().load(body)["request"]
    assert isinstance(request, GradedDesignRequest)
    return request


@pytest.fixture(scope="module")
def settings() -> Settings:
    return Settings().override(request_deadline_s=300.0)


@pytest.fixture(scope="module")
def searched(settings):
    return design_to_yield(_request(BODY), settings)


def test_an_independent_run_on_other_boards_confirms_the_predicted_yield(searched, settings):
    report = searched.report
    assert report.reached and report.check.trials == 800
    # source: E. B. Wilson, JASA 22 (1927) 209-212: the reported interval is the score interval of the passing
    # boards, and its lower end is at or above the target
    assert report.check.ci95 == pytest.approx(wilson_interval(report.check.passed, 800), abs=1e-15)
    assert report.check.ci95[0] >= 0.85
    # The design document as the reply gives it, read back strictly, on 2,000 boards of another seed with the
    # same options.  source: the service's tolerance run (every board verified on the whole band), independent of
    # the search's boards; the two 95 % Wilson intervals of one yield overlap (E. B. Wilson, JASA 22 (1927))
    reply = searched.as_dict()
    document = DesignDocument.from_json({k: v for k, v in reply.items() if k not in ("yield", "cost")})
    run = tolerance(ToleranceRequest(document, trials=2000, seed=OTHER_SEED, distribution={"resistor": "uniform"}),
                    settings)
    other = run.yield_
    assert other["trials"] == 2000
    low, high = wilson_interval(other["passed"], 2000)
    assert low <= report.check.ci95[1] and report.check.ci95[0] <= high
    # the same seed and options draw the same boards and pass the same ones
    same = tolerance(ToleranceRequest(document, trials=800, seed=11, distribution={"resistor": "uniform"}), settings)
    assert same.yield_["passed"] == report.check.passed


def test_every_part_takes_an_offered_grade_and_the_cost_adds_up(searched):
    offered = {"resistor": {(g["tolerance"], g["cost"]) for g in R_GRADES},
               "capacitor": {(g["tolerance"], g["cost"]) for g in C_GRADES}}
    parts = [c for p in searched.plans for c in p.components]
    assert parts and all((c.tolerance, c.cost) in offered[c.kind] for c in parts)
    # common practice (no source): the total relative cost is the sum of the parts' grade costs
    assert searched.cost.total == pytest.approx(sum(c.cost for c in parts))
    assert searched.cost.all_cheapest <= searched.cost.total <= searched.cost.all_tightest


class _Forbidden(AssertionError):
    pass


def _forbid(monkeypatch):
    """Make any design or Monte Carlo confirmation of the yield search fail the test."""
    def design(*args, **kwargs):
        raise _Forbidden("a design was made before the cost check")

    def confirm(*args, **kwargs):
        raise _Forbidden("a Monte Carlo confirmation ran before the cost check")

    monkeypatch.setattr(yielding, "design", design)
    monkeypatch.setattr(yielding, "verified_yield", confirm)


def test_trials_over_the_limit_are_refused_before_any_work(monkeypatch, settings):
    _forbid(monkeypatch)
    with pytest.raises(LimitExceeded) as err:
        design_to_yield(_request(BODY), settings.override(max_trials=500))
    assert err.value.field == "yield.trials"


def test_a_search_over_the_work_budget_is_refused_before_any_work(monkeypatch, settings):
    # the first design, its model and one confirmation of 800 boards cannot fit 3 million units
    _forbid(monkeypatch)
    with pytest.raises(LimitExceeded) as err:
        design_to_yield(_request(BODY), settings.override(max_work=3_000_000))
    assert err.value.field == "yield.trials" and "at most" in str(err.value)


#: A target the cheapest grades alone cannot reach (only they are offered): the search goes on while its budget
#: lasts, then answers with the limiting edge.
OUT_OF_REACH = dict(BODY, parts={"resistors": {"series": "E96", "grades": R_GRADES[:1]},
                                 "capacitors": {"series": "E12", "grades": C_GRADES[:1]}},
                    **{"yield": dict(BODY["yield"], target=0.99, trials=500)})
#: A bandstop whose first design misses (E12 steps in low-Q notch stages; the design loop's own test case), so
#: that the design loop would go on designing within a round.
FIRST_MISSES = dict(MISSING_FIRST, parts={"resistors": {"series": "E12", "grades": R_GRADES},
                                          "capacitors": {"series": "E12", "grades": C_GRADES}},
                    **{"yield": {"target": 0.9, "trials": 500, "seed": 2}})


@pytest.mark.parametrize("body", [OUT_OF_REACH, FIRST_MISSES], ids=["out_of_reach", "first_design_misses"])
def test_the_search_stays_within_the_budget_it_was_given(monkeypatch, settings, body):
    # Every design the search asks for, every design its design loop makes, and every confirmation is counted.
    budgets, designs, attempts, checks = [], [], [], []
    real_budget, real_design, real_check = costs.yield_budget, yielding.design, yielding.verified_yield
    real_attempt = designing._attempt

    def attempt(*args, **kwargs):
        attempts.append(1)
        return real_attempt(*args, **kwargs)

    def budget(*args, **kwargs):
        b = real_budget(*args, **kwargs)
        budgets.append(b)
        return b

    def design(*args, **kwargs):
        designs.append(1)
        return real_design(*args, **kwargs)

    def check(*args, **kwargs):
        checks.append(1)
        return real_check(*args, **kwargs)

    monkeypatch.setattr(costs, "yield_budget", budget)
    monkeypatch.setattr(yielding, "design", design)
    monkeypatch.setattr(yielding, "verified_yield", check)
    monkeypatch.setattr(designing, "_attempt", attempt)
    # room for the first design (of up to 6 stages), its model and one confirmation, and little more
    first = real_budget(6, 500, yielding._model_trials(500), settings.override(max_work=10 ** 12), most_attempts=1,
                        most_confirmations=1)
    tight = settings.override(max_work=int(first.units * 1.05))
    try:
        design_to_yield(_request(body), tight)
    except YieldUnreachable as err:
        assert err.field == "yield.target"
    else:
        assert body is not OUT_OF_REACH
    last = budgets[-1]
    assert last.units <= tight.max_work
    # every design the search asked for, and every design its design loop made, within the budget
    assert 1 <= len(designs) <= len(attempts) <= last.attempts and len(checks) <= last.confirmations
