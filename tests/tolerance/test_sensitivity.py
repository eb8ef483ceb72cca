"""Sensitivities (identities, analytic cross-check, ranking) and worst-case corners."""

from __future__ import annotations

import numpy as np
import pytest

from tests.tolerance.conftest import plans_of
from tests.tolerance.conftest import requirement_criteria, run_tolerance
from service.tolerance.sampling import resolve_distribution, varied_parts
from service.tolerance.sensitivity import stage_sensitivity

from .conftest import GRID, PASSBAND_EDGE_HZ

TOPOLOGY_CASES = ["sallen_key_lowpass", "sallen_key_highpass", "multiple_feedback", "state_variable", "tow_thomas"]


@pytest.mark.parametrize("name", TOPOLOGY_CASES)
def test_sum_identities_of_active_rc_stages(designs, name):
    # source: R. Schaumann, M. E. Van Valkenburg, Design of Analog Filters, Oxford UP, 2001, sec. 3.1:
    # with ideal op-amps f0 scales as 1/R and 1/C, Q is dimensionless, so
    # sum_R S^f0_R = -1, sum_C S^f0_C = -1, sum_R S^Q_R = 0, sum_C S^Q_C = 0 (from memory)
    doc = designs[name]
    plans = plans_of(doc)
    parts = varied_parts(plans, (), resolve_distribution("gaussian"))
    s = stage_sensitivity(plans, parts)
    for k, plan in enumerate(plans):
        for kind in ("resistor", "capacitor"):
            refs = [p.ref for p in parts if p.stage == k and p.kind == kind]
            assert sum(s[r][0] for r in refs) == pytest.approx(-1.0, abs=1e-6)
            if plan.section.order == 2:
                assert sum(s[r][1] for r in refs) == pytest.approx(0.0, abs=1e-6)


@pytest.mark.parametrize("name", TOPOLOGY_CASES)
def test_engine_sensitivities_match_the_closed_form(designs, name):
    # the circuit engine's central differences against the topology's complex-step derivative
    # of its own design equations (two independent routes to the same numbers)
    doc = designs[name]
    plans = plans_of(doc)
    parts = varied_parts(plans, (), resolve_distribution("gaussian"))
    s = stage_sensitivity(plans, parts)
    for plan in plans:
        analytic = plan.topology.sensitivities(plan.section, plan.strategy, plan.values)
        for c in plan.components:
            sf, sq = analytic[c.role]
            assert s[c.ref][0] == pytest.approx(sf, abs=1e-6)
            assert s[c.ref][1] == pytest.approx(sq, abs=1e-6)


def test_sallen_key_unity_gain_published_values(designs):
    # source: Schaumann & Van Valkenburg, Design of Analog Filters, 2001, sec. 3.1 / Huelsman, Active and
    # Passive Analog Filter Design, 1993, ch. 5: unity-gain Sallen-Key lowpass S^f0 = -1/2 for each R and C,
    # S^Q_C1 = +1/2 (feedback C), S^Q_C2 = -1/2 (from memory)
    doc = designs["sallen_key_lowpass"]
    r = run_tolerance(doc, trials=10, frequencies_hz=GRID)
    rows = {x["ref"]: x for x in r.sensitivity}
    plans = plans_of(doc)
    for c in plans[0].components:
        assert rows[c.ref]["f0"] == pytest.approx(-0.5, abs=1e-6)
    by_role = {c.role: c.ref for c in plans[0].components}
    assert rows[by_role["C1"]]["q"] == pytest.approx(0.5, abs=1e-6)
    assert rows[by_role["C2"]]["q"] == pytest.approx(-0.5, abs=1e-6)


def test_magnitude_sensitivity_ranking_and_units(butter8_sk, lowpass_mask):
    r = run_tolerance(butter8_sk, trials=10, frequencies_hz=GRID, mask=lowpass_mask)
    rows = r.sensitivity
    assert len(rows) == 16
    keys = [repr(PASSBAND_EDGE_HZ), repr(10 ** 3.4)]
    assert all(list(x["magnitude_db_per_pct"]) == keys for x in rows)
    contrib = [x["contribution_db"] for x in rows]
    # largest first, to the sensitivities' accuracy (equal ones within 1e-6 are listed by stage, then ref)
    assert all(b <= a * (1 + 1e-6) for a, b in zip(contrib, contrib[1:]))
    # scaling every R by (1 + e) and every C by (1 - e) leaves the response unchanged: the magnitude
    # sensitivities of all R sum to those of all C at every frequency (same dimensional argument)
    for k in keys:
        sr = sum(x["magnitude_db_per_pct"][k] for x in rows if x["kind"] == "resistor")
        sc = sum(x["magnitude_db_per_pct"][k] for x in rows if x["kind"] == "capacitor")
        assert sr == pytest.approx(sc, abs=1e-6)
        assert abs(sr) > 1e-3


def test_worst_case_bounds_the_uniform_monte_carlo(butter8_sk):
    # extreme-value analysis: for small tolerances the response is nearly linear in the parts, so the
    # sign corners bound every trial drawn uniformly inside the tolerance box
    # (Schaumann & Van Valkenburg, sec. 3.5, worst-case analysis) (from memory); the corners are taken at the
    # requirement's edges, here the 3 dB point of the 1 kHz Butterworth and 10^3.4 Hz
    mask = requirement_criteria("lowpass", 1000.0, 10 ** 3.4, 3.0, 40.0)
    r = run_tolerance(butter8_sk, trials=3000, seed=9, distribution="uniform", frequencies_hz=GRID, mask=mask)
    wc = r.worst_case
    assert [(w["frequency_hz"], w["direction"]) for w in wc] == [
        (1000.0, "max_loss"), (1000.0, "min_loss"), (10 ** 3.4, "max_loss"), (10 ** 3.4, "min_loss")]
    sens = {x["ref"]: x for x in r.sensitivity}
    for w in wc:
        assert set(w["corner"]) == set(sens) and set(w["corner"].values()) <= {-1, 1}
        if w["direction"] == "max_loss":
            assert w["loss_db"] >= w["monte_carlo_max_loss_db"] - 1e-9
            assert w["loss_db"] > w["nominal_loss_db"]
        else:
            assert w["loss_db"] <= w["monte_carlo_min_loss_db"] + 1e-9
            assert w["loss_db"] < w["nominal_loss_db"]
    # at the stopband edge the passband reference hardly moves: the corner's change is the linear
    # prediction sum |S| tol to second order
    k = repr(10 ** 3.4)
    pred = sum(abs(x["magnitude_db_per_pct"][k]) * x["tolerance"] * 100 for x in r.sensitivity)
    up = [w for w in wc if w["frequency_hz"] == 10 ** 3.4 and w["direction"] == "max_loss"][0]
    assert up["loss_db"] - up["nominal_loss_db"] == pytest.approx(pred, rel=0.15)


def test_equal_contributions_listed_by_stage_then_ref(butter8_sk):
    # source: Schaumann & Van Valkenburg, Design of Analog Filters, 2001, sec. 3.1 / Huelsman, Active and
    # Passive Analog Filter Design, 1993, ch. 5: in a unity-gain Sallen-Key lowpass every R and C has
    # S^f0 = -1/2 and |S^Q| <= 1/2 (from memory), so without a mask every capacitor (5 %) contributes
    # 0.5 x 0.05 and every resistor (1 %) 0.5 x 0.01: two runs of ties, whatever their rounding
    rows = run_tolerance(butter8_sk, trials=10, frequencies_hz=GRID).sensitivity
    assert [x["contribution_f0_q"] for x in rows] == pytest.approx([0.025] * 8 + [0.005] * 8, rel=1e-6)
    caps, res = rows[:8], rows[8:]
    for run in (caps, res):
        assert [(x["stage"], int(x["ref"][1:])) for x in run] == sorted((x["stage"], int(x["ref"][1:])) for x in run)
    assert {x["kind"] for x in caps} == {"capacitor"} and {x["kind"] for x in res} == {"resistor"}


def test_ranking_does_not_depend_on_rounding_of_equal_contributions():
    # common practice (no source): values equal to the method's accuracy are one rank, listed by stage and ref
    from service.tolerance.sensitivity import _ranked

    def row(ref, stage, c):
        return {"ref": ref, "stage": stage, "contribution_db": None, "contribution_f0_q": c}

    a = [row("C2", 1, 0.025 * (1 + 3e-12)), row("C10", 2, 0.025), row("C1", 1, 0.025 * (1 - 2e-12)),
         row("R1", 1, 0.005)]
    b = [row("C2", 1, 0.025 * (1 - 5e-12)), row("C10", 2, 0.025 * (1 + 4e-12)), row("C1", 1, 0.025),
         row("R1", 1, 0.005)]
    assert [r["ref"] for r in _ranked(a)] == [r["ref"] for r in _ranked(b)] == ["C1", "C2", "C10", "R1"]
