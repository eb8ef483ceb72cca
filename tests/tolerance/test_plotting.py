"""The tolerance figure: title with the yield and its interval, legend, a marker per mask segment from the
run's own failure counts, and the passband detail of the envelope."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.api.views.designs import EVALUATE_EXAMPLE
from service.config import Settings
from service.response.figure_inputs import in_bands
from service.response.plotting import render_svg
from service.tolerance.plotting import BANDS, tolerance_figure
from service.workflows import DesignDocument, MaskSegment, ToleranceRequest, tolerance
from service.workflows.figures import TOLERANCE_DETAIL_POINTS
from tests.response.figure_svg import groups, marker_points, svg_point, texts, tree

SETTINGS = Settings()
DOC = DesignDocument.from_json(EVALUATE_EXAMPLE)   # 1 kHz Sallen-Key lowpass, 1 % R, 5 % C
#: 0.5 dB to 300 Hz (every board passes) and 40 dB at 10-50 kHz: the nominal's loss at 10 kHz is about
#: 40 dB (a second-order roll-off two decades above 1 kHz), so about half the boards miss it
MASK = (MaskSegment(0.0, 300.0, max_loss_db=0.5), MaskSegment(10e3, 50e3, min_loss_db=40.0))


@pytest.fixture(scope="module")
def run():
    return tolerance(ToleranceRequest(DOC, trials=400, seed=3, mask=MASK, reply="svg"), SETTINGS)


def _axes(fig, gid):
    return next(ax for ax in fig.axes if ax.get_gid() == gid)


def test_title_gives_the_design_and_the_yield_with_its_interval(run):
    g = groups(tree(run.svg()))
    assert texts(g["title"]) == ["Butterworth lowpass, order 2"]
    assert texts(g["title-design"]) == ["1 stage: 1 Sallen-Key · 1 op-amp, GBW 10 MHz"]
    assert texts(g["title-run"]) == ["Monte Carlo: 400 boards, parts Gaussian (tolerance = 3σ), seed 3"]
    y = run.yield_
    assert 0 < y["passed"] < 400
    # source: scipy.stats (reference library), binomtest(...).proportion_ci(method="wilson"): the Wilson score
    # interval (E. B. Wilson, JASA 22 (1927) 209-212)
    ci = stats.binomtest(y["passed"], 400).proportion_ci(0.95, method="wilson")
    assert texts(g["title-yield"]) == [
        f"Yield {100 * y['passed'] / 400:.1f} % (95 % interval {100 * ci.low:.1f}–{100 * ci.high:.1f} %): "
        f"{y['passed']} of 400 boards meet the requirement"]


def test_legend_lists_the_bands_and_the_mask(run):
    legend = texts(groups(tree(run.svg()))["legend"])
    assert legend == [label for _, _, label in BANDS] + [
        "median", "nominal design", "mask: forbidden region", "mask limit", "mask limit, missed",
        "worst point, met", "worst point, missed"]


def test_a_marker_per_segment_from_the_runs_failure_counts(run):
    fig = tolerance_figure(run)
    g = groups(tree(render_svg(fig)))
    ax = _axes(fig, "magnitude")
    rows = {r["segment"]: r for r in run.yield_["failures_by_criterion"]}
    assert rows[0]["failures"] == 0 and rows[1]["failures"] > 0
    # states from the verifier's counts: the passband met by every board, the stopband missed by some
    assert sorted(k for k in g if k.startswith("magnitude-worst-")) == ["magnitude-worst-1-met",
                                                                       "magnitude-worst-2-missed"]
    ref = run.notes["nominal_reference_gain_db"]
    for name, j in (("magnitude-worst-1-met", 0), ("magnitude-worst-2-missed", 1)):
        worst = rows[j]["worst_trial"]
        (x, y), = marker_points(g[name])
        fx = max(worst["frequency_hz"], run.frequency_hz[run.frequency_hz > 0][0])   # a point at DC sits on the edge
        assert (x, y) == pytest.approx(svg_point(fig, ax, fx, ref - worst["loss_db"]), abs=0.01)
    labels = texts(g["magnitude"])
    assert any(t.startswith("all 400 pass, worst +") for t in labels)
    assert any(t.startswith(f"{rows[1]['failures']} of 400 fail, worst −") for t in labels)
    # the worst located trial of the missed segment fails it, where the verifier says
    assert rows[1]["worst_trial"]["margin_db"] < 0 and 10e3 <= rows[1]["worst_trial"]["frequency_hz"] <= 50e3


def test_the_nominal_verdict_places_a_segment_no_trial_was_located_in(run):
    yld = dict(run.yield_)
    yld["failures_by_criterion"] = [dict(r, worst_trial=None) for r in yld["failures_by_criterion"]]
    from dataclasses import replace

    fig = tolerance_figure(replace(run, yield_=yld))
    g = groups(tree(render_svg(fig)))
    seg = run.nominal_verdict.segments[1]
    (x, y), = marker_points(g["magnitude-worst-2-missed"])
    ref = run.notes["nominal_reference_gain_db"]
    assert (x, y) == pytest.approx(svg_point(fig, _axes(fig, "magnitude"), seg.worst_hz, ref - seg.loss_db), abs=0.01)


def test_passband_detail_covers_the_envelope_in_the_passband(run):
    fig = tolerance_figure(run)
    assert "passband-detail" in groups(tree(render_svg(fig)))
    f = run.frequency_hz
    inside = in_bands(f, [(0.0, 300.0)])
    # the figure's run samples the passband densely (the default grid has fewer points there)
    assert inside.sum() >= TOLERANCE_DETAIL_POINTS
    lo, hi = _axes(fig, "passband-detail").get_ylim()
    low, high = run.magnitude_db[0, inside].min(), run.magnitude_db[6, inside].max()
    assert lo <= low and hi >= high and (hi - lo) <= 1.6 * (high - low) + 0.01
    assert np.ptp(_axes(fig, "magnitude").get_ylim()) > 40


def test_without_a_mask_no_yield_and_no_markers():
    doc = DesignDocument.from_json({k: v for k, v in EVALUATE_EXAMPLE.items() if k != "requirement"})
    result = tolerance(ToleranceRequest(doc, trials=100, seed=1, reply="svg"), SETTINGS)
    g = groups(tree(result.svg()))
    assert texts(g["title-yield"]) == ["No requirement or mask: yield not computed"]
    assert "title-requirement" not in g and not [k for k in g if "-worst-" in k]
    assert "passband-detail" in g and "footnote" not in g
