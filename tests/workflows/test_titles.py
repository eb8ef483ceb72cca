"""Figure titles: the filter, the requirement band by band, the design's stages and op-amps; the passbands
a figure's detail is drawn over."""

from __future__ import annotations

import math

import pytest

from service.api.views.designs import EVALUATE_EXAMPLE
from service.approximation import Section, SectionKind
from service.workflows import DesignDocument, Requirement, Zpk
from service.workflows.figures import requirement_passbands
from service.workflows.titles import design_text, document_subject, figure_subject, filter_text, hz, requirement_text


def test_frequencies_in_engineering_notation():
    # common practice (no source): SI prefixes, a space before the unit
    assert [hz(x) for x in (0.0, 50.0, 25_600.0, 1e7, 3.3e-3)] == ["0 Hz", "50 Hz", "25.6 kHz", "10 MHz", "3.3 mHz"]


@pytest.mark.parametrize("fields, text", [
    ({"response": "lowpass", "passband_hz": 10e3, "stopband_hz": 25.6e3},
     "passband to 10 kHz within 0.1 dB · stopband from 25.6 kHz, 80 dB down"),
    ({"response": "highpass", "passband_hz": 1e3, "stopband_hz": 200.0},
     "passband from 1 kHz within 0.1 dB · stopband to 200 Hz, 80 dB down"),
    ({"response": "highpass", "passband_hz": 1e3, "stopband_hz": 200.0, "passband_upper_hz": 1e6},
     "passband 1 kHz–1 MHz within 0.1 dB · stopband to 200 Hz, 80 dB down"),
    ({"response": "bandpass", "passband_hz": [35e3, 45e3], "stopband_hz": [25e3, 60e3]},
     "passband 35–45 kHz within 0.1 dB · stopbands to 25 kHz and from 60 kHz, 80 dB down"),
    ({"response": "bandstop", "passband_hz": [20.0, 150.0], "stopband_hz": [49.0, 61.0]},
     "passbands to 20 Hz and from 150 Hz within 0.1 dB · stopband 49–61 Hz, 80 dB down"),
])
def test_requirement_by_specification_band_by_band(fields, text):
    req = Requirement.from_json(dict(fields, family="elliptic", passband_ripple_db=0.1, stopband_attenuation_db=80))
    assert requirement_text(req) == text


def test_requirement_by_order_says_what_the_cutoff_is():
    req = Requirement(response="bandpass", family="butterworth", order=3, cutoff_hz=(900.0, 1200.0))
    assert requirement_text(req) == "cutoff 900 Hz–1.2 kHz: −3 dB (half-power) point"
    req = Requirement(response="lowpass", family="chebyshev1", order=5, cutoff_hz=1e3, passband_ripple_db=0.5)
    assert requirement_text(req) == "cutoff 1 kHz: edge of the ripple band · 0.5 dB ripple"
    assert filter_text(req.family, req.response, req.order) == "Chebyshev I lowpass, order 5"


def test_design_text_counts_stages_topologies_and_op_amps():
    doc = DesignDocument.from_json(EVALUATE_EXAMPLE)
    assert design_text(doc) == "1 stage: 1 Sallen-Key · 1 op-amp, GBW 10 MHz"
    first = EVALUATE_EXAMPLE["stages"][0]
    two = dict(EVALUATE_EXAMPLE, order=4, stages=[first, _renamed(first)])
    two["stages"][1]["opamps"] = [{"ref": "U2", "role": "U1"}]          # an ideal op-amp
    subject = document_subject(DesignDocument.from_json(two))
    assert subject.design == "2 stages: 2 Sallen-Key · 2 op-amps, GBW 10 MHz (1 ideal)"
    assert subject.filter == "Butterworth lowpass, order 4"


def _renamed(stage: dict) -> dict:
    """The stage with its refs numbered on (refs are unique across a design)."""
    rename = {"C1": "C3", "C2": "C4", "R1": "R3", "R2": "R4"}
    comps = [dict(c, ref=rename[c["ref"]]) for c in stage["components"]]
    return dict(stage, components=comps)


def test_bare_transfer_functions():
    w = 2 * math.pi * 1e3
    sub = figure_subject(Zpk((), (complex(-w, w), complex(-w, -w)), 2 * w * w), None, None)
    assert sub.filter == "Transfer function: 2 poles, 0 zeros" and sub.requirement is None and sub.design is None
    sections = (Section(SectionKind.LOWPASS, 2, 1e3, 0.7071, None, 1.0), Section(SectionKind.LOWPASS, 1, 1e3, None,
                                                                                   None, 1.0))
    from service.approximation import ResponseType

    assert figure_subject(sections, None, ResponseType.LOWPASS).filter == "Cascade of 2 sections (lowpass): 2 lowpass"


@pytest.mark.parametrize("fields, bands", [
    ({"response": "lowpass", "family": "elliptic", "passband_hz": 10e3, "stopband_hz": 25.6e3,
      "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}, [(0.0, 10e3)]),
    ({"response": "bandstop", "family": "butterworth", "passband_hz": [20.0, 150.0], "stopband_hz": [49.0, 61.0],
      "passband_ripple_db": 1, "stopband_attenuation_db": 40, "passband_upper_hz": 1500.0},
     [(0.0, 20.0), (150.0, 1500.0)]),
    ({"response": "highpass", "family": "chebyshev1", "order": 4, "cutoff_hz": 1e3, "passband_ripple_db": 0.5},
     [(1e3, math.inf)]),
    # a Chebyshev II's cutoff is its stopband edge: no passband stated
    ({"response": "lowpass", "family": "chebyshev2", "order": 4, "cutoff_hz": 1e3, "stopband_attenuation_db": 40},
     None),
])
def test_the_passbands_a_requirement_states(fields, bands):
    assert requirement_passbands(Requirement.from_json(fields)) == bands
