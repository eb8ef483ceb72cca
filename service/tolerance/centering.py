"""Design centering among the part choices of each stage: the nominal values that let most boards pass.

A design's nominal point decides how much of the tolerance spread fits inside
the requirement.  Design centering moves the nominal point to where the
yield is largest (J. W. Bandler, P. C. Liu and H. Tromp, "A nonlinear
programming approach to optimal design centering, tolerancing, and tuning",
IEEE Trans. Circuits and Systems 23(3), 1976, 155-165).  Here the nominal
values are discrete: the part search hands back, for every stage, a few
ranked combinations of purchasable values around the ideal ones
(``StagePlan.alternatives``); the centering picks one per stage.

Each alternative's effect on the whole filter's gain at the critical
frequencies is computed exactly (the cascade's poles and zeros with that
stage's values, :func:`service.realization.analysis.design_roots`); the gain
of a combination is the nominal gain plus the sum of its stages' changes
(exact for stages that do not load each other, which is how the engine
cascades them).  Boards are the first-order model's
(:class:`service.tolerance.assignment.GradeSearch`), whose sensitivities
barely move between neighbouring values.  The yield of a combination is
counted at every *uniform* grade level (all parts at their k-th grade), and
the combination wins that passes the most boards at the tightest grades (up
to the number needed), then the most summed over the levels: the one that
can reach the target, and then passes most boards whatever grades are bought.  The search is a
coordinate ascent over the stages (each stage's alternatives at once), a
few passes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.deadline import check as check_deadline
from service.circuit.roots import transfer_roots
from service.realization.analysis import StagePlan, design_roots, stage_circuit
from service.response.criteria import NEPER_DB, TWO_PI
from service.tolerance.assignment import GradeSearch

#: Coordinate-ascent passes over the stages.
PASSES = 2
#: Boards (the first of the search's) the combinations are counted on.
BOARDS = 4000
#: Weight of the nominal worst margin (dB) in the score, a tie-break between equally passing choices.
NOMINAL_WEIGHT = 1e-3


@dataclass(frozen=True)
class Centering:
    """The chosen alternative of every stage and what it gains.

    Attributes
    ----------
    choice : tuple of int
        Index into each stage's ``alternatives``, or -1 where the stage keeps its parts.
    passes_before, passes_after : int
        The score (:func:`center`) at the search's choice and at the centred one.
    nominal_margin_db : float
        Predicted nominal worst margin (dB) of the centred choice.
    """

    choice: tuple[int, ...]
    passes_before: int
    passes_after: int
    nominal_margin_db: float

    @property
    def changed(self) -> bool:
        return any(c >= 0 for c in self.choice)


def stage_changes(plans: list[StagePlan], frequency_hz: np.ndarray) -> list[np.ndarray]:
    """Per stage, the change (dB) of the whole filter's gain at ``frequency_hz`` for each alternative,
    shape (A_k, K) (empty (0, K) for a stage without alternatives), from the stages' present parts.

    Stages that do not load each other (op-amp outputs without resistance) add their gains in dB, so a
    stage's change is that of the stage alone; otherwise the whole cascade is evaluated.
    """
    w = TWO_PI * np.asarray(frequency_hz, dtype=float)
    loaded = any((u.rout_ohm or 0.0) > 0 for p in plans for u in p.opamps)
    g0 = design_roots(plans).log_magnitude(w)[0] * NEPER_DB if loaded else None
    out = []
    for plan in plans:
        alts = plan.alternatives
        if len(alts) < 2:
            out.append(np.zeros((0, w.size)))
            continue
        if loaded:
            values = {c.ref: np.array([alt[j].value for alt in alts]) for j, c in enumerate(plan.components)}
            out.append(design_roots(plans, values).log_magnitude(w) * NEPER_DB - g0[None, :])
            continue
        circuit = stage_circuit(plan, plan.model())
        base = transfer_roots(circuit).log_magnitude(w)[0]
        values = {c.ref: np.array([alt[j].value for alt in alts]) for j, c in enumerate(plan.components)}
        g = transfer_roots(circuit.with_values(values)).log_magnitude(w)
        out.append((g - base[None, :]) * NEPER_DB)
    return out


def center(plans: list[StagePlan], search: GradeSearch, *, goal: int | None = None, passes: int = PASSES
           ) -> Centering:
    """Pick each stage's alternative to maximize the boards passing over the uniform grade levels.

    Parameters
    ----------
    plans : list of StagePlan
        The design (with the part search's ``alternatives``).
    search : GradeSearch
        Its first-order model on the boards, with the grades.
    goal : int, optional
        Boards (of the search's) that must pass: the tightest level's count up to it comes first, so that a
        choice which makes the goal reachable wins over one that only makes cheaper grades pass more.
    """
    model = search.model
    deltas = stage_changes(plans, model.frequency_hz)
    levels = [search.uniform(k) for k in range(int(search.top.max(initial=0)) + 1)]
    boards = slice(0, min(search.trials, BOARDS))
    board_gains = [search.gains(lv)[:, boards] for lv in levels]                        # each (K, T)
    # row 0 of each stage: keep its present parts; row a + 1: alternative a
    deltas = [np.vstack([np.zeros((1, model.frequency_hz.size)), d]) for d in deltas]
    choice = [0] * len(deltas)
    current = np.zeros(model.frequency_hz.size)

    n_boards = board_gains[0].shape[1]
    cap = n_boards if goal is None else int(np.ceil(goal * n_boards / search.trials))
    weight = float(len(board_gains) * n_boards + 1)

    def score(shift: np.ndarray) -> np.ndarray:
        """Scores of shifts (N, K): the tightest level's passing boards up to the goal first, then the passing
        boards summed over the levels, then the nominal tie-break."""
        total = np.zeros(shift.shape[0])
        for j, g in enumerate(board_gains):
            count = (search.worst(g[:, None, :] + shift.T[:, :, None]) >= 0).sum(axis=-1)
            total += count
            if j == len(board_gains) - 1:
                total += weight * np.minimum(count, cap)
        nominal = model.margins(model.gain_db[None, :] + shift).min(axis=-1)
        return total + NOMINAL_WEIGHT * np.clip(nominal, -1e3, 1e3)

    before = float(score(current[None, :])[0])
    best = before
    for _ in range(passes):
        moved = False
        for k, d in enumerate(deltas):
            if d.shape[0] < 2:
                continue
            check_deadline("tolerance.centering")
            base = current - d[choice[k]]
            s = score(base[None, :] + d)
            a = int(np.argmax(s))
            if s[a] > best + 1e-12:
                current = base + d[a]
                choice[k] = a
                best = float(s[a])
                moved = True
        if not moved:
            break
    nominal = float(model.margins(model.gain_db[None, :] + current[None, :]).min())
    return Centering(tuple(c - 1 for c in choice), int(round(before)), int(round(best)), nominal)


__all__ = ["Centering", "center", "stage_changes", "PASSES"]
