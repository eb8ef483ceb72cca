"""Sections: product equals the transfer function; kinds; pairing; ordering; trade facts."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.approximation import (ApproximationError, Family, ResponseType, Section, SectionKind,
                                   design_by_order, design_by_requirement, section_polynomials,
                                   sections_from_zpk, sections_response, zpk_response)

TWO_PI = 2 * np.pi
NEEDS = {Family.CHEBYSHEV1: (0.5, None), Family.CHEBYSHEV2: (None, 50.0), Family.ELLIPTIC: (0.5, 50.0)}


def _design(response, family, n, fc, **kw):
    rp, rs = NEEDS.get(Family(family), (None, None))
    band = ResponseType(response) in (ResponseType.BANDPASS, ResponseType.BANDSTOP)
    cut = (fc, fc * 1.7) if band else fc
    return design_by_order(response, family, n, cut, passband_ripple_db=rp,
                           stopband_attenuation_db=rs, **kw)


def _rel_product_error(a, f):
    w = TWO_PI * f
    h = zpk_response(a.zeros, a.poles, a.gain, w)
    hs = sections_response(a.sections, w)
    m = np.abs(h) > 1e-200
    return float(np.max(np.abs(hs[m] / h[m] - 1)))


@pytest.mark.parametrize("family", list(Family))
@pytest.mark.parametrize("response", list(ResponseType))
@pytest.mark.parametrize("n", [1, 2, 3, 4, 7, 10, 16])
def test_sections_product_equals_transfer_function(family, response, n):
    if family is Family.LINKWITZ_RILEY and n % 2:
        n += 1
    a = _design(response, family, n, 1234.5)
    f = np.geomspace(1.0, 1e6, 1000)
    assert _rel_product_error(a, f) <= 1e-9
    # one section per pole pair, first order only for an odd degree
    assert len(a.sections) == a.degree // 2 + a.degree % 2
    assert sum(s.order for s in a.sections) == a.degree
    assert sum(1 for s in a.sections if s.order == 1) == a.degree % 2


@settings(max_examples=60, deadline=None)
@given(family=st.sampled_from(list(Family)), response=st.sampled_from(list(ResponseType)),
       n=st.integers(1, 16), log_fc=st.floats(-2.5, 9.5),
       order=st.sampled_from(["ascending_q", "descending_q", "as_computed"]))
def test_property_sections_product_equals_zpk(family, response, n, log_fc, order):
    if family is Family.LINKWITZ_RILEY:
        n = 2 * max(1, n // 2)
    fc = 10.0 ** log_fc
    a = _design(response, family, n, fc, section_order=order)
    f = fc * np.geomspace(1e-2, 1e2, 1000)
    assert _rel_product_error(a, f) <= 1e-9


@pytest.mark.parametrize("family", list(Family))
def test_band_section_kinds(family):
    n = 4 if family is Family.LINKWITZ_RILEY else 3
    bp = _design("bandpass", family, n, 1000.0)
    bs = _design("bandstop", family, n, 1000.0)
    assert len(bp.sections) == n and len(bs.sections) == n
    allowed_bp = {SectionKind.BANDPASS, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH, SectionKind.NOTCH}
    assert {s.kind for s in bp.sections} <= allowed_bp
    if family in (Family.BUTTERWORTH, Family.CHEBYSHEV1, Family.BESSEL, Family.LEGENDRE, Family.LINKWITZ_RILEY):
        assert all(s.kind is SectionKind.BANDPASS for s in bp.sections)
    notch_family = {SectionKind.NOTCH, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH}
    assert {s.kind for s in bs.sections} <= notch_family
    for s in bs.sections:
        if s.kind is SectionKind.LOWPASS_NOTCH:
            assert s.fz_hz > s.f0_hz
        elif s.kind is SectionKind.HIGHPASS_NOTCH:
            assert s.fz_hz < s.f0_hz
        else:
            assert s.fz_hz == pytest.approx(s.f0_hz, rel=1e-8)


def test_lowpass_and_highpass_kinds():
    lp = _design("lowpass", "butterworth", 5, 1000.0)
    hp = _design("highpass", "butterworth", 5, 1000.0)
    assert [s.order for s in lp.sections].count(1) == 1
    assert all(s.kind is SectionKind.LOWPASS for s in lp.sections)
    assert all(s.kind is SectionKind.HIGHPASS for s in hp.sections)
    el = _design("lowpass", "elliptic", 5, 1000.0)
    assert sorted(s.kind.value for s in el.sections) == ["lowpass", "lowpass_notch", "lowpass_notch"]


def test_section_order_options():
    a = _design("lowpass", "chebyshev1", 8, 1000.0)
    q = [s.q for s in a.sections]
    assert q == sorted(q)
    d = _design("lowpass", "chebyshev1", 8, 1000.0, section_order="descending_q")
    assert [s.q for s in d.sections] == sorted(q, reverse=True)
    c = _design("lowpass", "chebyshev1", 8, 1000.0, section_order="as_computed")
    assert sorted(s.q for s in c.sections) == pytest.approx(sorted(q))
    odd = _design("lowpass", "butterworth", 5, 1000.0)
    assert odd.sections[0].order == 1      # first-order counts as Q = 0 in ascending order
    assert _design("lowpass", "butterworth", 5, 1000.0, section_order="descending_q").sections[-1].order == 1


def test_zero_pairs_go_to_nearest_pole_pair():
    # elliptic lowpass: the highest-Q pole pair sits nearest the lowest zero frequency
    a = _design("lowpass", "elliptic", 6, 1000.0, section_order="descending_q")
    fz = [s.fz_hz for s in a.sections]
    assert fz == sorted(fz)


def test_sections_from_zpk_rejects_what_has_no_standard_form():
    with pytest.raises(ApproximationError):
        sections_from_zpk([-5.0], [-1.0 + 1j, -1.0 - 1j], 1.0)       # real zero off the origin
    with pytest.raises(ApproximationError):
        sections_from_zpk([], [1.0 + 1j, 1.0 - 1j], 1.0)             # right half plane
    with pytest.raises(ApproximationError):
        sections_from_zpk([], [-1.0 + 1j], 1.0)                      # no conjugate
    with pytest.raises(ApproximationError):
        sections_from_zpk([1j, -1j, 2j, -2j], [-1.0 + 1j, -1.0 - 1j], 1.0)   # improper


def test_allpass_pair():
    p = np.array([-1.0 + 3j, -1.0 - 3j])
    secs = sections_from_zpk(-np.conj(p), p, 1.0)
    assert secs[0].kind is SectionKind.ALLPASS
    w = np.linspace(0, 10, 101)
    assert np.allclose(np.abs(sections_response(secs, w)), 1.0, rtol=1e-12)


def test_section_polynomials_standard_forms():
    # the standard forms of DESIGN.md / types.py, evaluated at s = j w0
    w0, q, g = TWO_PI * 100.0, 2.0, 1.5
    s = 1j * w0
    for kind, expect in [("lowpass", g * w0 ** 2 / (s * w0 / q)), ("highpass", g * s ** 2 / (s * w0 / q)),
                         ("bandpass", g), ("allpass", g * (-s * w0 / q) / (s * w0 / q))]:
        b, a = section_polynomials(Section(SectionKind(kind), 2, 100.0, q, None, g))
        assert np.polyval(b, s) / np.polyval(a, s) == pytest.approx(expect, rel=1e-12)
    b, a = section_polynomials(Section(SectionKind.LOWPASS_NOTCH, 2, 100.0, q, 300.0, g))
    assert np.polyval(b, 0) / np.polyval(a, 0) == pytest.approx(g)       # g is the DC gain
    assert abs(np.polyval(b, 1j * TWO_PI * 300.0)) <= 1e-9 * abs(b[0]) * (TWO_PI * 300.0) ** 2
    b, a = section_polynomials(Section(SectionKind.LOWPASS, 1, 100.0, None, None, g))
    assert np.polyval(b, 0) / np.polyval(a, 0) == pytest.approx(g)
    b, a = section_polynomials(Section(SectionKind.HIGHPASS, 1, 100.0, None, None, g))
    assert np.polyval(b, 1e9j) / np.polyval(a, 1e9j) == pytest.approx(g, rel=1e-6)


# ---------------------------------------------------------------- facts of the trade
def test_first_order_lowpass_facts():
    # common practice (no source): -3.01 dB at the cutoff, 20 dB per decade far above it
    a = design_by_order("lowpass", "butterworth", 1, 1000.0)
    h = a.response_at(np.array([1000.0, 1e6, 1e7]))
    db = 20 * np.log10(np.abs(h))
    assert db[0] == pytest.approx(-3.0103, abs=1e-4)
    assert db[1] - db[2] == pytest.approx(20.0, abs=1e-3)
    assert a.sections[0].kind is SectionKind.LOWPASS and a.sections[0].order == 1
    assert a.sections[0].f0_hz == pytest.approx(1000.0)


def test_second_order_butterworth_q():
    # common practice (no source): the second-order Butterworth section has Q = 1/sqrt(2)
    a = design_by_order("lowpass", "butterworth", 2, 1000.0)
    assert a.sections[0].q == pytest.approx(1 / math.sqrt(2), rel=1e-12)
    assert a.sections[0].f0_hz == pytest.approx(1000.0, rel=1e-12)
    assert a.sections[0].gain == pytest.approx(1.0)


@pytest.mark.parametrize("n", [2, 4, 6, 8])
def test_linkwitz_riley_sum_is_allpass(n):
    # source: S. H. Linkwitz, J. Audio Eng. Soc. 24(1), 1976 — LR lowpass + highpass
    # (highpass inverted for n = 2 mod 4) sum to an allpass; each -6.02 dB at the crossover
    fc = 2500.0
    lp = design_by_order("lowpass", "linkwitz_riley", n, fc)
    hp = design_by_order("highpass", "linkwitz_riley", n, fc)
    f = np.geomspace(fc / 1000, fc * 1000, 2001)
    sign = -1.0 if (n // 2) % 2 else 1.0
    total = lp.response_at(f) + sign * hp.response_at(f)
    assert np.max(np.abs(np.abs(total) - 1.0)) <= 1e-9
    for x in (lp, hp):
        assert 20 * np.log10(abs(x.response_at(fc))) == pytest.approx(-6.0206, abs=1e-4)


def test_cutoff_at_minus_3db():
    for fam in Family:
        n = 4
        band = design_by_order("bandpass", fam, n, (1000.0, 2000.0), cutoff_at="-3db",
                               passband_ripple_db=NEEDS.get(fam, (None, None))[0],
                               stopband_attenuation_db=NEEDS.get(fam, (None, None))[1])
        lp = _design("lowpass", fam, n, 1000.0, cutoff_at="-3db")
        hp = _design("highpass", fam, n, 1000.0, cutoff_at="-3db")
        for a, f in ((lp, 1000.0), (hp, 1000.0), (band, 1000.0), (band, 2000.0)):
            assert 20 * np.log10(abs(a.response_at(f))) == pytest.approx(-3.0103, abs=1e-6), fam


def test_family_cutoff_meaning():
    # Chebyshev I and elliptic: loss at the cutoff equals the ripple; Chebyshev II: the attenuation
    c1 = design_by_order("lowpass", "chebyshev1", 5, 1000.0, passband_ripple_db=0.5)
    c2 = design_by_order("lowpass", "chebyshev2", 5, 1000.0, stopband_attenuation_db=50.0)
    el = design_by_order("lowpass", "elliptic", 5, 1000.0, passband_ripple_db=0.5, stopband_attenuation_db=50.0)
    assert -20 * np.log10(abs(c1.response_at(1000.0))) == pytest.approx(0.5, abs=1e-9)
    assert -20 * np.log10(abs(c2.response_at(1000.0))) == pytest.approx(50.0, abs=1e-7)
    assert -20 * np.log10(abs(el.response_at(1000.0))) == pytest.approx(0.5, abs=1e-9)


def test_zpk_response_no_overflow_at_extremes():
    a = design_by_order("bandpass", "butterworth", 20, (5e9, 1e10))
    h = a.response_at(np.array([7.07e9, 1e11]))
    assert np.all(np.isfinite(h))
    assert abs(h[0]) == pytest.approx(1.0, rel=1e-6)


def test_demo_accelerometer_anti_alias():
    # Larkspur PM-7 demo (invented): flat within 0.1 dB to 10 kHz, 80 dB down at 25.6 kHz
    a = design_by_requirement("lowpass", "elliptic", 10e3, 25.6e3, 0.1, 80.0)
    assert all(e.margin_db >= -1e-9 for e in a.edges)
