"""The dynamic-range section order: the estimate's search, and the realized circuits' dynamic range."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from service.approximation import design_by_order
from service.realization import design_filter
from service.realization.cascade import (analysis_grid, distribute_gains, dynamic_range_order, order_figure,
                                         order_sections, section_shapes)
from service.realization.errors import RealizationError
from service.realization.supply import filter_circuit
from service.response.headroom import analyze_headroom
from service.response.noise import analyze_noise

OPAMP = {"gbw_hz": 10e6, "en_nv_rthz": 10.0, "in_pa_rthz": 0.5, "output_swing_v": 10.0}


def _figure_fn(sections, freedoms):
    grid = analysis_grid(sections)
    shapes = section_shapes(sections, grid)
    total = float(np.prod([s.gain for s in sections]))
    w = np.zeros_like(grid)
    d = np.diff(np.log(grid)) / 2
    w[:-1] += d * grid[:-1]
    w[1:] += d * grid[1:]
    return lambda order: order_figure(shapes[list(order)], [sections[i] for i in order],
                                      [freedoms[i] for i in order], total, 1.0, w)


def test_exhaustive_search_finds_the_best_estimate():
    secs = list(design_by_order("lowpass", "chebyshev1", 9, 1000.0, passband_ripple_db=1.0).sections)
    assert len(secs) == 5
    free = [("free", 1.0)] * len(secs)
    fig = _figure_fn(secs, free)
    order, best = dynamic_range_order(secs, free)
    assert best == pytest.approx(max(fig(p) for p in itertools.permutations(range(len(secs)))))
    assert fig(order) == pytest.approx(best)


def test_neighbour_search_beyond_the_exhaustive_size():
    secs = list(design_by_order("lowpass", "chebyshev1", 16, 1000.0, passband_ripple_db=0.5).sections)
    assert len(secs) == 8
    fixed = [("fixed", s.gain) for s in secs]
    fig = _figure_fn(secs, fixed)
    order, best = dynamic_range_order(secs, fixed)
    assert sorted(order) == list(range(8))
    assert best >= fig(order_sections(secs, "ascending_q")) - 1e-9
    for k in range(7):   # a local optimum: no neighbour swap improves it
        swapped = order[:k] + [order[k + 1], order[k]] + order[k + 2:]
        assert fig(swapped) <= best + 1e-9


def test_gains_are_those_of_the_distribution():
    secs = list(design_by_order("lowpass", "butterworth", 6, 1000.0).sections)
    free = [("free", 1.0)] * 3
    gains, _ = distribute_gains(secs, free, 1.0, 1.0)
    assert math.prod(gains) == pytest.approx(1.0)


def _dynamic_range(d) -> float:
    fc = filter_circuit(d)
    grid = analysis_grid([s.section for s in d.stages])
    h = analyze_headroom(fc.circuit, grid, limits=fc.output_limits, stage_of=fc.opamp_stage, input_peak_v=1.0)
    n = analyze_noise(fc.circuit, grid, (grid[0], grid[-1]), stage_of=fc.stage_of, max_output_v=h.max_output_v)
    return n.dynamic_range_db


@pytest.mark.parametrize(("family", "kwargs"), [("butterworth", {}), ("chebyshev1", {"passband_ripple_db": 1.0}),
                                                ("elliptic", {"passband_ripple_db": 0.5,
                                                              "stopband_attenuation_db": 60.0})])
def test_realized_dynamic_range_is_at_least_that_of_the_q_orders(family, kwargs):
    # checked against the realized circuits' own noise and headroom analyses (measured, not estimated)
    a = design_by_order("lowpass", family, 6, 1000.0, **kwargs)
    dr = {o: _dynamic_range(design_filter(a, opamp=OPAMP, section_order=o))
          for o in ("ascending_q", "descending_q", "max_dynamic_range")}
    assert dr["max_dynamic_range"] >= max(dr["ascending_q"], dr["descending_q"]) - 0.1, dr


def test_unknown_order_and_bad_freedoms():
    secs = list(design_by_order("lowpass", "butterworth", 4, 1000.0).sections)
    with pytest.raises(RealizationError) as err:
        order_sections(secs, "loudest_first")
    assert err.value.field == "section_order"
    with pytest.raises(RealizationError):
        dynamic_range_order(secs, [("free", 1.0)])
    assert order_sections(secs[:1], "max_dynamic_range") == [0]
