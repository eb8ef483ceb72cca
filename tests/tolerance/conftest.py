"""Designs shared by the tolerance tests (built once per session)."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from service.approximation import design_by_order
from service.realization import design_filter
from service.tolerance import run_tolerance as _run_tolerance
from service.workflows import DesignDocument, Requirement, outcome_of

GRID = np.logspace(1, 5, 501)  # = ngspice "ac dec 125 10 100k"
PASSBAND_EDGE_HZ = float(GRID[249])  # 10 ** 2.992


def _doc(response, order, cutoff, **kw):
    return outcome_of(design_filter(design_by_order(response, "butterworth", order, cutoff), **kw)).as_dict()


def requirement_criteria(response, passband_hz, stopband_hz, ripple_db, attenuation_db):
    """The verification criteria of a requirement by band edges (ideal op-amps)."""
    req = Requirement(response=response, passband_hz=passband_hz, stopband_hz=stopband_hz,
                      passband_ripple_db=ripple_db, stopband_attenuation_db=attenuation_db)
    return req.criteria(finite_opamps=False)


def plans_of(doc: dict):
    """The stage plans of a design document (read strictly, as the service reads it)."""
    return DesignDocument.from_json(doc).plans()


def run_tolerance(doc: dict, *, mask=None, **kw):
    """:func:`service.tolerance.run_tolerance` of a design document, verified against ``mask`` (Criteria)."""
    document = DesignDocument.from_json(doc)
    return _run_tolerance(document.plans(), draw_order=document.draw_order(),
                          response=None if document.response is None else document.response.value,
                          criteria=mask, **kw)


@pytest.fixture(scope="session")
def butter8_sk():
    """8th-order Butterworth lowpass, 1 kHz, four unity-gain Sallen-Key stages (E96 1 % R, E12 5 % C)."""
    return _doc("lowpass", 8, 1000.0, topology="sallen_key")


@pytest.fixture(scope="session")
def rc1():
    """One passive RC lowpass with a buffer, 1 kHz."""
    return _doc("lowpass", 1, 1000.0)


@pytest.fixture(scope="session")
def designs():
    """Several topologies for the sensitivity identities."""
    return {
        "sallen_key_lowpass": _doc("lowpass", 4, 1000.0, topology="sallen_key"),
        "sallen_key_highpass": _doc("highpass", 4, 1000.0, topology="sallen_key"),
        "multiple_feedback": _doc("lowpass", 4, 1000.0, topology="multiple_feedback"),
        "state_variable": _doc("lowpass", 4, 1000.0, topology="state_variable"),
        "tow_thomas": _doc("lowpass", 4, 1000.0, topology="tow_thomas"),
    }


@pytest.fixture(scope="session")
def lowpass_mask():
    # 3 dB up to 10^2.992 = 981.7 Hz, a point of GRID (an 8th-order Butterworth at 1 kHz loses 2.42 dB there),
    # 40 dB from 10^3.4 = 2.51 kHz
    return requirement_criteria("lowpass", PASSBAND_EDGE_HZ, 10 ** 3.4, 3.0, 40.0)


def with_tolerances(doc, resistor=None, capacitor=None):
    """A copy of ``doc`` with every resistor / capacitor tolerance replaced."""
    d = copy.deepcopy(doc)
    for st in d["stages"]:
        for c in st["components"]:
            if c["kind"] == "resistor" and resistor is not None:
                c["tolerance"] = resistor
            if c["kind"] == "capacitor" and capacitor is not None:
                c["tolerance"] = capacitor
    return d
