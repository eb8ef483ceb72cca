"""Cautions in the design's warnings."""

from __future__ import annotations

import pytest

from service.approximation import Section, SectionKind, design_by_order
from service.realization import design_filter
from service.workflows import outcome_of
from tests.realization.spice_checks import one_section


def codes(d):
    return {w.code for w in d.warnings}


@pytest.mark.parametrize("dielectric", ["X7R", "X5R", "Y5V", "Z5U", "x7r"])
def test_high_permittivity_ceramic_in_frequency_setting_position(dielectric):
    # common practice (no source): class 2/3 ceramics move with DC bias and temperature
    d = design_filter(design_by_order("lowpass", "butterworth", 2, 1000.0),
                      parts={"capacitors": {"dielectric": dielectric}})
    w = [w for w in d.warnings if w.code == "high_k_dielectric"]
    assert w and "C1" in w[0].message and "voltage and temperature" in w[0].message


def test_c0g_and_film_are_quiet():
    for diel in ("C0G", "NP0", "film"):
        d = design_filter(design_by_order("lowpass", "butterworth", 2, 1000.0),
                          parts={"capacitors": {"dielectric": diel}})
        assert "high_k_dielectric" not in codes(d)


def test_high_q_in_single_opamp_topology():
    sec = Section(SectionKind.BANDPASS, 2, 1000.0, 25.0, None, 1.0)
    single = design_filter(one_section(sec, "bandpass"), topology="multiple_feedback")
    assert "high_q_single_opamp" in codes(single)
    multi = design_filter(one_section(sec, "bandpass"), topology="tow_thomas")
    assert "high_q_single_opamp" not in codes(multi)
    modest = design_filter(one_section(Section(SectionKind.BANDPASS, 2, 1000.0, 5.0, None, 1.0), "bandpass"),
                           topology="multiple_feedback")
    assert "high_q_single_opamp" not in codes(modest)


@pytest.mark.parametrize("fz,expect", [(50.0, True), (60.0, True), (61.5, True), (150.0, True),
                                       (300.0, True), (1000.0, False), (85.0, False)])
def test_mains_notch_caution(fz, expect):
    sec = Section(SectionKind.NOTCH, 2, fz, 5.0, fz, 1.0)
    d = design_filter(one_section(sec, "bandstop"))
    w = [w for w in d.warnings if w.code == "mains_connection"]
    assert bool(w) == expect
    if expect:
        assert "must not be connected to mains" in w[0].message
        assert "local electrical codes" in w[0].message


def test_warnings_are_code_and_message_in_the_document():
    sec = Section(SectionKind.NOTCH, 2, 50.0, 5.0, 50.0, 1.0)
    doc = outcome_of(design_filter(one_section(sec, "bandstop"))).as_dict()
    assert doc["warnings"] and all({"code", "message"} <= set(w) for w in doc["warnings"])


def test_inverting_output_is_reported():
    sec = Section(SectionKind.LOWPASS, 2, 1000.0, 0.7, None, 2.0)
    d = design_filter(one_section(sec), topology="multiple_feedback")
    assert d.overall_gain < 0
    assert "inverting" in codes(d)
