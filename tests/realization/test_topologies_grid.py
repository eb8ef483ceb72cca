"""Every topology x kind x strategy on a grid of sections: design -> achieved, registry, errors.

The grid (``CASES``) and the candidate capacitors (``free_candidates``) are
shared with the circuit and sensitivity tests.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.approximation import Section, SectionKind
from service.errors import InvalidParameter
from service.realization.errors import RatioLimitViolated, RealizationError, UnknownStrategy, UnknownTopology, UnsupportedSection
from service.realization.topologies import TOPOLOGIES, PartSpec, Topology, auto_topology, describe_all, get_topology

K = SectionKind
NOTCH_KINDS = (K.NOTCH, K.LOWPASS_NOTCH, K.HIGHPASS_NOTCH)
FZ_RATIO = {K.NOTCH: 1.0, K.LOWPASS_NOTCH: 2.6, K.HIGHPASS_NOTCH: 0.45}


def _gain_for(topology: Topology, kind: SectionKind, strategy: str, q: float | None, g: float) -> float:
    """A section gain the strategy realizes in magnitude."""
    if strategy == "unity_gain":
        return 1.0
    if strategy == "equal_component":
        return 3.0 - 1.0 / q
    return g


def _sections(topology: Topology, kind: SectionKind):
    qs = [None] if topology.order == 1 else ([0.6, 1.9, 7.5] if topology.name != "twin_t_notch" else [0.4, 2.0, 12.0])
    for f0 in (50.0, 1234.5, 38e3):
        for q in qs:
            for g in (1.7, 4.2):
                fz = f0 * FZ_RATIO[kind] if kind in NOTCH_KINDS else None
                yield f0, q, fz, g


def _cases():
    out = []
    for name, top in TOPOLOGIES.items():
        for kind in sorted(top.kinds, key=lambda k: k.value):
            for strategy in top.strategy_names(kind):
                for f0, q, fz, g in _sections(top, kind):
                    sec = Section(kind, top.order, f0, q, fz, _gain_for(top, kind, strategy, q, g))
                    if top.strategy_applicable(sec, strategy) is not None:
                        continue
                    if strategy == "maximum_gain":          # the gain this strategy imposes
                        sec = Section(kind, top.order, f0, q, fz, top.forced_gain(sec, strategy))
                    out.append(pytest.param(top, sec, strategy, id=f"{name}-{kind.value}-{strategy}-{f0:g}-{q}-{sec.gain:.3g}"))
    return out


CASES = _cases()


def free_candidates(top: Topology, sec: Section, strategy: str, n: int = 4, seed: int = 1) -> dict[str, np.ndarray]:
    """Free capacitor candidates (F), shape (n,), inside every ratio limit of the strategy."""
    rng = np.random.default_rng(seed)
    free = {r: 10.0 ** rng.uniform(-9.0, -7.0, n) for r in top.free_roles(sec, strategy)}
    q, g = sec.q, abs(sec.gain)
    if top.name == "sallen_key" and sec.kind == K.LOWPASS and strategy != "equal_component":
        k = 1.0 if strategy == "unity_gain" else g
        free["C2"] = free["C1"] / (1.5 * 4 * q * q / (1 + 4 * q * q * (k - 1)))
    if top.name == "multiple_feedback" and sec.kind == K.LOWPASS:
        free["C2"] = free["C1"] / (1.5 * 4 * q * q * (1 + g))
    if top.name == "multiple_feedback" and sec.kind == K.BANDPASS:
        free["C2"] = free["C1"] * max(1.0, 1.5 * g / (q * q))
    return free


def expected_gain(top: Topology, sec: Section, strategy: str) -> float:
    forced = top.forced_gain(sec, strategy)
    return sec.gain if forced is None else forced


@pytest.mark.parametrize("top, sec, strategy", CASES)
def test_achieved_reproduces_the_section(top, sec, strategy):
    values = top.design(sec, strategy, free_candidates(top, sec, strategy))
    roles = {p.role for p in top.parts(sec, strategy)}
    assert set(values) == roles
    for v in values.values():
        assert v.shape == (4,) and np.all(np.isfinite(v)) and np.all(v > 0)
    got = top.achieved(sec, strategy, values)
    np.testing.assert_allclose(got["f0_hz"], sec.f0_hz, rtol=1e-9)
    np.testing.assert_allclose(got["gain"], expected_gain(top, sec, strategy), rtol=1e-9)
    # the magnitude is the section's; the sign is the topology's polarity
    np.testing.assert_allclose(np.abs(got["gain"]), abs(sec.gain), rtol=1e-9)
    if top.order == 2:
        np.testing.assert_allclose(got["q"], sec.q, rtol=1e-9)
    else:
        assert np.all(np.isnan(got["q"]))
    if sec.kind in NOTCH_KINDS:
        np.testing.assert_allclose(got["fz_hz"], sec.fz_hz, rtol=1e-9)
        # source: the standard form (service/approximation/types.py): the zeros lie on the j-axis
        np.testing.assert_allclose(got["zero_damping"], 0.0, atol=1e-9)


@pytest.mark.parametrize("top, sec, strategy", CASES)
def test_free_parts_are_capacitors_and_pass_through(top, sec, strategy):
    parts = top.parts(sec, strategy)
    assert all(isinstance(p, PartSpec) and p.kind in ("resistor", "capacitor") for p in parts)
    assert all(p.kind == "capacitor" for p in parts if p.free)
    assert len({p.role for p in parts}) == len(parts)
    free = free_candidates(top, sec, strategy)
    values = top.design(sec, strategy, free)
    for role, cand in free.items():
        np.testing.assert_array_equal(values[role], cand)
    assert len(top.opamp_roles(sec, strategy)) >= 1


def test_r_ref_sets_ratio_only_resistors():
    top = TOPOLOGIES["sallen_key"]
    sec = Section(K.LOWPASS, 2, 1000.0, 0.8, None, 2.0)
    free = {"C1": np.array([100e-9]), "C2": np.array([22e-9])}
    a = top.design(sec, "given_gain", free, r_ref_ohm=10e3)
    b = top.design(sec, "given_gain", free, r_ref_ohm=4.7e3)
    assert a["Rg"][0] == 10e3 and b["Rg"][0] == 4.7e3
    assert a["Rf"][0] / a["Rg"][0] == pytest.approx(1.0, rel=1e-12)
    np.testing.assert_array_equal(a["R1"], b["R1"])


# -- ratio limits -------------------------------------------------------------


def test_unity_gain_sallen_key_lowpass_ratio_limit():
    # C1/C2 >= 4 Q^2  (Mancini, Op Amps for Everyone, ch. 16, eq. 16-17, with C1/C2 named the other way)
    top = TOPOLOGIES["sallen_key"]
    sec = Section(K.LOWPASS, 2, 1000.0, 2.0, None, 1.0)
    c1 = np.array([100e-9, 100e-9, 100e-9])
    c2 = np.array([100e-9 / 15.9, 100e-9 / 16.0, 100e-9 / 16.1])
    v = top.design(sec, "unity_gain", {"C1": c1, "C2": c2})
    assert np.isnan(v["R1"][0]) and np.isnan(v["R2"][0]) and np.isnan(v["C1"][0])
    assert np.all(np.isfinite(v["R1"][1:]))
    with pytest.raises(RatioLimitViolated, match=r"C1/C2 >= 4 Q\^2 = 16"):
        top.design(sec, "unity_gain", {"C1": c1, "C2": c2}, infeasible="raise")


def test_given_gain_sallen_key_lowpass_ratio_limit():
    top = TOPOLOGIES["sallen_key"]
    q, k = 2.0, 1.5
    limit = 4 * q * q / (1 + 4 * q * q * (k - 1))
    sec = Section(K.LOWPASS, 2, 1000.0, q, None, k)
    c1 = np.full(2, 47e-9)
    v = top.design(sec, "given_gain", {"C1": c1, "C2": c1 / np.array([limit * 0.99, limit * 1.01])})
    assert np.isnan(v["R1"][0]) and np.isfinite(v["R1"][1])
    with pytest.raises(RatioLimitViolated, match="1 \\+ 4 Q\\^2 \\(K - 1\\)"):
        top.design(sec, "given_gain", {"C1": c1, "C2": c1 / (limit * 0.99)}, infeasible="raise")


def test_mfb_limits():
    top = TOPOLOGIES["multiple_feedback"]
    lp = Section(K.LOWPASS, 2, 1000.0, 1.0, None, 2.0)     # C1/C2 >= 4 Q^2 (1 + |g|) = 12
    v = top.design(lp, "given_gain", {"C1": np.array([120e-9, 120e-9]), "C2": np.array([10.1e-9, 9.9e-9])})
    assert np.isnan(v["R1"][0]) and np.isfinite(v["R1"][1])
    bp = Section(K.BANDPASS, 2, 1000.0, 1.0, None, 2.5)    # |g| < Q^2 (1 + C2/C1)
    v = top.design(bp, "given_gain", {"C1": np.array([10e-9, 10e-9]), "C2": np.array([14e-9, 16e-9])})
    assert np.isnan(v["R2"][0]) and np.isfinite(v["R2"][1])


def test_section_level_limits_raise():
    sk = TOPOLOGIES["sallen_key"]
    with pytest.raises(RealizationError, match="Q > 0.5"):
        sk.design(Section(K.LOWPASS, 2, 1e3, 0.5, None, 1.0), "equal_component", {"C1": np.array([1e-8])})
    with pytest.raises(RealizationError, match="gain magnitude above 1"):
        sk.design(Section(K.LOWPASS, 2, 1e3, 0.7, None, 1.0), "given_gain", {"C1": np.array([1e-8]), "C2": np.array([1e-9])})
    with pytest.raises(RealizationError, match="Q > 1/4"):
        TOPOLOGIES["twin_t_notch"].design(Section(K.NOTCH, 2, 50.0, 0.2, 50.0, 1.0), "unity_gain", {"C1": np.array([1e-7])})
    with pytest.raises(UnsupportedSection, match="fz_hz equal to f0_hz"):
        TOPOLOGIES["twin_t_notch"].achieved(Section(K.NOTCH, 2, 50.0, 2.0, 60.0, 1.0), "unity_gain", {})
    with pytest.raises(RealizationError, match="gain above 1"):
        TOPOLOGIES["noninverting_first_order"].design(Section(K.LOWPASS, 1, 1e3, None, None, 0.5), "given_gain",
                                                      {"C1": np.array([1e-8])})
    with pytest.raises(RealizationError, match="missing C2"):
        sk.design(Section(K.LOWPASS, 2, 1e3, 0.7, None, 1.0), "unity_gain", {"C1": np.array([1e-8])})
    with pytest.raises(RealizationError, match="positive capacitances"):
        sk.design(Section(K.LOWPASS, 2, 1e3, 0.7, None, 1.0), "unity_gain", {"C1": np.array([1e-8]), "C2": np.array([-1e-9])})


# -- kinds a topology cannot realize -------------------------------------------


def _unsupported():
    probes = [Section(K.LOWPASS, 1, 1e3, None, None, 1.0), Section(K.HIGHPASS, 1, 1e3, None, None, 1.0)]
    probes += [Section(k, 2, 1e3, 1.2, 1e3 * FZ_RATIO.get(k, 1.0) if k in NOTCH_KINDS else None, 1.0) for k in K]
    out = []
    for name, top in TOPOLOGIES.items():
        for sec in probes:
            if sec.kind in top.kinds and sec.order == top.order:
                continue
            out.append(pytest.param(top, sec, id=f"{name}-{sec.kind.value}-{sec.order}"))
    return out


@pytest.mark.parametrize("top, sec", _unsupported())
def test_forcing_an_unrealizable_kind_raises(top, sec):
    for call in (lambda: top.strategies(sec),
                 lambda: top.design(sec, top.strategy_names(next(iter(top.kinds)))[0], {"C1": np.array([1e-8])}),
                 lambda: top.achieved(sec, top.strategy_names(next(iter(top.kinds)))[0], {})):
        with pytest.raises(RealizationError) as info:
            call()
        assert isinstance(info.value, (UnsupportedSection, InvalidParameter, ValueError))
        assert top.name in str(info.value) and sec.kind.value in str(info.value)


def test_unknown_strategy_and_topology():
    sk = get_topology("sallen_key")
    with pytest.raises(UnknownStrategy, match="'sallen_key' has no strategy 'equal_resistor'"):
        sk.design(Section(K.LOWPASS, 2, 1e3, 0.7, None, 1.0), "equal_resistor", {})
    with pytest.raises(UnknownTopology, match="known topologies are"):
        get_topology("leapfrog")


def test_bad_sections_raise_naming_the_field():
    sk = TOPOLOGIES["sallen_key"]
    for sec, field in ((Section(K.LOWPASS, 2, -1.0, 0.7, None, 1.0), "section.f0_hz"),
                       (Section(K.LOWPASS, 2, 1e3, None, None, 1.0), "section.q"),
                       (Section(K.LOWPASS, 2, 1e3, 0.7, None, 0.0), "section.gain")):
        with pytest.raises(RealizationError) as info:
            sk.strategies(sec)
        assert info.value.field == field
    with pytest.raises(RealizationError) as info:
        TOPOLOGIES["state_variable"].strategies(Section(K.NOTCH, 2, 1e3, 2.0, None, 1.0))
    assert info.value.field == "section.fz_hz"


# -- registry, catalog and the automatic rule ---------------------------------


def test_registry_and_describe():
    assert set(TOPOLOGIES) == {"rc_first_order", "inverting_first_order", "noninverting_first_order", "sallen_key",
                               "multiple_feedback", "state_variable", "tow_thomas", "twin_t_notch",
                               "delyiannis_friend_notch"}
    entries = {d["name"]: d for d in describe_all()}
    for name, top in TOPOLOGIES.items():
        d = top.describe()
        assert d == entries[name]
        assert set(d) >= {"name", "kinds", "strategies", "opamps", "reference"}
        assert set(d["kinds"]) == {k.value for k in top.kinds}
        assert set(d["strategies"]) == set(d["kinds"]) and all(d["strategies"].values())
        assert d["reference"]
    sv = entries["state_variable"]
    assert sv["opamps"]["notch"] == 4 and sv["opamps"]["lowpass"] == 3
    assert set(sv["kinds"]) >= {"notch", "lowpass_notch", "highpass_notch"}
    assert entries["sallen_key"]["strategies"]["lowpass"] == ["unity_gain", "equal_component", "given_gain"]
    assert entries["sallen_key"]["arbitrary_gain"]["lowpass"] == ["given_gain"]
    assert entries["twin_t_notch"]["kinds"] == ["notch"] and entries["twin_t_notch"]["opamps"]["notch"] == 1
    assert entries["multiple_feedback"]["kinds"] == ["lowpass", "highpass", "bandpass"]


@pytest.mark.parametrize("sec, name, strategy", [
    # common practice (no source): the limits of auto_topology's documented rule (MAX_Q, spreads, sum |S^Q|)
    (Section(K.LOWPASS, 1, 1e3, None, None, 1.0), "rc_first_order", "unity_gain"),
    (Section(K.HIGHPASS, 1, 1e3, None, None, 3.0), "noninverting_first_order", "given_gain"),
    (Section(K.LOWPASS, 1, 1e3, None, None, 0.5), "inverting_first_order", "given_gain"),
    (Section(K.LOWPASS, 2, 1e3, 0.707, None, 1.0), "sallen_key", "unity_gain"),
    (Section(K.LOWPASS, 2, 1e3, 0.707, None, 2.0), "sallen_key", "given_gain"),
    # a given-gain Sallen-Key of Q 2.5 has sum |S^Q| above the limit; of the one-op-amp stages within it
    # (follower, inverting MFB) neither keeps gain and sign, and the follower's Q sensitivity is smaller
    (Section(K.HIGHPASS, 2, 1e3, 2.5, None, 2.0), "sallen_key", "unity_gain"),
    # Q 4-6: the Sallen-Key and MFB lowpass capacitor spreads (4 Q^2 and more) exceed the limit
    (Section(K.LOWPASS, 2, 1e3, 6.0, None, 1.0), "tow_thomas", "given_gain"),
    (Section(K.BANDPASS, 2, 1e3, 5.0, None, 1.0), "multiple_feedback", "given_gain"),
    (Section(K.BANDPASS, 2, 1e3, 12.0, None, 1.0), "multiple_feedback", "given_gain"),
    # Q 25: the MFB bandpass resistor spread (about 4 Q^2) is beyond the limit; of the three-op-amp stages the
    # state-variable bandpass output keeps the sign, the Tow-Thomas one inverts
    (Section(K.BANDPASS, 2, 1e3, 25.0, None, 1.0), "state_variable", "given_gain"),
    # a mains notch of gain 1: the bootstrapped twin-T realizes it exactly with one op-amp
    (Section(K.NOTCH, 2, 50.0, 5.0, 50.0, 1.0), "twin_t_notch", "unity_gain"),
    # at Q 9 the twin-T's Q sensitivity (4 Q - 1 for its divider alone) is beyond the limit
    (Section(K.NOTCH, 2, 50.0, 9.0, 50.0, 1.0), "delyiannis_friend_notch", "maximum_gain"),
    (Section(K.LOWPASS_NOTCH, 2, 1e3, 0.9, 3e3, 1.0), "delyiannis_friend_notch", "given_gain"),
    (Section(K.HIGHPASS_NOTCH, 2, 1e3, 0.9, 4e2, 0.1), "delyiannis_friend_notch", "given_gain"),
    (Section(K.LOWPASS_NOTCH, 2, 20260.0, 24.8, 23627.0, 1.0), "tow_thomas", "given_gain"),
])
def test_auto_topology_rule(sec, name, strategy):
    top, strat = auto_topology(sec)
    assert (top.name, strat) == (name, strategy)
    assert strat in top.strategies(sec)


def _assessed(sec, opamp_model=None):
    from service.realization.topologies.auto import CANDIDATES, _strategies, assess

    out = []
    for top in CANDIDATES[sec.kind]:
        for strat in _strategies(top, sec, False):
            a = assess(top, strat, sec, opamp_model)
            if a is not None:
                out.append(a)
    return out


@pytest.mark.parametrize("kind, fz", [(K.LOWPASS, None), (K.HIGHPASS, None), (K.BANDPASS, None), (K.NOTCH, 1.0),
                                      (K.LOWPASS_NOTCH, 1.3), (K.HIGHPASS_NOTCH, 0.7)])
@pytest.mark.parametrize("q", [0.55, 0.9, 2.0, 4.0, 8.0, 30.0])
def test_auto_choice_is_the_fewest_opamps_within_the_limits(kind, fz, q):
    from service.realization.topologies.auto import MAX_Q_SENSITIVITY, MAX_RESISTOR_SPREAD

    sec = Section(kind, 2, 1000.0, q, None if fz is None else 1000.0 * fz, 1.0)
    top, strat = auto_topology(sec)
    found = _assessed(sec)
    chosen = next(a for a in found if a.topology is top and a.strategy == strat)
    accepted = [a for a in found if a.accepted]
    if accepted:
        assert chosen.accepted
        assert chosen.opamps == min(a.opamps for a in accepted)
        assert chosen.q_sensitivity <= MAX_Q_SENSITIVITY and chosen.resistor_spread <= MAX_RESISTOR_SPREAD
    else:
        assert chosen.excess == min(a.excess for a in found)


def test_auto_topology_prefers_a_follower_for_a_slow_opamp():
    from service.circuit import OpAmpModel

    # Q 1.2, gain 2: the given-gain Sallen-Key is within the limits; a slow op-amp (GBW < 100 Q f0) takes the follower
    sec = Section(K.LOWPASS, 2, 20e3, 1.2, None, 2.0)
    assert auto_topology(sec) == (TOPOLOGIES["sallen_key"], "given_gain")
    assert auto_topology(sec, opamp_gbw_hz=1e6)[1] == "unity_gain"      # 1 MHz < 100 * 1.2 * 20 kHz
    assert auto_topology(sec, opamp_model=OpAmpModel(gbw_hz=1e8, a0=1e5))[1] == "given_gain"


def test_auto_topology_weighs_the_opamp():
    from service.circuit import OpAmpModel

    # a Q 24.8 lowpass notch at 20 kHz: without an op-amp the three-op-amp Tow-Thomas is within the limits; a
    # 10 MHz op-amp shifts its f0/Q by tens of percent (beyond what predistortion is relied on for), so the
    # single-op-amp section, least beyond its limits, is taken
    sec = Section(K.LOWPASS_NOTCH, 2, 20260.0, 24.8, 23627.0, 1.0)
    assert auto_topology(sec)[0].name == "tow_thomas"
    found = {a.topology.name: a for a in _assessed(sec, OpAmpModel(gbw_hz=10e6, a0=1e5))}
    assert found["tow_thomas"].gbw_shift > 0.1
    assert auto_topology(sec, opamp_model=OpAmpModel(gbw_hz=10e6, a0=1e5))[0].name == "delyiannis_friend_notch"


def test_describe_auto_states_the_rule_and_limits():
    from service.realization.topologies import describe_auto

    d = describe_auto()
    assert "fewest op-amps" in d["rule"]
    assert d["limits"]["max_q_sensitivity"] > 0 and d["limits"]["max_resistor_spread"] > 1
    assert set(d["candidates"]) == {"lowpass", "highpass", "bandpass", "notch", "lowpass_notch", "highpass_notch"}
    for names in d["candidates"].values():
        assert all(n in TOPOLOGIES for n in names)


def test_auto_topology_allpass_unsupported():
    with pytest.raises(UnsupportedSection, match="allpass"):
        auto_topology(Section(K.ALLPASS, 2, 1e3, 1.0, None, 1.0))


def test_forced_gain_polarity():
    mfb = TOPOLOGIES["multiple_feedback"]
    assert mfb.forced_gain(Section(K.LOWPASS, 2, 1e3, 0.7, None, 2.0), "given_gain") == -2.0
    sk = TOPOLOGIES["sallen_key"]
    assert sk.forced_gain(Section(K.LOWPASS, 2, 1e3, 0.8, None, 1.0), "equal_component") == pytest.approx(3 - 1 / 0.8)
    assert sk.forced_gain(Section(K.LOWPASS, 2, 1e3, 0.8, None, 1.0), "unity_gain") == 1.0
    assert sk.forced_gain(Section(K.LOWPASS, 2, 1e3, 0.8, None, 2.0), "given_gain") is None
    assert TOPOLOGIES["tow_thomas"].forced_gain(Section(K.LOWPASS, 2, 1e3, 0.8, None, 2.0), "given_gain") is None
    assert TOPOLOGIES["tow_thomas"].forced_gain(Section(K.BANDPASS, 2, 1e3, 0.8, None, 2.0), "given_gain") == -2.0
    assert TOPOLOGIES["state_variable"].forced_gain(Section(K.LOWPASS, 2, 1e3, 0.8, None, 2.0), "given_gain") == -2.0
    assert math.isclose(TOPOLOGIES["twin_t_notch"].forced_gain(Section(K.NOTCH, 2, 50.0, 2.0, 50.0, 1.0), "unity_gain"), 1.0)

