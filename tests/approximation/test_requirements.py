"""Every design from a requirement meets it on a dense grid (the scipy.signal test habit).

# source: scipy.signal (reference library) — test habit of checking a designed filter
# against its specification on a frequency grid (scipy/signal/tests/test_filter_design.py)
"""

import math

import numpy as np
import pytest

from service.approximation import (Family, GroupDelayLimit, InfeasibleRequirement, ResponseType,
                                   design_by_requirement)
from service.approximation.evaluate import loss_db

ALL = list(Family)
NOT_BESSEL = [f for f in Family if f is not Family.BESSEL]
SHARP = [Family.CHEBYSHEV1, Family.CHEBYSHEV2, Family.ELLIPTIC]

# (passband edge Hz, equivalent lowpass selectivity, ripple dB, attenuation dB, families)
REQUIREMENTS = [
    (1000.0, 12.0, 1.0, 40.0, ALL),
    (1.5e-2, 10.0, 0.5, 30.0, ALL),               # highpass stopband edge near the 1 mHz limit
    (5e8, 11.0, 2.0, 35.0, ALL),                  # stopband edges below 10 GHz
    (1e4, 2.0, 0.5, 60.0, NOT_BESSEL),
    (3e5, 1.2, 0.1, 80.0, SHARP),
    (50.0, 1.05, 0.01, 100.0, [Family.ELLIPTIC]),
    (2e3, 3.0, 0.001, 150.0, [Family.ELLIPTIC, Family.CHEBYSHEV1, Family.CHEBYSHEV2]),
]


def _band_requirement(response, fp, sel):
    """Edges whose equivalent lowpass selectivity is ``sel`` (the other stopband edge wider)."""
    if response is ResponseType.LOWPASS:
        return fp, fp * sel
    if response is ResponseType.HIGHPASS:
        return fp, fp / sel
    p1, p2 = fp, 1.6 * fp
    f0sq, b = p1 * p2, p2 - p1
    if response is ResponseType.BANDPASS:
        s2 = (sel * b + math.sqrt((sel * b) ** 2 + 4 * f0sq)) / 2      # (s^2 - f0^2)/(B s) = sel
        s1 = f0sq / s2 * 0.97
        return (p1, p2), (s1, s2)
    # bandstop: B s / (f0^2 - s^2) = sel below the centre
    s1 = (-b + math.sqrt(b * b + 4 * sel * sel * f0sq)) / (2 * sel)
    s2 = f0sq / s1 * 0.98
    return (p1, p2), (s1, s2)


def _grids(response, pb, sb):
    n = 4000
    if response is ResponseType.LOWPASS:
        return np.linspace(0, pb, n), np.geomspace(sb, 1000 * sb, n)
    if response is ResponseType.HIGHPASS:
        return np.geomspace(pb, 1000 * pb, n), np.concatenate([[0.0], np.geomspace(sb / 1000, sb, n)])
    (p1, p2), (s1, s2) = pb, sb
    if response is ResponseType.BANDPASS:
        return (np.linspace(p1, p2, n),
                np.concatenate([np.linspace(0, s1, n), np.geomspace(s2, 1000 * s2, n)]))
    return (np.concatenate([np.linspace(0, p1, n), np.geomspace(p2, 1000 * p2, n)]),
            np.linspace(s1, s2, n))


CASES = [(fam, resp, i, ex) for i, r in enumerate(REQUIREMENTS) for fam in r[4]
         for resp in ResponseType for ex in ("stopband", "passband", "split")]


@pytest.mark.parametrize("family,response,i,excess", CASES)
def test_design_meets_requirement_on_dense_grid(family, response, i, excess):
    fp, sel, ap, as_, _ = REQUIREMENTS[i]
    pb, sb = _band_requirement(response, fp, sel)
    a = design_by_requirement(response, family, pb, sb, ap, as_, excess=excess)
    gp, gs = _grids(response, pb, sb)
    lp = loss_db(a.response_at(gp))
    ls = loss_db(a.response_at(gs))
    assert np.max(lp) <= ap + 1e-7 * max(1.0, ap) + 1e-9
    assert np.min(ls) >= as_ - 1e-7 * as_
    assert np.min(lp) >= -1e-9            # passband peak is 0 dB: no gain above nominal
    # edges: one per requested frequency, margins with the documented signs
    freqs = list(pb if isinstance(pb, tuple) else (pb,)) + list(sb if isinstance(sb, tuple) else (sb,))
    assert [e.frequency_hz for e in a.edges] == freqs
    for e in a.edges:
        expect = e.required_db - e.loss_db if e.band == "passband" else e.loss_db - e.required_db
        assert e.margin_db == pytest.approx(expect, abs=1e-12)
        assert e.margin_db >= -1e-7
    assert a.excess == excess
    assert a.degree == (2 * a.order if response in (ResponseType.BANDPASS, ResponseType.BANDSTOP) else a.order)


@pytest.mark.parametrize("family", [Family.BUTTERWORTH, Family.CHEBYSHEV1, Family.ELLIPTIC,
                                    Family.BESSEL, Family.LEGENDRE])
def test_excess_placement(family):
    args = ("lowpass", family, 1000.0, 12000.0, 1.0, 40.0)
    sb = design_by_requirement(*args, excess="stopband")
    pb = design_by_requirement(*args, excess="passband")
    sp = design_by_requirement(*args, excess="split")
    assert sb.order == pb.order == sp.order
    # stopband excess: the passband edge exactly at the ripple; passband excess: the stopband edge exactly at the attenuation
    assert sb.edges[0].margin_db == pytest.approx(0.0, abs=1e-9)
    assert sb.edges[1].margin_db > 0.0
    assert pb.edges[1].margin_db == pytest.approx(0.0, abs=1e-9)
    if family is not Family.ELLIPTIC:
        # monotonic stopbands: the split leaves part of the margin; an equiripple stopband
        # (elliptic) has its minimum loss at the attenuation whatever the scale, and the
        # loss at the edge frequency itself is not monotonic in the scale
        assert 0.0 < sp.edges[1].margin_db < sb.edges[1].margin_db
    assert sb.cutoff_hz < sp.cutoff_hz < pb.cutoff_hz
    assert sp.cutoff_hz == pytest.approx(math.sqrt(sb.cutoff_hz * pb.cutoff_hz), rel=1e-12)


def test_bessel_group_delay_limit_raises_the_order_and_is_met():
    base = design_by_requirement("lowpass", "bessel", 1000.0, 10000.0, 1.0, 40.0)
    lim = GroupDelayLimit(frequency_hz=3000.0, max_deviation_pct=1.0)
    a = design_by_requirement("lowpass", "bessel", 1000.0, 10000.0, 1.0, 40.0, group_delay=lim)
    assert a.order > base.order
    assert a.group_delay.deviation_pct <= 1.0 + 1e-9
    assert a.group_delay.margin_pct == pytest.approx(1.0 - a.group_delay.deviation_pct)
    # check the delay on a dense grid up to the limit frequency (delay monotonic for Bessel)
    f = np.linspace(0, 3000.0, 2001)
    w = 2 * np.pi * f
    tau = np.sum((-a.poles.real[None, :]) / (a.poles.real[None, :] ** 2
                                              + (w[:, None] - a.poles.imag[None, :]) ** 2), axis=1)
    assert np.max(100 * (1 - tau / tau[0])) <= 1.0 + 1e-9
    # the reduced design still meets the magnitude requirement
    assert all(e.margin_db >= -1e-9 for e in a.edges)


def test_bessel_needs_more_order_than_butterworth():
    # common practice (no source): Bessel trades selectivity for delay flatness
    b = design_by_requirement("lowpass", "butterworth", 1000.0, 12000.0, 1.0, 40.0)
    s = design_by_requirement("lowpass", "bessel", 1000.0, 12000.0, 1.0, 40.0)
    e = design_by_requirement("lowpass", "elliptic", 1000.0, 12000.0, 1.0, 40.0)
    assert e.order <= b.order <= s.order


@pytest.mark.parametrize("family", [Family.BESSEL, Family.LEGENDRE, Family.BUTTERWORTH])
def test_order_above_cap_is_infeasible(family):
    with pytest.raises(InfeasibleRequirement) as ei:
        design_by_requirement("lowpass", family, 1000.0, 1100.0, 0.1, 100.0)
    assert "highest accepted order" in str(ei.value)
    with pytest.raises(InfeasibleRequirement):
        design_by_requirement("lowpass", "chebyshev1", 1000.0, 1500.0, 0.1, 100.0, max_order=5)
