"""Predistortion for the op-amp: stages designed for a single-pole op-amp reach their target with it."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation import Section, SectionKind
from service.circuit import OpAmpModel, to_spice
from service.realization import design_filter
from service.realization.analysis import stage_circuit
from service.realization.gbw import GBW_SPREAD
from service.realization.predistortion import model_figures, predistort
from service.realization.topologies import TOPOLOGIES
from tests.ngspice import run_ngspice_ac
from tests.realization.spice_checks import one_section

K = SectionKind
GBW = 10e6
E96 = {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}

# Stages whose f0 or Q a 10 MHz op-amp moves by well over 1 % when they are designed for an ideal op-amp.
CASES = [
    ("sallen_key", Section(K.LOWPASS, 2, 100e3, 2.0, None, 1.0)),
    ("multiple_feedback", Section(K.BANDPASS, 2, 40e3, 8.0, None, 2.0)),
    ("tow_thomas", Section(K.LOWPASS_NOTCH, 2, 20e3, 8.0, 26e3, 1.0)),
    ("delyiannis_friend_notch", Section(K.LOWPASS_NOTCH, 2, 60e3, 6.8, 77e3, 1.0)),
]


def _fit_poles(f_hz: np.ndarray, h: np.ndarray, n_num: int, n_den: int, w_ref: float) -> np.ndarray:
    """Poles (rad/s) of a rational fit ``N(s)/D(s)`` to complex samples.

    Sanathanan-Koerner iteration of Levy's linear least squares (C. K. Sanathanan, J. Koerner,
    "Transfer function synthesis as a ratio of two complex polynomials", IEEE Trans. Automatic
    Control 8 (1963) 56-58, from memory), in the scaled variable ``s / w_ref``.
    """
    s = 2j * np.pi * f_hz / w_ref
    weight = np.ones(s.size)
    for _ in range(8):
        # unknowns: N coefficients b_0..b_nn, D coefficients a_1..a_nd (a_0 = 1), ascending powers
        cols = [s ** k for k in range(n_num + 1)] + [-h * s ** k for k in range(1, n_den + 1)]
        a = np.stack(cols, axis=1) * weight[:, None]
        rhs = h * weight
        a_ri = np.concatenate([a.real, a.imag])
        rhs_ri = np.concatenate([rhs.real, rhs.imag])
        x, *_ = np.linalg.lstsq(a_ri, rhs_ri, rcond=None)
        den = np.concatenate([[1.0], x[n_num + 1:]])
        weight = 1.0 / np.abs(np.polyval(den[::-1], s))
    return np.roots(den[::-1]) * w_ref


def _ngspice_figures(netlist: str, section: Section, opamps: int) -> tuple[float, float]:
    """f0 (Hz) and Q of the stage's dominant poles, fitted to ngspice's AC analysis."""
    lo, hi = section.f0_hz / 5.0, section.f0_hz * 5.0
    f, v = run_ngspice_ac(netlist.replace(netlist[netlist.lower().index(".ac"):].split("\n")[0],
                                          f".ac dec 200 {lo!r} {hi!r}"))
    h = v["out"]
    poles = _fit_poles(f, h, 2 + opamps, 2 + opamps, 2 * np.pi * section.f0_hz)
    w_t = 2 * np.pi * section.f0_hz
    pair = poles[np.argsort(np.abs(poles - (-w_t / (2 * section.q) + 1j * w_t)))[:1]]
    p = pair[0]
    w0 = abs(p)
    return w0 / (2 * np.pi), w0 / (-2 * p.real)


@pytest.mark.parametrize("name, section", CASES, ids=[c[0] for c in CASES])
def test_stage_designed_for_a_10_mhz_opamp_meets_f0_and_q_in_ngspice(name, section):
    top = TOPOLOGIES[name]
    d = design_filter(one_section(section), topology=name, parts=E96, opamp={"gbw_hz": GBW, "a0_db": 100})
    st, plan = d.stages[0], d.plans[0]
    assert plan.predistortion is not None and st.opamp_requirement.predistorted
    opamps = len(top.opamp_roles(st.section, st.strategy))
    f0, q = _ngspice_figures(d.netlist, st.section, opamps)
    # source: ngspice AC analysis (reference simulator) with the exported single-pole op-amp subcircuits
    assert abs(f0 / section.f0_hz - 1) < 0.01
    assert abs(q / section.q - 1) < 0.01
    # the same stage designed for an ideal op-amp, run with the 10 MHz one, misses by more
    ideal = design_filter(one_section(section), topology=name, parts=E96)
    model = OpAmpModel(gbw_hz=GBW, a0=1e5)
    netlist = to_spice(stage_circuit(ideal.plans[0], model), output="out", ac=("dec", 10, 1.0, 10.0))
    f0_i, q_i = _ngspice_figures(netlist, st.section, opamps)
    assert max(abs(f0_i / section.f0_hz - 1), abs(q_i / section.q - 1)) > 0.01
    # the fit reads the predistorted stage as the engine does (an independent solver agreeing)
    mac = st.achieved_macromodel
    assert f0 == pytest.approx(mac["f0_hz"], rel=2e-4) and q == pytest.approx(mac["q"], rel=2e-4)


@pytest.mark.parametrize("name, section", CASES, ids=[c[0] for c in CASES])
def test_predistortion_puts_the_exact_stage_on_target(name, section):
    top = TOPOLOGIES[name]
    strategy = top.strategies(section)[0]
    if name == "sallen_key":
        free = {"C1": 4.7e-9, "C2": 0.22e-9}          # C1/C2 above 4 Q^2
    else:
        free = {r: 1e-9 for r in top.free_roles(section, strategy)}
    model = OpAmpModel(gbw_hz=GBW, a0=1e5)
    pre = predistort(top, section, strategy, free, model, r_ref_ohm=10e3)
    assert pre.converged and pre.residual < 1e-6
    values = top.design(pre.section, strategy, {k: np.array([v]) for k, v in free.items()})
    fig = model_figures(top, pre.section, strategy, values, model, target=section)
    # source: the circuit engine's poles and zeros of the stage with the macromodel
    assert float(fig["f0_hz"][0]) == pytest.approx(section.f0_hz, rel=1e-5)
    assert float(fig["q"][0]) == pytest.approx(section.q, rel=1e-5)
    if section.fz_hz is not None:
        assert float(fig["fz_hz"][0]) == pytest.approx(section.fz_hz, rel=1e-5)
    # and the equations were asked for something else: the op-amp's own shift
    assert abs(pre.section.f0_hz / section.f0_hz - 1) + abs(pre.section.q / section.q - 1) > 1e-3


def test_gbw_needed_with_and_without_predistortion():
    section = Section(K.LOWPASS, 2, 20e3, 4.0, None, 1.0)
    d = design_filter(one_section(section), topology="tow_thomas", opamp={"gbw_hz": GBW})
    req = d.stages[0].opamp_requirement
    assert req.gbw_required_hz is not None and req.gbw_required_predistorted_hz is not None
    assert req.gbw_spread == GBW_SPREAD
    # predistortion removes the nominal shift; only the GBW's spread is left to the error budget, so the
    # figure drops by roughly that spread (first order in the op-amp's effect)
    ratio = req.gbw_required_predistorted_hz / req.gbw_required_hz
    assert 0.15 < ratio < 0.6
    doc_fields = req.as_dict()
    assert doc_fields["predistorted"] is True and doc_fields["design_section"]["q"] != section.q


def test_predistortion_stops_where_the_opamp_is_too_slow():
    # a Q 20 bandpass at 200 kHz with a 1 MHz op-amp: the fixed point leaves the realizable region; the
    # best step so far is kept and reported as not converged
    top = TOPOLOGIES["delyiannis_friend_notch"]
    section = Section(K.LOWPASS_NOTCH, 2, 200e3, 20.0, 230e3, 1.0)
    pre = predistort(top, section, "given_gain", {"C1": 1e-10}, OpAmpModel(gbw_hz=1e6, a0=1e5), r_ref_ohm=10e3)
    assert not pre.converged
    assert np.isfinite(pre.residual) or pre.residual == np.inf
