"""Tolerance assignment: the Wilson goal, the grades worth buying, and the grade search on a known model."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from service.response.verification import Band, Criteria, LossLimit
from service.tolerance.assignment import (Grade, GradeSearch, PartGrades, efficient, needed_passes, trials_for)
from service.tolerance.statistics import wilson_interval
from service.tolerance.surrogate import Deviates, LinearModel


def test_needed_passes_is_the_smallest_count_whose_wilson_interval_clears_the_target():
    # source: E. B. Wilson, "Probable inference, the law of succession, and statistical inference",
    # JASA 22 (1927) 209-212: lower end (p + z^2/2n - z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n), z = 1.96
    def lower(k, n, z=1.959963984540054):
        p = k / n
        return (p + z * z / (2 * n) - z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))) / (1 + z * z / n)

    for target, n in ((0.95, 1000), (0.9, 200), (0.99, 5000), (0.5, 30)):
        k = needed_passes(target, n)
        assert lower(k, n) >= target > lower(k - 1, n)
        assert wilson_interval(k, n)[0] >= target
    # all n boards passing: lower end n / (n + z^2); 0.999 needs 3,838 trials
    assert needed_passes(0.999, 1000) is None
    n = trials_for(0.999)
    assert needed_passes(0.999, n) == n and needed_passes(0.999, n - 1) is None


def test_grades_worth_buying():
    # common practice (no source): a grade that costs more and is no tighter is never bought
    g = efficient([Grade(0.01, 1.0, 25), Grade(0.05, 2.0, 25), Grade(0.001, 3.0, 25), Grade(0.002, 4.0, 25),
                   Grade(0.02, 1.0, 25)])
    assert [(x.tolerance, x.cost) for x in g] == [(0.01, 1.0), (0.001, 3.0)]
    # unpriced grades cost nothing: the tightest of them is the one to take
    assert [x.tolerance for x in efficient([Grade(0.02, None, 30), Grade(0.01, None, 30)])] == [0.01]


def _toy(n_parts: int, boards: int, seed: int, sens: np.ndarray, nominal_margin_db: float):
    """A lowpass whose gain at three frequencies moves linearly with the parts (dB per neper ``sens``):
    passband [0, 1] Hz within 1 dB, stopband from 2 Hz at 40 dB; the nominal passband loss at 1 Hz is
    ``1 - nominal_margin_db``."""
    crit = Criteria((LossLimit(Band.PASSBAND, 0.0, 1.0, 1.0), LossLimit(Band.STOPBAND, 2.0, math.inf, 40.0)))
    f = np.array([0.0, 1.0, 2.0])
    g0 = np.array([0.0, -(1.0 - nominal_margin_db), -60.0])
    model = LinearModel(f, np.array([0, 0, 1]), g0, sens, np.zeros((0, 3)), crit)
    rng = np.random.default_rng(seed)
    unit = np.clip(rng.standard_normal((boards, n_parts)), -6, 6) / 3
    dev = Deviates(unit, np.zeros((boards, n_parts)), {}, np.zeros((boards, 0)), None)
    return model, dev


GRADES = ((0.05, 1.0), (0.02, 1.5), (0.01, 2.5), (0.001, 6.0))


def _parts(n):
    return [PartGrades(f"R{i + 1}", efficient([Grade(t, c, 0.0) for t, c in GRADES])) for i in range(n)]


@pytest.mark.parametrize("seed", [1, 2])
def test_grade_search_against_every_assignment(seed):
    # The passband edge's loss moves with four parts of unequal sensitivity; every one of the 4^4
    # assignments is counted on the same boards and the search's is compared with the cheapest feasible.
    sens = np.array([[0.0, 8.0, 0.0], [0.0, -4.0, 0.0], [0.0, 2.0, 0.0], [0.0, 0.5, 0.0]])
    model, dev = _toy(4, 2000, seed, sens, 0.08)
    parts = _parts(4)
    search = GradeSearch(model, dev, parts)
    needed = 1800
    a = search.assign(needed)
    assert a is not None and a.passes >= needed and search.passes(a.levels) == a.passes
    best = math.inf
    for levels in itertools.product(range(4), repeat=4):
        lv = np.array(levels)
        if search.passes(lv) >= needed:
            best = min(best, search.cost(lv))
    # common practice (no source): marginal analysis is not exact for a discrete problem; within 15 %
    assert best <= a.cost <= 1.15 * best
    # never dearer than the cheapest uniform assignment that reaches the goal
    uniform = min(search.cost(search.uniform(k)) for k in range(4) if search.passes(search.uniform(k)) >= needed)
    assert a.cost <= uniform
    # the most sensitive part is the tightest
    assert a.levels[0] >= a.levels[3]


def test_grade_search_out_of_reach_and_the_limiting_parts():
    sens = np.array([[0.0, 30.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 0.0]])
    model, dev = _toy(3, 1000, 5, sens, 0.0005)
    search = GradeSearch(model, dev, _parts(3))
    assert search.passes(search.top) < 990
    assert search.assign(990) is None
    seg, f, parts = search.limiting(search.top)
    assert (seg, f) == (0, 1.0)
    assert parts[0][0] == 0 and parts[0][1] > 0.9          # the part 30 dB/Np sensitive carries it
    assert all(i != 2 for i, _ in parts)                    # an insensitive part never limits


def test_calibration_offset_moves_the_count():
    sens = np.array([[0.0, 5.0, 0.0], [0.0, -5.0, 0.0]])
    model, dev = _toy(2, 1000, 9, sens, 0.05)
    search = GradeSearch(model, dev, _parts(2))
    lv = np.array([1, 1])
    before = search.passes(lv)
    search.offset_db = -0.02
    assert search.passes(lv) < before
