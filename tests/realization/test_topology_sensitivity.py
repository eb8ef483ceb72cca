"""Normalized sensitivities of f0 and Q: identities, finite differences and published values."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation import Section, SectionKind
from service.realization.topologies import TOPOLOGIES
from tests.realization.test_topologies_grid import CASES, free_candidates

K = SectionKind


def _design1(top, sec, strategy):
    values = top.design(sec, strategy, free_candidates(top, sec, strategy, n=1))
    return {k: float(v[0]) for k, v in values.items()}


@pytest.mark.parametrize("top, sec, strategy", CASES)
def test_sensitivity_sums(top, sec, strategy):
    # source: Schaumann & Van Valkenburg, Design of Analog Filters (2001), ch. 3: with ideal op-amps
    # f0 scales as 1/R and 1/C (sums -1 each), Q is dimensionless (sums 0 each).
    values = _design1(top, sec, strategy)
    sens = top.sensitivities(sec, strategy, values)
    kinds = {p.role: p.kind for p in top.parts(sec, strategy)}
    assert set(sens) == set(kinds)
    for kind in ("resistor", "capacitor"):
        sf = sum(s[0] for r, s in sens.items() if kinds[r] == kind)
        sq = sum(s[1] for r, s in sens.items() if kinds[r] == kind)
        assert sf == pytest.approx(-1.0, abs=1e-8)
        assert sq == pytest.approx(0.0, abs=1e-8)
    if top.order == 1:
        assert all(s[1] == 0.0 for s in sens.values())


@pytest.mark.parametrize("top, sec, strategy", CASES)
def test_sensitivities_equal_finite_differences_of_achieved(top, sec, strategy):
    values = _design1(top, sec, strategy)
    sens = top.sensitivities(sec, strategy, values)
    h = 1e-6
    for role, (sf, sq) in sens.items():
        up = dict(values, **{role: values[role] * (1 + h)})
        dn = dict(values, **{role: values[role] * (1 - h)})
        a_up = top.achieved(sec, strategy, {k: np.array([v]) for k, v in up.items()})
        a_dn = top.achieved(sec, strategy, {k: np.array([v]) for k, v in dn.items()})
        fd_f = (np.log(a_up["f0_hz"][0]) - np.log(a_dn["f0_hz"][0])) / (np.log1p(h) - np.log1p(-h))
        assert sf == pytest.approx(fd_f, abs=1e-4), role
        if top.order == 2:
            fd_q = (np.log(a_up["q"][0]) - np.log(a_dn["q"][0])) / (np.log1p(h) - np.log1p(-h))
            assert sq == pytest.approx(fd_q, abs=1e-4), role


def test_published_sallen_key_sensitivities():
    sk = TOPOLOGIES["sallen_key"]
    # unity-gain lowpass: S^Q_C1 = -S^Q_C2 = 1/2, S^f0 = -1/2 for each part
    # source: Huelsman, Active and Passive Analog Filter Design (1993), ch. 5, unity-gain VCVS sensitivities (from memory)
    sec = Section(K.LOWPASS, 2, 1e3, 0.9, None, 1.0)
    s = sk.sensitivities(sec, "unity_gain", _design1(sk, sec, "unity_gain"))
    assert s["C1"] == pytest.approx((-0.5, 0.5), abs=1e-12)
    assert s["C2"] == pytest.approx((-0.5, -0.5), abs=1e-12)
    # equal-component: S^Q_K = 3 Q - 1, so S^Q_Rf = (3 Q - 1)(K - 1)/K
    # source: Huelsman, Active and Passive Analog Filter Design (1993), ch. 5, equal-component VCVS (from memory)
    for q in (0.7, 2.0, 5.0):
        sec = Section(K.LOWPASS, 2, 1e3, q, None, 3 - 1 / q)
        s = sk.sensitivities(sec, "equal_component", _design1(sk, sec, "equal_component"))
        k = 3 - 1 / q
        assert s["Rf"][1] == pytest.approx((3 * q - 1) * (k - 1) / k, rel=1e-10)
        assert s["Rf"][0] == pytest.approx(0.0, abs=1e-12)


def test_published_mfb_and_state_variable_sensitivities():
    # MFB lowpass: S^Q_C1 = -S^Q_C2 = 1/2; KHN: S^f0 of each integrator part is -1/2 and of R4/R5 is 0
    # source: Schaumann & Van Valkenburg, Design of Analog Filters (2001), ch. 3-4 (from memory)
    mfb = TOPOLOGIES["multiple_feedback"]
    sec = Section(K.LOWPASS, 2, 1e3, 1.3, None, 2.0)
    s = mfb.sensitivities(sec, "given_gain", _design1(mfb, sec, "given_gain"))
    assert s["C1"] == pytest.approx((-0.5, 0.5), abs=1e-12)
    assert s["C2"] == pytest.approx((-0.5, -0.5), abs=1e-12)
    sv = TOPOLOGIES["state_variable"]
    sec = Section(K.BANDPASS, 2, 1e3, 20.0, None, 1.0)
    s = sv.sensitivities(sec, "given_gain", _design1(sv, sec, "given_gain"))
    for role in ("R6", "R7", "C1", "C2"):
        assert s[role][0] == pytest.approx(-0.5, abs=1e-12)
    assert s["R4"][0] == 0.0 and s["R5"][0] == 0.0
    # the Q sensitivity of the KHN stays of order 1 at Q = 20, unlike equal-component Sallen-Key (3Q - 1 = 59)
    assert max(abs(v[1]) for v in s.values()) < 1.5
