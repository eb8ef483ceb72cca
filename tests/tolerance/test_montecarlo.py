"""Monte Carlo figures: chunk independence, first-order propagation, yield, delay, reply shape."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from tests.tolerance.conftest import requirement_criteria, run_tolerance
from service.tolerance import wilson_interval
from service.tolerance.montecarlo import tile_trials

from .conftest import GRID, with_tolerances


def _dump(r):
    return json.dumps(r.as_dict(), sort_keys=True, allow_nan=False)


def test_chunk_size_does_not_change_a_bit(butter8_sk, lowpass_mask):
    trials = 2 * tile_trials(1024) + 123           # not a whole number of default chunks
    kw = dict(trials=trials, seed=7, frequencies_hz=GRID, mask=lowpass_mask, include_trials=5)
    ref = run_tolerance(butter8_sk, **kw)
    # chunks of any size, aligned or not with the engine's internal blocks, and a memory limit that caps them
    for chunk, limit in ((1, 64 * 2**20), (100, 64 * 2**20), (777, 64 * 2**20), (trials, 64 * 2**20),
                         (trials, 4 * 2**20)):
        other = run_tolerance(butter8_sk, chunk_trials=chunk, memory_limit_bytes=limit, **kw)
        assert _dump(other) == _dump(ref)
        for a, b in zip((ref.magnitude_db, ref.phase_deg, ref.group_delay_s),
                        (other.magnitude_db, other.phase_deg, other.group_delay_s)):
            assert np.array_equal(a, b)


def test_frequency_blocks_chunking_does_not_change_a_bit(butter8_sk, lowpass_mask):
    # a small store budget splits the grid into frequency blocks; chunking inside is still free
    kw = dict(trials=1500, seed=2, frequencies_hz=GRID, mask=lowpass_mask, store_budget_bytes=4 * 2**20)
    a = run_tolerance(butter8_sk, **kw)
    b = run_tolerance(butter8_sk, chunk_trials=1500, **kw)
    assert a.notes["frequency_blocks"] > 1
    assert _dump(a) == _dump(b)
    # and the blocked sweep agrees with the single sweep to rounding
    c = run_tolerance(butter8_sk, trials=1500, seed=2, frequencies_hz=GRID, mask=lowpass_mask)
    assert c.notes["frequency_blocks"] == 1
    assert np.allclose(a.magnitude_db, c.magnitude_db, atol=1e-4)
    assert np.allclose(a.phase_deg, c.phase_deg, atol=1e-3)
    assert np.allclose(a.group_delay_s, c.group_delay_s, rtol=1e-5, atol=1e-12)
    assert a.yield_["passed"] == c.yield_["passed"]
    assert [x["failures"] for x in a.yield_["failures_by_criterion"]] == \
        [x["failures"] for x in c.yield_["failures_by_criterion"]]


def test_single_rc_f0_spread_matches_first_order_propagation(rc1):
    # source: first-order (linear) propagation of independent relative errors, f0 = 1/(2 pi R C):
    # sigma_f0/f0 = sqrt(sigma_R^2 + sigma_C^2) (e.g. J. R. Taylor, An Introduction to Error Analysis,
    # 2nd ed., 1997, sec. 3.8) (from memory)
    n = 20000
    doc = with_tolerances(rc1, resistor=0.03, capacitor=0.06)
    r = run_tolerance(doc, trials=n, seed=4, frequencies_hz=np.geomspace(10, 1e5, 201))
    expected = math.hypot(0.03 / 3, 0.06 / 3)
    st = r.metrics["stages"][0]["f0_hz"]
    f3 = r.metrics["f3db_hz"]
    # the sample std has relative standard error 1/sqrt(2(n-1)) (0.5 % here): test at 4 standard errors,
    # plus the second-order term of the propagation (~sigma^2 = 5e-4 relative)
    bound = 4 / math.sqrt(2 * (n - 1)) + 5e-4
    assert abs(st["std"] / st["mean"] / expected - 1) < bound
    # the buffered RC's 3 dB frequency is its f0: the same spread from the circuit engine
    assert abs(f3["std"] / f3["mean"] / expected - 1) < bound


def test_single_rc_group_delay_and_phase_match_the_closed_form(rc1):
    # source: first-order lowpass H = 1/(1 + s tau): phase = -atan(w tau), delay = tau/(1 + (w tau)^2)
    # (A. B. Williams, F. J. Taylor, Electronic Filter Design Handbook, 4th ed., 2006, sec. 2.3) (from memory)
    doc = with_tolerances(rc1, resistor=0.0, capacitor=0.0)
    comps = {c["ref"]: c["value"] for c in doc["stages"][0]["components"]}
    tau = comps["R1"] * comps["C1"]
    f = np.geomspace(10, 1e5, 201)
    r = run_tolerance(doc, trials=20, frequencies_hz=f)
    wt = 2 * np.pi * f * tau
    assert np.allclose(r.group_delay_s[3], tau / (1 + wt ** 2), rtol=2e-5)
    assert np.allclose(r.phase_deg[3], -np.degrees(np.arctan(wt)), atol=1e-4)
    assert np.allclose(r.magnitude_db[3], -10 * np.log10(1 + wt ** 2), atol=1e-5)


def test_ample_margin_gives_full_yield_and_the_wilson_bound(butter8_sk):
    # source: E. B. Wilson, "Probable inference, the law of succession, and statistical inference",
    # JASA 22 (1927) 209-212: for n successes of n the lower bound is n/(n + z^2)
    mask = requirement_criteria("lowpass", 300.0, 4000.0, 3.0, 20.0)
    n = 2000
    r = run_tolerance(butter8_sk, trials=n, frequencies_hz=GRID, mask=mask)
    y = r.yield_
    z = 1.959963984540054
    assert y["fraction"] == 1.0 and y["passed"] == n and y["trials"] == n
    assert y["ci95_low"] == pytest.approx(n / (n + z * z), rel=1e-12)
    assert y["ci95_high"] == 1.0
    assert all(c["failures"] == 0 for c in y["failures_by_criterion"])


def test_wilson_interval_against_the_closed_form():
    # source: E. B. Wilson, JASA 22 (1927) 209-212, the score interval (p + z^2/2n +- z sqrt(...))/(1 + z^2/n)
    lo, hi = wilson_interval(81, 263)
    p, n, z = 81 / 263, 263, 1.959963984540054
    c = (p + z * z / (2 * n)) / (1 + z * z / n)
    h = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    assert (lo, hi) == pytest.approx((c - h, c + h), rel=1e-12)
    assert wilson_interval(0, 10)[0] == 0.0 and wilson_interval(10, 10)[1] == 1.0


def test_failures_by_criterion_counts_the_failing_segment(butter8_sk):
    # a stopband bound the design meets only about half the time at the edge: failures all there
    nominal = run_tolerance(butter8_sk, trials=1, frequencies_hz=GRID,
                            mask=requirement_criteria("lowpass", 300.0, 2000.0, 3.0, 20.0))
    edge_loss = [w for w in nominal.worst_case if w["band"] == "stopband"][0]["nominal_loss_db"]
    mask = requirement_criteria("lowpass", 300.0, 2000.0, 3.0, edge_loss)
    r = run_tolerance(butter8_sk, trials=2000, frequencies_hz=GRID, mask=mask)
    fails = r.yield_["failures_by_criterion"]
    assert fails[0]["band"] == "stopband" and fails[0]["start_hz"] == 2000.0
    assert 0.3 < fails[0]["failures"] / 2000 < 0.7
    assert fails[1]["failures"] == 0
    assert r.yield_["fraction"] == pytest.approx(1 - fails[0]["failures"] / 2000)
    lo, hi = r.yield_["ci95_low"], r.yield_["ci95_high"]
    assert lo < r.yield_["fraction"] < hi


def test_included_trials_are_consistent_with_the_summary(butter8_sk, lowpass_mask):
    r = run_tolerance(butter8_sk, trials=50, frequencies_hz=GRID, mask=lowpass_mask, include_trials=50)
    f3 = np.array([t["f3db_hz"] for t in r.trials])
    assert np.min(f3) == pytest.approx(r.metrics["f3db_hz"]["min"], rel=1e-15)
    assert np.max(f3) == pytest.approx(r.metrics["f3db_hz"]["max"], rel=1e-15)
    assert sum(t["passes"] for t in r.trials) == r.yield_["passed"]
    for t in r.trials:
        assert t["passes"] == all(m >= -1e-6 for m in t["margins_db"])


def test_reply_fields_table_and_svg(butter8_sk, lowpass_mask):
    r = run_tolerance(butter8_sk, trials=200, frequencies_hz=GRID, mask=lowpass_mask, include_trials=2)
    _dump(r)                                               # plain JSON, no NaN
    d = r.as_dict()
    for key in ("frequency_hz", "magnitude_db_percentiles", "phase_deg_percentiles", "group_delay_s_percentiles",
                "metrics", "yield", "sensitivity", "worst_case", "trials", "distribution", "seed", "temperature"):
        assert key in d
    names = ["min", "p0.135", "p2.5", "p50", "p97.5", "p99.865", "max"]
    for key in ("magnitude_db_percentiles", "phase_deg_percentiles", "group_delay_s_percentiles"):
        assert list(d[key]) == names
        rows = np.array([d[key][n] for n in names])
        assert rows.shape == (7, GRID.size)
        assert np.all(np.diff(rows, axis=0) >= 0)          # percentiles are ordered
    assert set(d["metrics"]) >= {"f3db_hz", "passband_ripple_db", "attenuation_db", "stages"}
    assert list(d["metrics"]["attenuation_db"]) == [repr(10 ** 3.4)]
    assert len(d["metrics"]["stages"]) == 4 and set(d["metrics"]["stages"][0]) == {"f0_hz", "q"}
    assert set(d["yield"]) >= {"fraction", "ci95_low", "ci95_high", "trials", "failures_by_criterion"}
    t = r.table()
    assert list(t)[:2] == ["frequency_hz", "nominal_magnitude_db"]
    assert len(t) == 2 + 3 * 7 and all(v.shape == (GRID.size,) for v in t.values())
    assert np.array_equal(t["magnitude_db_p50"], r.magnitude_db[3])
    svg = r.svg()
    assert svg.lstrip().startswith(b"<?xml") and b"<svg" in svg


def test_band_responses_report_both_3db_frequencies():
    from service.approximation import design_by_order
    from service.realization import design_filter
    from service.workflows import outcome_of
    doc = outcome_of(design_filter(design_by_order("bandpass", "butterworth", 2, [800.0, 1250.0]))).as_dict()
    mask = requirement_criteria("bandpass", [850.0, 1150.0], [300.0, 3000.0], 3.0, 15.0)
    r = run_tolerance(doc, trials=300, frequencies_hz=np.geomspace(100, 1e4, 301), mask=mask)
    m = r.metrics
    assert "f3db_hz" not in m
    assert m["f3db_low_hz"]["mean"] == pytest.approx(800.0, rel=0.02)
    assert m["f3db_high_hz"]["mean"] == pytest.approx(1250.0, rel=0.02)
    assert list(m["attenuation_db"]) == ["300.0", "3000.0"]


def test_phase_percentiles_match_numpy_on_float64_angles(butter8_sk, monkeypatch):
    """The phase percentiles (float32 store, relative to the nominal) against numpy.percentile of the
    float64 angles ``arg(H conj H_nominal) + unwrapped nominal phase`` of the same trials' complex responses
    (the engine's ``response``, complex division): within 1e-5 degrees (float32 holds the relative phase to
    about 1e-7 rad)."""
    import service.tolerance.montecarlo as mc
    from service.tolerance.statistics import PERCENTILES
    seen = {}
    prepare, sweep = mc.prepare_ac, mc.monte_carlo

    def keep_engine(*a, **k):
        seen["engine"] = prepare(*a, **k)
        return seen["engine"]

    def keep_nominal(circuit, samples, trials, grids, nominal, unwrapped, **k):
        seen.update(nominal=nominal, unwrapped=unwrapped, grid=grids.frequency_hz)
        return sweep(circuit, samples, trials, grids, nominal, unwrapped, **k)
    monkeypatch.setattr(mc, "prepare_ac", keep_engine)
    monkeypatch.setattr("service.tolerance.run.monte_carlo", keep_nominal)
    r = run_tolerance(butter8_sk, trials=1500, seed=3, frequencies_hz=GRID)
    h = seen["engine"].on_grid(seen["grid"]).response()
    angles = np.degrees(np.angle(h * np.conj(seen["nominal"])) + seen["unwrapped"])
    want = np.stack([np.percentile(angles, p, axis=0) for _, p in PERCENTILES])
    assert np.max(np.abs(r.phase_deg - want)) < 1e-5
