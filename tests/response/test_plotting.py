"""The response figure: its title, legend, the verifier's worst point on every mask segment, the passband
detail scaled to the ripple, labelled marker lines, and a size that does not grow with the grid."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy import signal

from service.api.views.designs import EVALUATE_EXAMPLE
from service.config import Settings
from service.response import FrequencyGrid
from service.response.figure_inputs import FigureSubject
from service.response.verification import UnstablePole, Verdict
from service.response.plotting import (FORBIDDEN, LIMIT_TO_SWING, MAX_DRAWN_POINTS, detail_gain_range, render_svg,
                                       response_figure)
from service.workflows import DesignDocument, MaskSegment, Requirement, ResponseRequest, respond
from tests.response.figure_svg import groups, marker_points, svg_point, texts, tree

SETTINGS = Settings()
W1K = 2 * math.pi * 1000.0


def _respond(system, **kw):
    return respond(ResponseRequest(system, figure=True, **kw), SETTINGS).result


def _scipy_gain_db(z, p, k, f_hz):
    """|H| in dB of an analog zpk at f_hz. # source: scipy.signal (reference library), freqs_zpk."""
    _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * np.asarray(f_hz, dtype=float))
    return 20 * np.log10(np.abs(h))


def _axes(fig, gid):
    return next(ax for ax in fig.axes if ax.get_gid() == gid)


CHEBY_5 = Requirement(response="lowpass", family="chebyshev1", order=5, cutoff_hz=1000.0, passband_ripple_db=1.0)
FAILING_MASK = (MaskSegment(0.0, 1000.0, max_loss_db=0.95), MaskSegment(2000.0, None, min_loss_db=40.0))


@pytest.fixture(scope="module")
def failing():
    """A 1 dB Chebyshev I against a 0.95 dB passband (missed) and a 40 dB stopband from 2 kHz (met)."""
    return _respond(CHEBY_5, mask=FAILING_MASK, frequencies=FrequencyGrid(10.0, 10_000.0, 301, "log"))


def test_title_names_the_filter_its_requirement_and_the_verdict(failing):
    root = tree(failing.svg())
    g = groups(root)
    assert texts(g["title"]) == ["Chebyshev I lowpass, order 5"]
    assert texts(g["title-requirement"]) == ["cutoff 1 kHz: edge of the ripple band · 1 dB ripple"]
    assert "title-design" not in g
    # source: scipy.signal (reference library), cheby1: the loss reaches the 1 dB ripple inside 0-1 kHz, so a
    # 0.95 dB passband misses by 0.05 dB
    z, p, k = signal.cheby1(5, 1.0, W1K, analog=True, output="zpk")
    g_pass = _scipy_gain_db(z, p, k, np.linspace(0.0, 1000.0, 20001))
    margin = 0.95 - (g_pass.max() - g_pass.min())
    assert margin == pytest.approx(-0.05, abs=1e-4)
    status = texts(g["title-status"])[0]
    assert status.startswith("Misses the mask · worst margin −0.05 dB at ")
    assert failing.verdict.worst.margin_db == pytest.approx(margin, abs=1e-4)


def test_legend_names_every_thing_drawn_the_mask_shading_included(failing):
    g = groups(tree(failing.svg()))
    legend = g["legend"]
    assert texts(legend) == ["gain", "mask: forbidden region", "mask limit", "mask limit, missed",
                             "worst point, met", "worst point, missed", "−3 dB frequency"]
    # the shading's swatch has the shading's colour
    assert any(FORBIDDEN in (p.get("style") or "") for p in legend.iter("{http://www.w3.org/2000/svg}path"))


def test_one_marker_per_segment_at_the_verifiers_worst_point(failing):
    fig = response_figure(failing)
    svg = render_svg(fig)
    g = groups(tree(svg))
    ax = _axes(fig, "magnitude")
    verdict = failing.verdict
    marks = sorted(k for k in g if k.startswith("magnitude-worst-"))
    assert marks == ["magnitude-worst-1-missed", "magnitude-worst-2-met"]   # the verifier's states, in order
    assert [s.met for s in verdict.segments] == [False, True]
    z, p, k = signal.cheby1(5, 1.0, W1K, analog=True, output="zpk")
    for name, seg in zip(marks, verdict.segments):
        (x, y), = marker_points(g[name])
        gain = verdict.reference_gain_db - seg.loss_db
        assert (x, y) == pytest.approx(svg_point(fig, ax, seg.worst_hz, gain), abs=0.01)
        # source: scipy.signal (reference library): the gain the marker sits at is the filter's gain there
        ref = _scipy_gain_db(z, p, k, np.linspace(0.0, 1000.0, 20001)).max()
        assert gain - verdict.reference_gain_db == pytest.approx(
            _scipy_gain_db(z, p, k, [seg.worst_hz])[0] - ref, abs=1e-6)
    # source: scipy.signal (reference library): above the cutoff the loss only grows, so the stopband's worst
    # point is its edge
    stop = _scipy_gain_db(z, p, k, np.geomspace(2000.0, 1e6, 2001))
    assert np.all(np.diff(stop) < 0) and verdict.segments[1].worst_hz == pytest.approx(2000.0, rel=1e-9)
    labels = texts(g["magnitude"])
    assert any(t.startswith("missed, −0.05 dB") for t in labels) and any(t.startswith("met, +") for t in labels)


def test_passband_detail_is_a_second_axes_scaled_to_a_tenth_of_a_db_ripple():
    req = Requirement(response="lowpass", family="chebyshev1", order=4, cutoff_hz=1000.0, passband_ripple_db=0.1)
    result = _respond(req)
    fig = response_figure(result)
    g = groups(tree(render_svg(fig)))
    assert {"magnitude", "passband-detail"} <= set(g)
    assert "Passband detail" in texts(g["passband-detail"])
    detail, mag = _axes(fig, "passband-detail"), _axes(fig, "magnitude")
    # source: scipy.signal (reference library), cheby1: a 0.1 dB ripple over 0-1 kHz
    z, p, k = signal.cheby1(4, 0.1, W1K, analog=True, output="zpk")
    g_pass = _scipy_gain_db(z, p, k, np.linspace(0.0, 1000.0, 20001))
    ripple = g_pass.max() - g_pass.min()
    assert ripple == pytest.approx(0.1, abs=1e-6)
    lo, hi = detail.get_ylim()
    top = result.magnitude_db[result.frequency_hz <= 1000.0].max()
    assert lo <= top - ripple and hi >= top                   # the ripple is on the axis ...
    assert (hi - lo) <= 2 * ripple                            # ... and fills at least half of it
    assert np.ptp(mag.get_ylim()) > 100                       # while the magnitude axis spans > 100 dB
    # the detail was evaluated densely, like the result (the same ripple as scipy's)
    d = result.detail
    assert d.frequency_hz.size >= 400 and np.ptp(d.magnitude_db[d.frequency_hz <= 1000.0]) == pytest.approx(
        ripple, abs=1e-4)


def test_passband_detail_samples_a_narrow_passband_densely():
    # a 35-45 kHz elliptic bandpass on the default grid (501 points over more than four decades): about a
    # dozen points fall in the passband and miss the ripple's valleys; the detail has them
    req = Requirement(response="bandpass", family="elliptic", passband_hz=(35e3, 45e3), stopband_hz=(25e3, 60e3),
                      passband_ripple_db=1.0, stopband_attenuation_db=30.0)
    result = _respond(req, mask=req)
    f = result.frequency_hz
    inside = (f >= 35e3) & (f <= 45e3)
    assert inside.sum() < 40
    coarse = np.ptp(result.magnitude_db[inside])
    d = result.detail
    fine = d.magnitude_db[(d.frequency_hz >= 35e3) & (d.frequency_hz <= 45e3)]
    # source: scipy.signal (reference library), ellip: an elliptic bandpass of this order with a 1 dB ripple
    # swings 1 dB over its passband; the dense detail shows all of it, the display grid does not
    z, p, k = signal.ellip(result_order(result), 1.0, 30.0, [2 * math.pi * 35e3, 2 * math.pi * 45e3],
                           btype="bandpass", analog=True, output="zpk")
    reference = np.ptp(_scipy_gain_db(z, p, k, np.linspace(35e3, 45e3, 20001)))
    assert reference == pytest.approx(1.0, abs=1e-6)
    assert np.ptp(fine) == pytest.approx(reference, abs=2e-3) and coarse < reference - 0.01
    lo, hi = _axes(response_figure(result), "passband-detail").get_ylim()
    assert lo <= fine.min() and hi >= fine.max() and hi - lo < 2.0


def result_order(result):
    """The prototype order of a requirement's figure, read from its title (``..., order N``)."""
    return int(result.subject.filter.rsplit(" ", 1)[1])


def test_detail_gain_range_rules():
    # common practice (no source): the swing fills the axis; a limit is drawn to scale only when it is
    # within LIMIT_TO_SWING swings
    lo, hi, shown = detail_gain_range(0.0, -0.1, 0.0, 0.1)
    assert shown and lo < -0.1 and hi > 0.0 and hi - lo == pytest.approx(0.1 * 1.3)
    lo, hi, shown = detail_gain_range(0.0, -0.1, 0.0, 3.0)
    assert not shown and hi - lo == pytest.approx(0.13) and lo > -3.0
    lo, hi, shown = detail_gain_range(0.0, -0.1, 0.0, 0.1 * LIMIT_TO_SWING)
    assert shown and lo < -0.4
    lo, hi, _ = detail_gain_range(1.0, 1.0, 1.0, None)        # a flat passband still gets an axis
    assert hi - lo > 0 and lo < 1.0 < hi


def test_minus_3db_lines_are_drawn_and_labelled_at_the_cutoff():
    req = Requirement(response="bandpass", family="butterworth", order=3, cutoff_hz=(35e3, 45e3))
    result = _respond(req)
    fig = response_figure(result)
    ax = _axes(fig, "magnitude")
    lines = [ln for ln in ax.get_lines() if ln.get_gid() == "marker-line"]
    # source: scipy.signal.butter (reference library): a Butterworth's critical frequencies are its -3 dB points
    assert sorted(float(ln.get_xdata()[0]) for ln in lines) == pytest.approx([35e3, 45e3], rel=1e-6)
    labels = texts(groups(tree(render_svg(fig)))["magnitude"])
    assert "−3 dB: 35 kHz" in labels and "−3 dB: 45 kHz" in labels


def test_design_document_title_counts_stages_and_op_amps():
    doc = DesignDocument.from_json(EVALUATE_EXAMPLE)
    result = _respond(doc, mask=doc.requirement)
    g = groups(tree(result.svg()))
    assert texts(g["title"]) == ["Butterworth lowpass, order 2"]
    assert texts(g["title-requirement"]) == ["passband to 300 Hz within 0.5 dB · stopband from 10 kHz, 35 dB down"]
    assert texts(g["title-design"]) == ["1 stage: 1 Sallen-Key · 1 op-amp, GBW 10 MHz"]
    assert texts(g["title-status"])[0].startswith("Meets the mask · worst margin +")


def test_a_worst_point_beyond_the_plotted_range_sits_on_its_edge_with_its_frequency():
    result = _respond(CHEBY_5, mask=FAILING_MASK, frequencies=FrequencyGrid(10.0, 1500.0, 201, "log"))
    fig = response_figure(result)
    g = groups(tree(render_svg(fig)))
    ax = _axes(fig, "magnitude")
    seg = result.verdict.segments[1]
    (x, _), = marker_points(g["magnitude-worst-2-met"])
    assert seg.worst_hz == pytest.approx(2000.0) and x == pytest.approx(svg_point(fig, ax, 1500.0, 0.0)[0], abs=0.01)
    assert any(t.endswith(" at 2 kHz") for t in texts(g["magnitude"]))


def test_an_unstable_design_is_said_to_meet_nothing(failing):
    # the verifier's verdict of a circuit with a pole in the right half-plane (stage 2, from 1)
    pole = UnstablePole(1, complex(2 * math.pi * 50.0, 2 * math.pi * 1000.0))
    unstable = replace(failing, verdict=Verdict(False, (pole,), None, (), None),
                       subject=FigureSubject("Elliptic lowpass, order 4", None, "2 stages: 2 Sallen-Key"))
    g = groups(tree(unstable.svg()))
    assert texts(g["title-status"]) == ["Unstable: pole at 1 kHz in the right half-plane (stage 2) — meets nothing"]
    assert not [k for k in g if "-worst-" in k]                # no segment is judged
    assert texts(g["title-design"]) == ["2 stages: 2 Sallen-Key"]


def test_no_mask_no_verdict_markers_but_a_detail_and_the_cutoff_line():
    result = _respond(Requirement(response="highpass", family="butterworth", order=4, cutoff_hz=1000.0))
    g = groups(tree(result.svg()))
    assert texts(g["title-status"]) == ["No mask given: nothing verified"]
    assert texts(g["legend"]) == ["gain", "−3 dB frequency"]
    assert "passband-detail" in g and not [k for k in g if "-worst-" in k]


def test_the_figure_does_not_grow_with_the_grid():
    # the curves are decimated to MAX_DRAWN_POINTS: 10,000 frequencies draw like 2,000
    small = _respond(CHEBY_5, mask=FAILING_MASK, frequencies=FrequencyGrid(10.0, 1e5, 2000, "log")).svg()
    large = _respond(CHEBY_5, mask=FAILING_MASK, frequencies=FrequencyGrid(10.0, 1e5, 10_000, "log")).svg()
    assert MAX_DRAWN_POINTS == 2000 and len(large) < 1.25 * len(small)


def test_same_result_same_bytes(failing):
    assert failing.svg() == failing.svg()
