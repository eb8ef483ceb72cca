"""Tolerance assignment: the cheapest tolerance grades whose boards reach a yield.

The problem is J. Karafin's ("The optimum assignment of component
tolerances for electrical networks", Bell System Technical Journal 50(4),
1971, 1225-1242): choose each part's tolerance to minimize the total cost
``sum_i c_i(t_i)`` subject to the network meeting its requirement, with the
network's response linearized in the part deviations through its
sensitivities.  Here the tolerances are discrete (the grades a caller can
buy, each with a relative cost), the constraint is a yield (the share of
Monte Carlo boards that meet the requirement), and the linearized response is
:class:`service.tolerance.surrogate.LinearModel` evaluated on a fixed set of
boards (common random numbers), so that every candidate assignment is judged
on the same boards.

Method (marginal analysis, each step one grade):

1. Every part starts at its cheapest grade.
2. While fewer boards pass than needed, every single-grade tightening is
   evaluated at once (vectorized over candidates, boards and critical
   frequencies) and the one with the largest gain in *smoothed* passing
   boards per unit of added cost is made (far from the goal, the best
   quarter of them at once).  The smoothing (a logistic of each board's
   worst margin over :data:`SMOOTHING_FRACTION` of the margins' spread)
   ranks moves that bring failing boards closer to passing, where the plain
   count would see no change.
3. Then every single-grade relaxation that keeps enough boards passing is
   evaluated; the feasible ones are made, largest saving first, as many at
   once as still keep enough boards passing, until none is left.
4. The same relaxation pass runs from every *uniform* assignment (all parts
   at their k-th grade) that reaches the yield; the cheapest result of all
   is returned, so the result is never dearer than tightening every part by
   the same number of grades.

Whether the boards of the result really pass is for the verifier to say
(:mod:`service.workflows.yielding` confirms it by Monte Carlo).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.deadline import check as check_deadline
from service.tolerance.errors import ToleranceError
from service.tolerance.surrogate import Deviates, LinearModel

#: Logistic smoothing of the worst margin, as a fraction of its spread (standard deviation) over the boards.
SMOOTHING_FRACTION = 0.25
#: Smallest smoothing scale (dB).
MIN_SMOOTHING_DB = 1e-5
#: Most grade moves of one search (each tightening or relaxation is one).
MAX_MOVES = 2000
#: Share of the boards a search may be short of its goal before several tightenings are made at once.
BULK_DEFICIT = 0.05
#: Bytes of the candidate arrays evaluated at once (the candidates are split into blocks beyond it).
BLOCK_BYTES = 64 * 2**20


@dataclass(frozen=True)
class Grade:
    """One tolerance grade a part can be bought in.

    Attributes
    ----------
    tolerance : float
        Relative tolerance (0.01 = 1 %).
    cost : float or None
        Relative cost (any positive unit); None when the caller gave none (counted as 0).
    tempco_ppm_per_c : float
        Temperature-coefficient bound of a part in this grade (ppm/degC).
    part_id, dielectric : str or None
        What a stock entry of this grade carries (None for series grades).
    """

    tolerance: float
    cost: float | None
    tempco_ppm_per_c: float
    part_id: str | None = None
    dielectric: str | None = None

    @property
    def price(self) -> float:
        return 0.0 if self.cost is None else float(self.cost)


def efficient(grades: list[Grade]) -> tuple[Grade, ...]:
    """The grades worth buying, cheapest first: each next one dearer and strictly tighter (or cooler).

    A grade that costs at least as much as another and is no tighter and drifts no less is dropped.
    """
    order = sorted(grades, key=lambda g: (g.price, g.tolerance, g.tempco_ppm_per_c))
    kept: list[Grade] = []
    for g in order:
        if any(k.tolerance <= g.tolerance and k.tempco_ppm_per_c <= g.tempco_ppm_per_c for k in kept):
            continue
        kept.append(g)
    return tuple(kept)


@dataclass(frozen=True)
class PartGrades:
    """The grades one varied part may take, as :func:`efficient` orders them (level 0 the cheapest)."""

    ref: str
    grades: tuple[Grade, ...]

    def __post_init__(self):
        if not self.grades:
            raise ToleranceError(f"{self.ref}: no grade to choose from", field="parts")


@dataclass(frozen=True)
class Assignment:
    """A grade per part and what the linear model predicts for it.

    Attributes
    ----------
    levels : ndarray of int (P,)
        Index of each part's grade in its :attr:`PartGrades.grades`.
    passes : int
        Boards of the model's trials predicted to meet the requirement.
    trials : int
    cost : float
        Total relative cost.
    moves : int
        Grade moves the search made.
    """

    levels: np.ndarray
    passes: int
    trials: int
    cost: float
    moves: int = 0

    @property
    def fraction(self) -> float:
        return self.passes / self.trials if self.trials else 0.0


def _product(sens: np.ndarray, d: np.ndarray) -> np.ndarray:
    """``sens.T @ d`` ((P, K), (P, T) -> (K, T)) without BLAS: these products are small and many, and a
    threaded BLAS call on a busy machine waits for its threads far longer than it computes."""
    return np.einsum("pk,pt->kt", sens, d, optimize=False)


class GradeSearch:
    """The linear model on a set of boards, ready to judge assignments of ``parts``' grades.

    Parameters
    ----------
    model : LinearModel
    dev : Deviates
        The boards; columns in the order of ``parts``.
    parts : list of PartGrades
        One per passive varied part, in the order of the model's sensitivity rows.
    offset_db : float
        Added to every predicted worst margin (a calibration against the verifier; 0 for none).
    """

    def __init__(self, model: LinearModel, dev: Deviates, parts: list[PartGrades], offset_db: float = 0.0):
        if len(parts) != model.sensitivity_db.shape[0] or dev.unit.shape[1] != len(parts):
            raise ToleranceError("the grades, the model and the boards disagree on the parts", field="parts")
        self.model = model
        self.parts = parts
        self.offset_db = float(offset_db)
        # frequency-major layout: (K, T) gains, reductions over the leading axis
        self.base = np.ascontiguousarray(model.base_gains(dev).T)                  # (K, T)
        self.sens = np.ascontiguousarray(model.sensitivity_db)                     # (P, K)
        # log deviation of every part in every grade on every board: list of (J_i, T)
        self.logdev = [np.log1p(np.array([g.tolerance for g in p.grades])[:, None] * dev.unit[None, :, i])
                       + np.log1p(np.array([g.tempco_ppm_per_c for g in p.grades])[:, None] * 1e-6
                                  * dev.drift[None, :, i]) for i, p in enumerate(parts)]
        self.price = [np.array([g.price for g in p.grades]) for p in parts]
        self.top = np.array([len(p.grades) - 1 for p in parts], dtype=int)
        self.trials = dev.trials

    # ------------------------------------------------------------------ evaluation
    def gains(self, levels: np.ndarray) -> np.ndarray:
        """Predicted gains (dB), (K, T)."""
        if not self.parts:
            return self.base.copy()
        ld = np.stack([self.logdev[i][levels[i]] for i in range(len(self.parts))])          # (P, T)
        return self.base + _product(self.sens, ld)

    def worst(self, gains: np.ndarray) -> np.ndarray:
        """Worst segment margin (dB) of each board, with the calibration offset: gains (K, ..., T) -> (..., T)."""
        return self.model.margins(gains, axis=0).min(axis=0) + self.offset_db

    def cost(self, levels: np.ndarray) -> float:
        return float(sum(self.price[i][levels[i]] for i in range(len(self.parts))))

    def passes(self, levels: np.ndarray) -> int:
        return int((self.worst(self.gains(levels)) >= 0).sum())

    def _shift(self, levels: np.ndarray, parts, step: int) -> np.ndarray:
        """Gain change (K, T) of moving ``parts`` by ``step`` grades together."""
        parts = np.asarray(parts, dtype=int)
        d = np.stack([self.logdev[i][levels[i] + step] - self.logdev[i][levels[i]] for i in parts])   # (m, T)
        return _product(self.sens[parts], d)

    def _moves(self, gains: np.ndarray, levels: np.ndarray, parts: np.ndarray, step: int) -> np.ndarray:
        """Worst margins (n, T) after moving each of ``parts`` by ``step`` grades (the others unchanged)."""
        out = np.empty((parts.size, self.trials))
        per = max(1, BLOCK_BYTES // max(1, 8 * gains.size * 3))
        for b0 in range(0, parts.size, per):
            blk = parts[b0:b0 + per]
            d = np.stack([self.logdev[i][levels[i] + step] - self.logdev[i][levels[i]] for i in blk])   # (n, T)
            g = gains[:, None, :] + self.sens[blk].T[:, :, None] * d[None, :, :]                         # (K, n, T)
            out[b0:b0 + per] = self.worst(g)
        return out

    # ------------------------------------------------------------------ search
    def _smooth(self, worst: np.ndarray, scale: float) -> np.ndarray:
        with np.errstate(over="ignore"):
            return (1.0 / (1.0 + np.exp(-np.clip(worst / scale, -60, 60)))).sum(axis=-1)

    def tighten(self, levels: np.ndarray, needed: int) -> tuple[np.ndarray, int]:
        """Tighten grade by grade until ``needed`` boards pass (or nothing helps); returns (levels, moves).

        Far from the goal (more than :data:`BULK_DEFICIT` of the boards short) the best quarter of the
        useful tightenings is made at once; :meth:`relax` takes back what was not needed.
        """
        levels = levels.copy()
        moves = 0
        gains = self.gains(levels)
        worst = self.worst(gains)
        while int((worst >= 0).sum()) < needed and moves < MAX_MOVES:
            check_deadline("tolerance.assignment")
            cand = np.flatnonzero(levels < self.top)
            if cand.size == 0:
                break
            scale = max(MIN_SMOOTHING_DB, SMOOTHING_FRACTION * float(np.std(worst)))
            now = self._smooth(worst, scale)
            after = self._moves(gains, levels, cand, +1)
            gain = self._smooth(after, scale) - now
            hard = (after >= 0).sum(axis=1) - int((worst >= 0).sum())
            extra = np.array([self.price[i][levels[i] + 1] - self.price[i][levels[i]] for i in cand])
            useful = (gain > 1e-12) | (hard > 0)
            if not useful.any():
                break
            ratio = np.where(useful, np.maximum(gain, 0) / np.maximum(extra, 1e-12 * max(1.0, extra.max())), -np.inf)
            order = np.argsort(-ratio)
            deficit = needed - int((worst >= 0).sum())
            take = 1
            if deficit > BULK_DEFICIT * self.trials:
                take = max(1, int(useful.sum()) // 4)
            for k in order[:take]:
                i = int(cand[k])
                levels[i] += 1
                moves += 1
            moved = cand[order[:take]]
            gains = gains + self._shift(levels, moved, -1) * -1.0
            worst = after[order[0]] if take == 1 else self.worst(gains)
        return levels, moves

    def relax(self, levels: np.ndarray, needed: int) -> tuple[np.ndarray, int]:
        """Relax grades while ``needed`` boards still pass, largest saving first; returns (levels, moves).

        Every single relaxation is evaluated at once; the feasible ones are then made together, as many
        of them (largest saving first) as keep ``needed`` boards passing, halving the batch until one does.
        """
        levels = levels.copy()
        moves = 0
        gains = self.gains(levels)
        while moves < MAX_MOVES:
            check_deadline("tolerance.assignment")
            cand = np.flatnonzero(levels > 0)
            if cand.size == 0:
                break
            saving = np.array([self.price[i][levels[i]] - self.price[i][levels[i] - 1] for i in cand])
            keep = saving > 0
            cand, saving = cand[keep], saving[keep]
            if cand.size == 0:
                break
            after = self._moves(gains, levels, cand, -1)
            passing = (after >= 0).sum(axis=1)
            ok = passing >= needed
            if not ok.any():
                break
            feasible = np.flatnonzero(ok)
            # largest saving first; among equal savings the one that keeps the most boards passing
            feasible = feasible[np.lexsort((-passing[feasible], -saving[feasible]))]
            take = feasible.size
            shift = None
            while take > 1:
                shift = self._shift(levels, cand[feasible[:take]], -1)
                if int((self.worst(gains + shift) >= 0).sum()) >= needed:
                    break
                take //= 2
                shift = None
            if shift is None:
                shift = self._shift(levels, cand[feasible[:take]], -1)
            levels[cand[feasible[:take]]] -= 1
            moves += take
            gains = gains + shift
        return levels, moves

    def uniform(self, k: int) -> np.ndarray:
        """Every part at its ``k``-th grade (or its last)."""
        return np.minimum(k, self.top)

    def assign(self, needed: int, start: np.ndarray | None = None) -> Assignment | None:
        """The cheapest assignment found with at least ``needed`` passing boards (see the module notes).

        ``start`` (levels) is where the tightening begins (default: every part at its cheapest grade).
        Returns None when even every part at its tightest grade falls short.
        """
        if self.passes(self.top) < needed:
            return None
        results = []
        levels, moves = self.tighten(np.zeros_like(self.top) if start is None else np.asarray(start), needed)
        if self.passes(levels) >= needed:
            levels, more = self.relax(levels, needed)
            results.append((levels, moves + more))
        for k in range(int(self.top.max(initial=0)) + 1):
            base = self.uniform(k)
            if self.passes(base) >= needed:
                levels, more = self.relax(base, needed)
                results.append((levels, more))
                break
        best, moves = min(results, key=lambda r: (self.cost(r[0]), -self.passes(r[0])))
        return Assignment(best, self.passes(best), self.trials, self.cost(best), moves)

    def limiting(self, levels: np.ndarray, count: int = 5) -> tuple[int, float, list[tuple[int, float]]]:
        """What limits the yield at ``levels``: (segment, frequency in Hz, [(part index, share)]).

        The segment failing on most boards, the critical frequency where its failing boards are worst
        most often, and the parts with the largest share of the predicted gain's variance there
        (``(S_i sigma_i)^2 / sum``, sigma over these boards).
        """
        gains = self.gains(levels)                                     # (K, T)
        margins = self.model.margins(gains, axis=0) + self.offset_db    # (S, T)
        failing = margins < 0
        s = int(np.argmax(failing.sum(axis=1))) if failing.any() else int(np.argmin(margins.min(axis=1)))
        where = self.model.worst_frequency_hz(gains, s)
        rows = failing[s] if failing[s].any() else np.ones(self.trials, dtype=bool)
        vals, counts = np.unique(where[rows], return_counts=True)
        f = float(vals[np.argmax(counts)])
        col = int(np.flatnonzero(self.model.frequency_hz == f)[0])
        spread = np.array([np.std(self.logdev[i][levels[i]]) for i in range(len(self.parts))])
        var = (self.sens[:, col] * spread) ** 2
        total = float(var.sum()) or 1.0
        order = np.argsort(-var)[:count]
        return s, f, [(int(i), float(var[i] / total)) for i in order if var[i] > 0]


def needed_passes(target: float, trials: int, z: float | None = None) -> int | None:
    """Fewest passing boards of ``trials`` whose 95 % Wilson interval lies at or above ``target``
    (E. B. Wilson, JASA 22 (1927) 209-212); None when even all of them would not do."""
    from service.tolerance.statistics import Z95, wilson_interval

    z = Z95 if z is None else z
    lo, hi = 0, trials
    if wilson_interval(trials, trials, z)[0] < target:
        return None
    while lo < hi:
        mid = (lo + hi) // 2
        if wilson_interval(mid, trials, z)[0] >= target:
            hi = mid
        else:
            lo = mid + 1
    return lo


def trials_for(target: float, z: float | None = None) -> int:
    """Fewest trials for which all-passing boards put the Wilson interval's lower end at ``target``:
    ``n / (n + z^2) >= target``."""
    from service.tolerance.statistics import Z95

    z = Z95 if z is None else z
    return int(math.ceil(z * z * target / (1.0 - target)))


__all__ = ["Grade", "PartGrades", "Assignment", "GradeSearch", "efficient", "needed_passes", "trials_for"]
