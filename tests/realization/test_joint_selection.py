"""The joint part search and the op-amp counts of the automatic topology choice."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from service.approximation import Section, SectionKind, design_by_order, design_by_requirement
from service.realization import design_filter
from service.realization.parts import PartsPolicy, resolve_kind
from service.realization.selection import _figure_error, select_values
from service.realization.topologies import TOPOLOGIES

K = SectionKind


def _allowed(resistors: str, capacitors: str):
    policy = PartsPolicy.from_dict({"resistors": {"series": resistors}, "capacitors": {"series": capacitors}})
    return {k: resolve_kind(policy, k) for k in ("resistor", "capacitor")}


def _worst(section, figures) -> float:
    out = max(abs(float(figures["f0_hz"]) / section.f0_hz - 1), abs(float(figures["q"]) / section.q - 1))
    if section.fz_hz:
        out = max(out, abs(float(figures["fz_hz"]) / section.fz_hz - 1))
    return out


def _nearest(allowed, ideal: dict) -> dict:
    """Each computed part snapped on its own to its nearest allowed value (the search before the joint one)."""
    out = {}
    for role, v in ideal.items():
        a = allowed["resistor" if role.startswith("R") else "capacitor"]
        out[role] = np.array([a.values[np.argmin(np.abs(np.log(a.values / float(v[0]))))]])
    return out


@pytest.mark.parametrize("q", [2.0, 4.0])
def test_60_hz_twin_t_notch_lands_within_what_the_series_allow_jointly(q):
    # A 60 Hz bridged (twin-T) notch from E24 resistors and E12 capacitors.  Snapping each computed part on
    # its own leaves f0 and Q several percent off (the case behind this search: 5.1 k for 5.013 k and 9.1 k for
    # 8.741 k, f0 -2.8 %, Q +3.1 %); searched jointly they land within what the series spacing allows.
    tw = TOPOLOGIES["twin_t_notch"]
    allowed = _allowed("E24", "E12")
    sec = Section(K.NOTCH, 2, 60.0, q, 60.0, 1.0)
    sel = select_values(tw, sec, "unity_gain", allowed)
    joint = _worst(sec, sel.predicted)
    ideal = tw.design(sec, "unity_gain", {"C1": np.array([sel.values["C1"]])})
    alone = tw.achieved(sec, "unity_gain", _nearest(allowed, ideal))
    # common practice (no source): about a percent.  The search's own score weighs the notch frequency and
    # depth above Q (they set the stopband), so a choice 1.04 % off in Q with fz 0.09 % off can win
    assert joint < 0.011
    assert joint < 0.5 * _worst(sec, {k: v[0] for k, v in alone.items()})
    # source: an exhaustive search (plain loops, independent of the vectorized one) over two values below and
    # two above each computed part, same capacitor choice: the joint search is within half a percent of its
    # optimum, both judged by the figure error the search minimizes (the notch frequency weighted above Q)
    specs = tw.parts(sec, "unity_gain")
    windows = []
    for p in specs:
        if p.free:
            windows.append([sel.values[p.role]])
            continue
        v = allowed[p.kind].values
        i = int(np.searchsorted(v, float(ideal[p.role][0])))
        windows.append(list(v[max(0, i - 2):i + 2]))
    best = np.inf
    for combo in itertools.product(*windows):
        a = tw.achieved(sec, "unity_gain", {p.role: np.array([x]) for p, x in zip(specs, combo)})
        best = min(best, float(_figure_error(sec, 1.0, a, 1)[0]))
    assert float(_figure_error(sec, 1.0, sel.predicted, 1)[0]) <= best + 0.005


def test_joint_search_weighs_every_dependent_part_together():
    # A state-variable highpass notch (ten computed resistors) with E96 resistors: f0, Q and fz within 0.3 %,
    # where snapping each resistor alone (same capacitors) leaves the worst figure several times further off.
    sv = TOPOLOGIES["state_variable"]
    allowed = _allowed("E96", "E12")
    sec = Section(K.HIGHPASS_NOTCH, 2, 3828.0, 0.871, 3166.0, 0.684)
    sel = select_values(sv, sec, "given_gain", allowed)
    # source: the topology's closed form (checked against the circuit engine in test_topology_circuits.py)
    assert _worst(sec, sel.predicted) < 3e-3
    assert sel.combinations > 100


def test_second_order_mains_notch_takes_two_opamps():
    # A second-order (prototype order 2) Butterworth bandstop from 55 Hz to 65 Hz: one lowpass notch and one
    # highpass notch of Q 8.5, each a single-op-amp section within the stated limits.  (Narrower, 57-63 Hz, the
    # sections' Q of 14 puts a single op-amp's Q sensitivity beyond the limit: two-integrator loops then.)
    approx = design_by_order("bandstop", "butterworth", 2, [55.0, 65.0])
    d = design_filter(approx)
    # common practice (no source): the limits of the automatic rule (sum |S^Q| <= 12, spreads)
    assert sum(len(st.opamps) for st in d.stages) <= 2
    assert {st.topology for st in d.stages} == {"delyiannis_friend_notch"}
    assert any(w.code == "mains_connection" for w in d.warnings)


def test_audio_anti_alias_elliptic_takes_at_most_ten_opamps():
    # 20 kHz audio anti-aliasing: passband 20 kHz within 0.1 dB, 80 dB from 24 kHz, E96 1 % resistors, E12 C0G
    approx = design_by_requirement("lowpass", "elliptic", 20e3, 24e3, 0.075, 80.0)
    parts = {"resistors": {"series": "E96", "tolerance": 0.01}, "capacitors": {"series": "E12", "dielectric": "C0G"}}
    d = design_filter(approx, parts=parts)
    # common practice (no source): the limits of the automatic rule
    assert sum(len(st.opamps) for st in d.stages) <= 10
    # with a 100 MHz op-amp too (the highest-Q section keeps a two-integrator loop)
    d = design_filter(approx, parts=parts, opamp={"gbw_hz": 100e6})
    assert sum(len(st.opamps) for st in d.stages) <= 10
