"""Parts policies and the vectorized value search."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from service.approximation import Section, SectionKind, design_by_order
from service.components import series_values_in_range
from service.realization import KindPolicy, PartsPolicy, StockPart, TOPOLOGIES, design_filter
from service.realization.parts import resolve_kind
from service.realization.selection import select_values
from tests.realization.spice_checks import one_section

LP = Section(SectionKind.LOWPASS, 2, 1234.0, 0.8, None, 1.0)


def test_defaults():
    r = resolve_kind(PartsPolicy(), "resistor")
    c = resolve_kind(PartsPolicy(), "capacitor")
    assert r.series == "E96" and r.values[0] == 1e3 and r.values[-1] == 1e6
    assert c.series == "E12" and c.values[0] == pytest.approx(100e-12) and c.values[-1] == pytest.approx(10e-6)
    assert set(c.dielectric) == {"C0G"}
    np.testing.assert_allclose(c.values, series_values_in_range("E12", 100e-12, 10e-6))


def test_stock_list_replaces_series_and_carries_part_id():
    stock = [StockPart(value=v, tolerance=0.02, dielectric="C0G", part_id=f"CAP-{i}")
             for i, v in enumerate([1e-9, 2.2e-9, 4.7e-9, 10e-9, 22e-9, 47e-9, 100e-9])]
    policy = PartsPolicy(capacitors=KindPolicy(stock=tuple(stock)))
    d = design_filter(one_section(LP), parts=policy)
    caps = [row for row in d.bom if row["kind"] == "capacitor"]
    assert caps and all(row["part_id"].startswith("CAP-") for row in caps)
    assert all(row["value"] in {p.value for p in stock} for row in caps)
    assert all(row["tolerance"] == 0.02 for row in caps)
    assert all(row["part_id"] is None for row in d.bom if row["kind"] == "resistor")


def test_stock_from_plain_dicts():
    parts = {"capacitors": {"stock": [{"value": 10e-9, "tolerance": 0.05, "part_id": "A"},
                                      {"value": 4.7e-9, "tolerance": 0.05, "part_id": "B"},
                                      {"value": 22e-9, "tolerance": 0.05, "part_id": "C"}]}}
    d = design_filter(one_section(LP), parts=parts)
    assert {row["part_id"] for row in d.bom if row["kind"] == "capacitor"} <= {"A", "B", "C"}


def _brute_force(topology, section, strategy, caps, rvals):
    """Plain loops over every capacitor pair: the best worst-of f0/Q error (resistors in range)."""
    best = np.inf
    for c1, c2 in itertools.product(caps, caps):
        ideal = topology.design(section, strategy, {"C1": np.array([c1]), "C2": np.array([c2])})
        vals = {}
        ok = True
        for role, v in ideal.items():
            v = float(v[0])
            if not np.isfinite(v):
                ok = False
                break
            if role.startswith("R"):
                if v < rvals[0] / 1.013 or v > rvals[-1] * 1.013:
                    ok = False
                    break
                v = float(rvals[np.argmin(np.abs(np.log(rvals / v)))])
            vals[role] = np.array([v])
        if not ok:
            continue
        a = topology.achieved(section, strategy, vals)
        err = max(abs(a["f0_hz"][0] / section.f0_hz - 1), abs(a["q"][0] / section.q - 1))
        best = min(best, err)
    return best


def test_search_finds_the_best_candidate():
    sk = TOPOLOGIES["sallen_key"]
    policy = PartsPolicy(capacitors=KindPolicy(series="E6", min_value=1e-9, max_value=100e-9))
    allowed = {k: resolve_kind(policy, k) for k in ("resistor", "capacitor")}
    sel = select_values(sk, LP, "unity_gain", allowed)
    best = _brute_force(sk, LP, "unity_gain", allowed["capacitor"].values, allowed["resistor"].values)
    err = max(abs(sel.predicted["f0_hz"] / LP.f0_hz - 1), abs(sel.predicted["q"] / LP.q - 1))
    # the score adds a small impedance tie-break, so allow a hair above the optimum
    assert err <= best + 2e-3
    assert all(allowed["resistor"].low <= sel.values[r] <= allowed["resistor"].high for r in ("R1", "R2"))


def test_exact_keeps_unsnapped_values():
    d = design_filter(one_section(LP), exact=True)
    st = d.stages[0]
    for c in st.components:
        assert c.value == c.ideal
    assert abs(st.achieved["f0_error"]) < 1e-9 and abs(st.achieved["q_error"]) < 1e-9


def test_impedance_preference_moves_resistors():
    low = design_filter(one_section(LP), impedance_ohm=2e3)
    high = design_filter(one_section(LP), impedance_ohm=200e3)

    def level(d):
        rs = [c.value for c in d.stages[0].components if c.kind == "resistor"]
        return float(np.exp(np.mean(np.log(rs))))

    assert level(low) < 10e3 < level(high)


def test_snapped_values_are_series_values_within_range():
    approx = design_by_order("lowpass", "chebyshev1", 6, 2000.0, passband_ripple_db=0.5)
    d = design_filter(approx, parts={"resistors": {"series": "E24", "min_value": 2e3, "max_value": 200e3}})
    e24 = series_values_in_range("E24", 2e3, 200e3)
    for st in d.stages:
        for c in st.components:
            if c.kind == "resistor":
                assert np.min(np.abs(e24 / c.value - 1)) < 1e-9
                assert 2e3 <= c.value <= 200e3
    assert not any(w.code == "part_out_of_range" for w in d.warnings)


def test_part_outside_range_is_reported():
    # A 1 Hz section with capacitors capped at 10 nF needs resistors far above 1 Mohm.
    sec = Section(SectionKind.LOWPASS, 2, 1.0, 0.7, None, 1.0)
    d = design_filter(one_section(sec), parts={"capacitors": {"max_value": 10e-9}})
    assert any(w.code == "part_out_of_range" for w in d.warnings)
    assert any(not c.in_range for c in d.stages[0].components)


def test_one_second_order_name_for_an_odd_order_design_realizes_the_first_order_section():
    # an odd order has a first-order section: a single second-order name does not apply to it, the
    # automatic first-order choice does
    approx = design_by_order("lowpass", "butterworth", 5, 1000.0)
    d = design_filter(approx, topology="sallen_key")
    orders = sorted((s.section.order, s.topology) for s in d.stages)
    assert orders[0][0] == 1 and orders[0][1] in ("rc_first_order", "noninverting_first_order",
                                                  "inverting_first_order")
    assert all(t == "sallen_key" for o, t in orders if o == 2)
    d = design_filter(approx, topology="sallen_key", strategy="unity_gain")
    assert all(s.strategy == "unity_gain" for s in d.stages if s.section.order == 2)


def test_a_listed_second_order_topology_for_a_first_order_section_names_the_entry():
    from service.realization import RealizationError

    approx = design_by_order("lowpass", "butterworth", 3, 1000.0)
    names = ["sallen_key" if s.order == 2 else "tow_thomas" for s in approx.sections]
    i = next(k for k, s in enumerate(approx.sections) if s.order == 1)
    with pytest.raises(RealizationError) as info:
        design_filter(approx, topology=names)
    # field paths count array entries from 0; messages number sections from 1
    assert info.value.field == f"topology[{i}]"
    assert f"section {i + 1} is of order 1" in str(info.value)
