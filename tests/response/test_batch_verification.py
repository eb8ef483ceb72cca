"""The batch path of the verifier (perturbation bounds near a nominal) gives the verdicts of the full search."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation import design_by_requirement
from service.realization import design_filter, design_roots
from service.response.verification import BATCH_MIN_TRIALS, verify
from service.workflows import Requirement

CASES = {
    # requirement fields, parts: a design near its limits so that trials fall on both sides
    "elliptic_lowpass": (("lowpass", "elliptic", 1000.0, 1500.0, 0.5, 40.0), None),
    "chebyshev_highpass": (("highpass", "chebyshev1", 1000.0, 400.0, 0.5, 40.0), {"gbw_hz": 1e6}),
    "butterworth_bandpass": (("bandpass", "butterworth", (900.0, 1100.0), (500.0, 2000.0), 1.0, 25.0), None),
    "chebyshev2_bandstop": (("bandstop", "chebyshev2", (300.0, 3000.0), (800.0, 1200.0), 1.0, 20.0), None),
}


def _trials(plans, n, spread, seed):
    rng = np.random.default_rng(seed)
    values = {}
    for p in plans:
        for c in p.components:
            values[c.ref] = c.value * (1 + spread * rng.standard_normal(n))
    return values


@pytest.mark.parametrize("name", sorted(CASES))
def test_batch_verdicts_equal_the_full_search(name):
    (response, family, pb, sb, rip, att), opamp = CASES[name]
    req = Requirement(response=response, family=family, passband_hz=pb, stopband_hz=sb, passband_ripple_db=rip,
                      stopband_attenuation_db=att)
    plans = design_filter(design_by_requirement(response, family, pb, sb, rip * 0.75, att + 1), opamp=opamp).plans
    criteria = req.criteria(finite_opamps=opamp is not None)
    n = 200
    roots = design_roots(plans, _trials(plans, n, 0.004, seed=hash(name) % 1000))
    assert n >= BATCH_MIN_TRIALS
    batch = verify(roots, criteria, nominal=design_roots(plans), precision_db=1e-3)
    full = verify(roots, criteria, precision_db=1e-3)
    np.testing.assert_array_equal(batch.meets(), full.meets())
    assert 0 < full.meets().sum() <= n
    np.testing.assert_array_equal(batch.segment_met(), full.segment_met())
    # where the batch path located a margin it is the full search's, to the precision asked
    located = batch.located & np.isfinite(full.margin_db)
    np.testing.assert_allclose(batch.margin_db[located], full.margin_db[located], atol=2e-3)
    # elsewhere it is a proved lower bound
    assert np.all(batch.margin_db[~located & batch.stable[:, None]] <= full.margin_db[~located & batch.stable[:, None]]
                  + 1e-9)


def test_rounding_level_imaginary_parts_start_no_search_decades_below_the_roots():
    # A real pole found with an imaginary part at rounding level (1e-9 rad/s on a 6.3e4 rad/s pole) marks no
    # frequency: the passband search starts DC_DECADES below the roots either way, and the verdict is the same.
    # source: scipy.signal.buttap (reference library) for the 5th-order Butterworth poles
    from scipy import signal

    from service.response.search import DC_DECADES, _critical, _segment_points
    from service.circuit.roots import RootSet

    _, p, _ = signal.buttap(5)
    w0 = 2 * np.pi * 1e4
    poles = p * w0
    noisy = poles + 1e-9j * (np.abs(poles.imag) < 1e-6)
    for ps in (poles, noisy):
        crit = _critical(RootSet.from_zpk([], ps, w0 ** 5))
        assert crit.min() >= 0.3 * w0
        pts = _segment_points(0.0, w0, crit)
        assert pts[1] >= 0.99 * crit.min() * 10 ** -DC_DECADES and pts.size < 60
