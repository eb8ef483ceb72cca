"""Per-trial figures: the view-based readings give the same numbers as the point-by-point definitions."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation.types import ResponseType
from tests.tolerance.conftest import requirement_criteria
from service.tolerance import figures as fig
from service.tolerance.grids import build_grids

from .conftest import GRID


@pytest.mark.parametrize("response,mask", [
    ("lowpass", requirement_criteria("lowpass", 1000.0, 2500.0, 0.5, 40.0)),
    ("bandstop", requirement_criteria("bandstop", [300.0, 3000.0], [800.0, 1250.0], 1.0, 30.0)),
    ("bandpass", requirement_criteria("bandpass", [850.0, 1150.0], [300.0, 3000.0], 3.0, 15.0)),
])
def test_ripple_and_reference_equal_the_pointwise_definitions(response, mask):
    rt = ResponseType(response)
    grids = build_grids(GRID, rt, mask, [], 0.0, np.zeros(0))
    rng = np.random.default_rng(3)
    g = rng.normal(-20.0, 15.0, (300, grids.metric_hz.size))
    ref = fig.reference_gain(g, grids)
    assert np.array_equal(ref, g[:, grids.passband_columns].max(axis=1))
    gp = g[:, grids.passband_columns]
    assert np.array_equal(fig.ripple(g, grids), gp.max(axis=1) - gp.min(axis=1))


def test_columns_are_views_for_runs_and_masks_otherwise():
    sel = np.zeros(10, dtype=bool)
    sel[3:7] = True
    assert fig.columns(sel) == slice(3, 7)
    sel[9] = True
    assert fig.columns(sel) is sel
    assert fig.columns(np.zeros(4, dtype=bool)).sum() == 0


def test_gain_floor_applies_only_below_it():
    h = np.array([[1.0, 1e-200, 0.0, 10.0]], dtype=complex)
    g = fig.gain_db(h)
    assert np.array_equal(g, 20 * np.log10(np.maximum(np.abs(h), fig.MAGNITUDE_FLOOR)))
    assert g[0, 1] == g[0, 2] == -3000.0
