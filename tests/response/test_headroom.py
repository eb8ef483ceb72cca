"""Headroom: levels at every op-amp output, the first to clip (checked in an ngspice transient), bad input.

These tests fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from service.approximation import Section, SectionKind
from service.circuit import to_spice
from service.realization import design_filter
from service.realization.cascade import analysis_grid
from service.realization.supply import filter_circuit, supply_report
from service.response.errors import InvalidLevel
from service.response.headroom import analyze_headroom
from tests.ngspice import run_ngspice_tran_raw
from tests.realization.spice_checks import sections_record

SWING = 1.0
OPAMP = {"gbw_hz": 10e6, "output_swing_v": SWING}


def _cascade(order="as_computed"):
    """Two lowpass stages, a Q = 5 section (about 14 dB of peaking) ahead of a Q = 0.6 one."""
    secs = [Section(SectionKind.LOWPASS, 2, 1000.0, 5.0, None, 1.0),
            Section(SectionKind.LOWPASS, 2, 1300.0, 0.6, None, 1.0)]
    return design_filter(sections_record(secs), opamp=OPAMP, section_order=order, topology="sallen_key")


def _report(d, **kw):
    fc = filter_circuit(d, supply={"v_pos": 15.0, "v_neg": -15.0})
    rep = supply_report(d, supply={"v_pos": 15.0, "v_neg": -15.0})
    dc = {b.ref: b.dc_v for b in rep.opamp_bias}
    grid = analysis_grid([s.section for s in d.stages])
    return fc, analyze_headroom(fc.circuit, grid, limits=fc.output_limits, dc_v=dc, stage_of=fc.opamp_stage,
                                rails=(-15.0, 15.0), **kw)


def test_levels_follow_the_stage_peak_gains():
    d = _cascade()
    _, h = _report(d, input_peak_v=0.1)
    by_stage = {o.stage: o for o in h.opamps}
    # common practice (no source): a second-order lowpass of Q peaks at Q / sqrt(1 - 1/(4 Q^2)) (Q > 1/sqrt 2)
    q = d.stages[0].achieved["q"]
    assert by_stage[1].peak_gain == pytest.approx(q / math.sqrt(1 - 1 / (4 * q * q)), rel=2e-3)
    assert by_stage[1].peak_gain == pytest.approx(10 ** (d.stages[0].peak_gain_db / 20), rel=1e-6)
    assert by_stage[2].peak_gain == pytest.approx(10 ** (d.stages[1].peak_gain_db / 20), rel=1e-6)
    assert by_stage[1].peak_v == pytest.approx(0.1 * by_stage[1].peak_gain)
    # the grid's samples stay at or below the refined peaks, within a grid step of them
    assert np.all(h.levels_v.max(axis=1) <= np.array([o.peak_v for o in h.opamps]) * (1 + 1e-12))
    np.testing.assert_allclose(h.levels_v.max(axis=1), [o.peak_v for o in h.opamps], rtol=3e-2)
    assert h.first_clip == "U1" and h.clips_before_output
    assert h.clip_input_v == pytest.approx(SWING / by_stage[1].peak_gain, rel=1e-3)
    assert h.max_output_v == pytest.approx(h.clip_input_v * h.output_peak_gain)
    assert by_stage[1].headroom_db == pytest.approx(20 * math.log10(SWING / by_stage[1].peak_v), rel=1e-3)
    assert any("clips before the output" in w for w in h.warnings)
    # from the output level instead of the input
    _, h2 = _report(d, output_peak_v=0.5)
    assert h2.input_peak_v == pytest.approx(0.5 / h.output_peak_gain)


def _clipping_netlist(netlist: str, amplitude: float, f_hz: float) -> str:
    """The exported netlist with op-amps whose outputs clip at +/- SWING and a sine input."""
    text = netlist.replace("E1 out 0 p 0 1", f"B1 out 0 V = max(min(V(p), {SWING!r}), {-SWING!r})")
    assert "B1 out 0" in text
    return re.sub(r"^VIN in 0 AC 1$", f"VIN in 0 SIN(0 {amplitude!r} {f_hz!r})", text, flags=re.M)


@pytest.mark.parametrize("factor", [0.99, 1.01])
def test_first_stage_clips_in_a_transient_at_the_predicted_input(factor):
    d = _cascade()
    fc, h = _report(d, input_peak_v=0.1)
    u1 = next(o for o in h.opamps if o.ref == h.first_clip)
    f = u1.peak_frequency_hz
    net = _clipping_netlist(to_spice(fc.circuit), factor * h.clip_input_v, f)
    period = 1 / f
    # source: ngspice transient analysis (reference simulator), steady state after 40 periods
    t, v = run_ngspice_tran_raw(net, period / 400, 45 * period, nodes=(u1.node, "out"), tstart=40 * period)
    peak = np.max(np.abs(v[u1.node]))
    if factor < 1:
        assert peak == pytest.approx(factor * SWING, rel=1e-3)          # linear, below the swing
        assert peak < SWING * 0.995
    else:
        assert peak == pytest.approx(SWING, abs=1e-6)                    # held at the swing: clipped
        flat = np.mean(np.abs(v[u1.node]) > SWING * (1 - 1e-6))
        assert flat > 0.02                                               # flat tops, not a touch
    # the output stage never reaches its own limit first
    assert np.max(np.abs(v["out"])) < SWING


def test_ascending_q_moves_the_first_clip_to_the_output():
    d = _cascade(order="ascending_q")
    _, h = _report(d, input_peak_v=0.1)
    assert h.first_clip == "U2" and not h.clips_before_output


@pytest.mark.parametrize(("kwargs", "field"), [
    ({}, "input_peak_v"), ({"input_peak_v": 0.1, "output_peak_v": 0.1}, "input_peak_v"),
    ({"input_peak_v": -1.0}, "input_peak_v"), ({"input_peak_v": float("nan")}, "input_peak_v"),
    ({"input_peak_v": 20.0}, "input_peak_v"), ({"output_peak_v": 400.0}, "output_peak_v"),
])
def test_bad_levels_name_the_field(kwargs, field):
    with pytest.raises(InvalidLevel) as err:
        _report(_cascade(), **kwargs)
    assert err.value.field == field


def test_single_rail_input_beyond_the_rails():
    d = _cascade()
    fc = filter_circuit(d, supply={"v_pos": 5.0, "v_neg": 0.0})
    grid = analysis_grid([s.section for s in d.stages])
    with pytest.raises(InvalidLevel) as err:
        analyze_headroom(fc.circuit, grid, limits=fc.output_limits, input_peak_v=2.6, input_bias_v=fc.input_bias_v,
                         rails=(0.0, 5.0))
    assert err.value.field == "input_peak_v"
    ok = analyze_headroom(fc.circuit, grid, limits=fc.output_limits, input_peak_v=0.2, input_bias_v=fc.input_bias_v,
                          rails=(0.0, 5.0))
    assert ok.first_clip == "U1"
