"""Property test: the verdict of a design equals a dense check of its exported netlist in ngspice, and every
returned document gives the same verdict through evaluation, a response mask and a Monte Carlo run.

Requirements are drawn by a seeded generator across the four responses, the seven families, transfer-function
degrees 2-12, E12/E24/E96 parts, ideal and finite op-amps (1, 10 and 100 MHz single-pole models).
"""

from __future__ import annotations

import copy
import math

import numpy as np
import pytest

from service.config import Settings
from service.errors import RolloffError
from service.realization import OpAmpSpec, PartsPolicy
from service.workflows import DesignRequest, Requirement, ResponseRequest, ToleranceRequest, design, evaluate_json
from service.workflows import respond, tolerance
from service.workflows.document import DesignDocument
from service.workflows.verdicts import design_criteria
from tests.workflows.ngspice_verdict import ngspice_margins

FAMILIES = ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "legendre", "linkwitz_riley")
RESPONSES = ("lowpass", "highpass", "bandpass", "bandstop")
#: How closely the ngspice check locates a margin (dB): its sweeps are dense but finite.
AGREEMENT_DB = 5e-3
SETTINGS = Settings()


def _requirement(rng) -> Requirement:
    response = RESPONSES[rng.integers(len(RESPONSES))]
    family = FAMILIES[rng.integers(len(FAMILIES))]
    f = 10 ** rng.uniform(2.0, 5.0)
    ratio = 10 ** rng.uniform(0.15, 0.7)
    ripple = float(rng.choice([0.1, 0.25, 0.5, 1.0, 3.0]))
    atten = float(rng.uniform(25.0, 65.0))
    if response == "lowpass":
        pb, sb = f, f * ratio
    elif response == "highpass":
        pb, sb = f, f / ratio
    elif response == "bandpass":
        width = 10 ** rng.uniform(0.1, 0.5)
        pb = (f, f * width)
        sb = (f / ratio, f * width * ratio)
    else:
        width = 10 ** rng.uniform(0.05, 0.3)
        sb = (f, f * width)
        pb = (f / ratio, f * width * ratio)
    return Requirement(response=response, family=family, passband_hz=pb, stopband_hz=sb,
                       passband_ripple_db=ripple, stopband_attenuation_db=atten)


def _cases(n: int = 40, seed: int = 2026):
    """``n`` requirements whose transfer function exists with a degree of 2 to 12 (checked by the approximation
    engine alone, cheaply, so that every generated case is designed and verified)."""
    from service.workflows import approximate

    rng = np.random.default_rng(seed)
    out = []
    while len(out) < n:
        try:
            req = _requirement(rng)
            degree = approximate(req, SETTINGS).degree
        except RolloffError:
            continue
        if not 2 <= degree <= 12:
            continue
        series = str(rng.choice(["E12", "E24", "E96"]))
        gbw = [None, 1e6, 1e7, 1e8][rng.integers(4)]
        out.append(pytest.param(req, series, gbw, id=f"{len(out):02d}-{req.response.value}-{req.family.value}-{series}-"
                                                      f"{'ideal' if gbw is None else f'{gbw:.0e}'}"))
    return out


def _design(req, series, gbw):
    parts = PartsPolicy.from_dict({"resistors": {"series": "E96" if series == "E96" else series, "tolerance": 0.01},
                                   "capacitors": {"series": series, "tolerance": 0.05}})
    return design(DesignRequest(req, parts=parts, opamp=None if gbw is None else OpAmpSpec(gbw_hz=gbw)), SETTINGS)


@pytest.mark.parametrize("req,series,gbw", _cases())
def test_verdict_equals_ngspice_and_every_endpoint_agrees(req, series, gbw):
    outcome = _design(req, series, gbw)
    doc = outcome.as_dict()
    verdict = outcome.verdict.verdict
    criteria = design_criteria(req, outcome.plans)
    if verdict.stable:
        top = max([p.section.f0_hz for p in outcome.plans] + [gbw or 0.0])
        margins, ends = ngspice_margins(doc["netlist"], criteria, top)
        got = [s.margin_db for s in verdict.segments]
        # source: ngspice AC analysis (reference simulator), dense sweeps with extremum refinement
        np.testing.assert_allclose(got, margins, atol=AGREEMENT_DB)
        if abs(min(margins)) > AGREEMENT_DB:
            assert verdict.meets == (min(margins) >= 0)
    # the same document and requirement give the same verdict through every endpoint
    again = evaluate_json(copy.deepcopy(doc), SETTINGS)
    assert again.as_dict()["verdict"] == doc["verdict"]
    document = DesignDocument.from_json(doc)
    resp = respond(ResponseRequest(document, mask=req), SETTINGS)
    assert resp.verdict.status == verdict.status
    if verdict.stable:
        assert resp.verdict.worst_margin_db == pytest.approx(verdict.worst_margin_db, abs=1e-12)
    exact = copy.deepcopy(doc)
    for st in exact["stages"]:
        for c in st["components"]:
            c["tolerance"] = 0.0
    tol = tolerance(ToleranceRequest(DesignDocument.from_json(exact), trials=2, seed=1), SETTINGS)
    assert tol.yield_["fraction"] == (1.0 if verdict.meets else 0.0)
