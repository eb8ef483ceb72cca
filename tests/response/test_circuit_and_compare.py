"""Circuit-level responses (circuit engine, ngspice) and the family comparison."""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.circuit import to_spice
from service.response import CircuitSystem, FrequencyGrid, TimeGrid, ZpkSystem, analyze, compare_families
from tests.ngspice import run_ngspice_tran
from tests.response.circuits import butterworth_qs, ideal_zpk, sallen_key_lowpass


def test_circuit_response_matches_its_ideal_transfer_function():
    qs = butterworth_qs(8)
    c = sallen_key_lowpass(1000.0, qs)
    f = np.geomspace(10.0, 1e5, 500)
    rc = analyze(CircuitSystem(c), f, response_type="lowpass")
    ri = analyze(ZpkSystem(*ideal_zpk(1000.0, qs)), f, response_type="lowpass")
    # the unity-gain Sallen-Key design equations (Williams & Taylor, 4th ed., sec. 3.2) (from memory)
    np.testing.assert_allclose(rc.magnitude_db, ri.magnitude_db, atol=1e-8)
    np.testing.assert_allclose(rc.group_delay_s, ri.group_delay_s, rtol=1e-7, atol=1e-12)
    np.testing.assert_allclose(rc.phase_deg - rc.phase_deg[0], ri.phase_deg - ri.phase_deg[0], atol=1e-6)
    assert rc.metrics.f3db_hz == pytest.approx(1000.0, rel=1e-8)
    assert rc.metrics.overshoot_pct == pytest.approx(ri.metrics.overshoot_pct, rel=1e-6)


def test_step_response_matches_ngspice_transient():
    qs = butterworth_qs(4)
    c = sallen_key_lowpass(1000.0, qs)
    r = analyze(CircuitSystem(c), [100.0], time=TimeGrid(stop_s=8e-3, points=8001), response_type="lowpass")
    # source: ngspice transient analysis (reference simulator), 0 -> 1 V step at t = 0
    t_sp, v = run_ngspice_tran(to_spice(c), tstep=1e-6, tstop=8e-3)
    ours = np.interp(t_sp, r.step.time_s, r.step.value)
    assert np.max(np.abs(ours - v["out"])) < 2e-3
    # overshoot of the 4th-order Butterworth step, both ways
    assert (np.max(v["out"]) - 1) * 100 == pytest.approx(r.metrics.overshoot_pct, abs=0.2)


def _compare(response, pb, sb, rip, att, **kw):
    """Every family for one requirement, as the comparison workflow runs it."""
    from service.config import Settings
    from service.workflows import Requirement, compare

    req = Requirement(response=response, passband_hz=pb, stopband_hz=sb, passband_ripple_db=rip,
                      stopband_attenuation_db=att)
    return compare(req, Settings(), **kw)


def test_compare_families_lowpass():
    c = _compare("lowpass", 1000.0, 2000.0, 0.5, 50.0)
    rows = {r.family.value: r for r in c.families}
    assert set(rows) == {"butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "legendre",
                         "linkwitz_riley"}
    for r in c.families:
        if r.order is not None:
            assert r.meets and r.margin_db > -1e-6
            assert r.sections == r.order // 2 and r.first_order_sections == r.order % 2
            assert r.max_q > 0.5 and r.settling_time_1pct_s > 0
        else:
            assert not r.meets and r.reason
    # source: Williams & Taylor, Electronic Filter Design Handbook, 4th ed., sec. 2 (order
    # nomographs): for one requirement the elliptic order <= Chebyshev <= Butterworth (from memory)
    assert rows["elliptic"].order <= rows["chebyshev1"].order <= rows["butterworth"].order
    # the recommendation weighs what a family costs to build (op-amps with auto, then GBW, then Q, then order):
    # the lowest order is recommended only when nothing cheaper to build meets the requirement
    rec = rows[c.recommended.value]
    meeting = [r for r in c.families if r.meets and r.within_limits]
    assert all((rec.opamps, rec.gbw_needed_hz) <= (r.opamps, r.gbw_needed_hz) for r in meeting)
    if rec.order > rows["elliptic"].order:
        assert "elliptic has the lowest order" in c.recommended_reason
    t = c.table()
    assert list(t)[0] == "family" and all(v.shape == (7,) for v in t.values())
    svg = c.svg()
    assert b"<svg" in svg and b"frequency (Hz)" in svg


def test_compare_families_limits_change_the_recommendation():
    loose = _compare("lowpass", 1000.0, 4000.0, 3.0, 20.0, overshoot_limit_pct=2.0)
    rows = {r.family.value: r for r in loose.families}
    assert rows["bessel"].meets
    ok = [r for r in loose.families if r.meets and r.within_limits]
    assert all(r.overshoot_pct <= 2.0 for r in ok)
    assert loose.recommended is not None and rows[loose.recommended.value].overshoot_pct <= 2.0
    # the elliptic design rings more than 2 % and is not chosen
    assert rows["elliptic"].within_limits is False
    assert loose.recommended.value != "elliptic"


def test_compare_families_band_responses_and_errors():
    c = _compare("bandpass", [35e3, 45e3], [25e3, 60e3], 1.0, 30.0)
    assert any(r.meets for r in c.families)
    for r in c.families:
        if r.meets:
            assert r.overshoot_pct is None and r.settling_time_1pct_s is not None
    from service.errors import RolloffError

    with pytest.raises(RolloffError) as e:
        _compare("lowpass", 2000.0, 1000.0, 0.5, 50.0)
    assert e.value.field == "stopband_hz"
