"""Designs shared by the tolerance tests (built once per session)."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from service.approximation import design_by_order
from service.realization import design_filter, document_from_design
from service.response import Mask

GRID = np.logspace(1, 5, 501)  # = ngspice "ac dec 125 10 100k"


def _doc(response, order, cutoff, **kw):
    return document_from_design(design_filter(design_by_order(response, "butterworth", order, cutoff), **kw))


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
    return Mask.from_requirement("lowpass", 1000.0, 10 ** 3.4, 3.5, 40.0)


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
