"""A seeded set of 48 requirements, designed with an adequate op-amp and checked densely in ngspice.

See :mod:`tests.realization.requirement_cases` for the generator and the check (loss from the largest
passband gain, 400 points per decade over every passband and stopband segment, the requirement as asked
while the approximation is designed for the tightened one, as the service does).
"""

from __future__ import annotations

import pytest

from tests.realization.requirement_cases import FAMILIES, RESPONSES, generate, run

SEED, COUNT = 12, 48
#: A floor against regressions: 48 of 48 meet with the stages' parts chosen together for the whole response
#: and the design loop (verify, re-select, widen the margin, add an order); 41 of 48 with each stage's parts
#: chosen on its own and the design loop, 20 of 48 with part selection alone, 16 of 48 before the joint part search.
FLOOR = 0.95


@pytest.fixture(scope="module")
def outcomes():
    return run(SEED, COUNT, verbose=False)


def test_the_generator_covers_every_response_family_and_parts_kind():
    cases = generate(SEED, COUNT)
    assert len(cases) >= 40
    assert {c.response for c in cases} == set(RESPONSES)
    assert {c.family for c in cases} == set(FAMILIES)
    series = {c.parts["resistors"].get("series") for c in cases}
    assert {"E12", "E24", "E96"} <= series
    assert any("stock" in c.parts["capacitors"] for c in cases)
    edges = [x for c in cases for x in ((c.passband_hz,) if isinstance(c.passband_hz, float) else c.passband_hz)]
    assert min(edges) < 200.0 and max(edges) > 200e3            # audio to 1 MHz


def test_pass_rate_floor(outcomes):
    # source: ngspice AC analysis (reference simulator), the exported netlists with single-pole op-amp models
    rate = sum(o.passed for o in outcomes) / len(outcomes)
    assert rate >= FLOOR, [(o.case.label, round(o.worst_margin_db, 3)) for o in outcomes if not o.passed]


def test_at_least_95_percent_meet_the_requirement_in_ngspice(outcomes):
    # source: ngspice AC analysis (reference simulator)
    rate = sum(o.passed for o in outcomes) / len(outcomes)
    assert rate >= 0.95


def test_no_design_claims_to_meet_what_it_misses_in_ngspice(outcomes):
    # source: ngspice AC analysis (reference simulator). The service's verdict covers every band whole
    # (open bands to the op-amp's limit); the ngspice check samples 400 points per decade plus the edges,
    # so a "meets" it contradicts is a false proof.
    false = [(o.case.label, round(o.worst_margin_db, 4), o.where_hz) for o in outcomes if o.claimed_meets and not o.passed]
    assert not false


def test_every_case_is_designed_with_an_adequate_opamp(outcomes):
    # the op-amp each case uses is the smallest common GBW the service calls adequate for every stage
    assert all(o.note == "" for o in outcomes), [o.note for o in outcomes if o.note]
    assert all(o.adequate and o.gbw_hz is not None and o.opamps > 0 for o in outcomes)
