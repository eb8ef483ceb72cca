"""Part-value sampling: distributions, limits, determinism, temperature, GBW."""

from __future__ import annotations

import json

import numpy as np
import pytest

from service.errors import LimitExceeded
from service.tolerance import InvalidDistribution, InvalidTolerance
from tests.tolerance.conftest import run_tolerance

from .conftest import GRID, with_tolerances

F = np.geomspace(100.0, 1e4, 41)


def _values(result):
    return {ref: np.array([t["values"][ref] for t in result.trials]) for ref in result.trials[0]["values"]}


def _nominal(doc):
    return {c["ref"]: c["value"] for st in doc["stages"] for c in st["components"]}


def test_uniform_values_stay_within_tolerance(butter8_sk):
    r = run_tolerance(butter8_sk, trials=1000, seed=3, distribution="uniform", frequencies_hz=F, include_trials=1000)
    nom = _nominal(butter8_sk)
    tol = {c["ref"]: c["tolerance"] for st in butter8_sk["stages"] for c in st["components"]}
    for ref, v in _values(r).items():
        dev = v / nom[ref] - 1.0
        assert np.all(np.abs(dev) <= tol[ref] * (1 + 1e-12))
        # uniform on [-t, t]: the extremes come within 1 % of the bound in 1000 draws
        assert np.max(np.abs(dev)) > 0.99 * tol[ref]


def test_gaussian_std_is_a_third_of_the_tolerance(butter8_sk):
    # common practice (no source): a tolerance band read as +-3 sigma
    n = 1000
    r = run_tolerance(butter8_sk, trials=n, seed=5, frequencies_hz=F, include_trials=n)
    nom = _nominal(butter8_sk)
    tol = {c["ref"]: c["tolerance"] for st in butter8_sk["stages"] for c in st["components"]}
    for ref, v in _values(r).items():
        s = np.std(v / nom[ref] - 1.0, ddof=1)
        # the sample std of n normal draws has relative spread 1/sqrt(2(n-1)); test at 4 of them
        assert abs(s / (tol[ref] / 3) - 1) < 4 / np.sqrt(2 * (n - 1))


def test_per_kind_distribution(butter8_sk):
    r = run_tolerance(butter8_sk, trials=500, distribution={"resistor": "uniform"}, frequencies_hz=F,
                      include_trials=500)
    assert r.distribution == {"resistor": "uniform", "capacitor": "gaussian", "opamp": "gaussian"}
    v = _values(r)
    assert np.all(np.abs(v["R1"] / 1400.0 - 1) <= 0.01 * (1 + 1e-12))
    assert np.max(np.abs(v["C1"] / 6.8e-8 - 1)) > 0.05   # gaussian capacitors leave the 3-sigma band sometimes


def test_zero_tolerances_give_zero_spread(butter8_sk, lowpass_mask):
    doc = with_tolerances(butter8_sk, resistor=0.0, capacitor=0.0)
    r = run_tolerance(doc, trials=300, frequencies_hz=GRID, mask=lowpass_mask)
    for rows in (r.magnitude_db, r.phase_deg, r.group_delay_s):
        assert np.allclose(rows[0], rows[-1], rtol=1e-6, atol=1e-9)
    assert np.allclose(r.magnitude_db[3], r.nominal_magnitude_db, atol=1e-5)  # float32 store
    m = r.metrics
    assert m["f3db_hz"]["std"] <= 1e-12 * m["f3db_hz"]["mean"]
    assert m["f3db_hz"]["max"] - m["f3db_hz"]["min"] <= 1e-9 * m["f3db_hz"]["mean"]
    assert all(s["f0_hz"]["std"] <= 1e-12 * s["f0_hz"]["mean"] and s["q"]["std"] <= 1e-12 for s in m["stages"])
    assert r.yield_["fraction"] in (0.0, 1.0)


def test_same_seed_same_numbers_other_seed_other_numbers(butter8_sk, lowpass_mask):
    kw = dict(trials=400, frequencies_hz=F, mask=lowpass_mask, include_trials=3)
    a = json.dumps(run_tolerance(butter8_sk, seed=11, **kw).as_dict(), sort_keys=True)
    b = json.dumps(run_tolerance(butter8_sk, seed=11, **kw).as_dict(), sort_keys=True)
    c = json.dumps(run_tolerance(butter8_sk, seed=12, **kw).as_dict(), sort_keys=True)
    assert a == b
    assert a != c


def test_trials_limit(butter8_sk):
    with pytest.raises(LimitExceeded) as exc:
        run_tolerance(butter8_sk, trials=101, max_trials=100, frequencies_hz=F)
    assert exc.value.limit == "max_trials" and exc.value.setting == "ROLLOFF_MAX_TRIALS"
    assert exc.value.value == 100 and exc.value.field == "trials"


@pytest.mark.parametrize("kw, field", [
    (dict(distribution="lognormal"), "distribution"),
    (dict(distribution={"inductor": "uniform"}), "distribution.inductor"),
    (dict(trials=0), "trials"),
    (dict(seed=-1), "seed"),
    (dict(temperature={"min_c": 85, "max_c": -40}), "temperature.min_c"),
    (dict(tempco_ppm_per_c={"Q7": 10}), "tempco_ppm_per_c.Q7"),
    (dict(gbw_spread=0.3), "gbw_spread"),          # the design's op-amps are ideal
    (dict(include_trials=10, trials=5), "include_trials"),
])
def test_invalid_requests_name_the_field(butter8_sk, kw, field):
    args = dict(trials=10, frequencies_hz=F)
    args.update(kw)
    with pytest.raises(ValueError) as exc:
        run_tolerance(butter8_sk, **args)
    assert exc.value.field == field
    if "distribution" in field:
        assert isinstance(exc.value, InvalidDistribution)
    elif field in ("temperature.min_c", "gbw_spread"):
        assert isinstance(exc.value, InvalidTolerance)


def test_temperature_drift_within_the_coefficient_bounds(butter8_sk):
    doc = with_tolerances(butter8_sk, resistor=0.0, capacitor=0.0)
    r = run_tolerance(doc, trials=1000, seed=1, frequencies_hz=F, temperature={"min_c": -40, "max_c": 85},
                      tempco_ppm_per_c={"C3": 1500.0}, include_trials=1000)
    v = _values(r)
    t = np.array([x["temperature_c"] for x in r.trials])
    assert t.min() >= -40 and t.max() <= 85 and t.max() - t.min() > 120
    nom = _nominal(doc)
    dt = np.abs(t - 25.0)
    for ref, bound in (("R1", 25e-6), ("C1", 30e-6), ("C3", 1500e-6)):   # thin film, C0G default, override
        dev = np.abs(v[ref] / nom[ref] - 1.0)
        assert np.all(dev <= bound * dt * (1 + 1e-9))
        assert np.max(dev / np.maximum(dt, 1e-9)) > 0.9 * bound
    assert r.temperature == {"min_c": -40.0, "max_c": 85.0}


def test_gbw_spread_varies_given_opamps(butter8_sk):
    import copy
    doc = copy.deepcopy(butter8_sk)
    for st in doc["stages"]:
        for u in st["opamps"]:
            u["gbw_hz"] = 1e6
    r = run_tolerance(doc, trials=1000, distribution={"opamp": "uniform"}, gbw_spread=0.3, frequencies_hz=F,
                      include_trials=1000)
    g = np.array([t["values"]["U1.gbw_hz"] for t in r.trials])
    assert g.min() >= 0.7e6 * (1 - 1e-12) and g.max() <= 1.3e6 * (1 + 1e-12)
    assert g.max() - g.min() > 0.55e6
