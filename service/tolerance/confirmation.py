"""The yield of a design by Monte Carlo, each board verified: the yield part of ``/v1/tolerance`` alone.

The boards are drawn exactly as :func:`service.tolerance.run.run_tolerance`
draws them (:func:`service.tolerance.sampling.varied_parts` and
:func:`service.tolerance.sampling.draw`, same seed, same order) and every
board's circuit -- its poles and zeros with its part values and op-amp models
(:func:`service.realization.analysis.design_roots`) -- is verified against
the criteria by the one verifier (:func:`service.response.verification.verify`,
with the nominal design for its batch bound).  So a design whose document is
sent to ``/v1/tolerance`` with the same trials, seed and options gets the same
passing boards.  No percentile sweep, sensitivity or worst case is computed.

The interval is E. B. Wilson's score interval ("Probable inference, the law
of succession, and statistical inference", J. Amer. Statist. Assoc. 22 (1927)
209-212), 95 %.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from service.errors import LimitExceeded
from service.realization.analysis import StagePlan, design_roots
from service.response.verification import BatchVerdict, Criteria, verify
from service.tolerance.sampling import VariedPart, draw, resolve_distribution, resolve_temperature, varied_parts
from service.tolerance.statistics import wilson_interval

#: How closely each board's worst margin is located (dB); pass or fail is proved to the verifier's tolerance.
PRECISION_DB = 1e-2


@dataclass(frozen=True)
class YieldCheck:
    """Verified boards of one Monte Carlo run.

    Attributes
    ----------
    trials, passed : int
    ci95 : (float, float)
        Wilson score interval of the yield, 95 %.
    batch : BatchVerdict
        Every board's verdict (margins per segment, stability).
    parts : list of VariedPart
        The varied parts, in draw order.
    """

    trials: int
    passed: int
    ci95: tuple[float, float]
    batch: BatchVerdict
    parts: list[VariedPart]

    @property
    def fraction(self) -> float:
        return self.passed / self.trials

    def passes(self) -> np.ndarray:
        """Bool (T,): each board meets the criteria."""
        return self.batch.meets()

    def failures(self) -> list[dict]:
        """Per criteria segment: ``{segment, band, start_hz, stop_hz, limit_db, failures, worst_margin_db}``
        (as ``/v1/tolerance``'s ``failures_by_criterion``), most failures first, then unstable boards."""
        v = self.batch
        ok = v.segment_met()
        rows = []
        for j, lim in enumerate(v.criteria.limits):
            m = v.margin_db[:, j]
            rows.append({"segment": j, "band": lim.band.value, "start_hz": lim.start_hz,
                         "stop_hz": lim.stop_hz if math.isfinite(lim.stop_hz) else None, "limit_db": lim.limit_db,
                         "failures": int((~ok[:, j] & v.stable).sum()),
                         "worst_margin_db": float(np.nanmin(m)) if np.isfinite(m).any() else None})
        if v.delay_margin_pct is not None:
            dm = v.delay_margin_pct
            rows.append({"segment": None, "band": "group_delay", "start_hz": 0.0, "stop_hz": v.criteria.delay.stop_hz,
                         "limit_pct": v.criteria.delay.max_deviation_pct,
                         "failures": int(((dm < 0) & v.stable).sum()),
                         "worst_margin_pct": float(np.nanmin(dm)) if np.isfinite(dm).any() else None})
        rows.sort(key=lambda r: (-r["failures"], -1 if r["segment"] is None else r["segment"]))
        return rows

    @property
    def unstable(self) -> int:
        return int((~self.batch.stable).sum())


def verified_yield(plans: list[StagePlan], *, draw_order: Sequence[str], criteria: Criteria, trials: int,
                   seed: int, distribution: str | dict = "gaussian", temperature: dict | None = None,
                   tempco_ppm_per_c: dict | None = None, gbw_spread: float | None = None,
                   max_trials: int = 100_000, precision_db: float = PRECISION_DB) -> YieldCheck:
    """Monte Carlo yield of ``plans``, every board verified (see the module notes).

    Parameters
    ----------
    plans : list of StagePlan
        The design, each part with its tolerance.
    draw_order : sequence of str
        Refs in document order (the draw order of ``/v1/tolerance``).
    criteria : Criteria
    trials, seed, distribution, temperature, tempco_ppm_per_c, gbw_spread
        As :func:`service.tolerance.run.run_tolerance`.

    Raises
    ------
    LimitExceeded
        ``trials`` above ``max_trials``.
    ToleranceError, InvalidDistribution, InvalidTolerance
    """
    if trials > max_trials:
        raise LimitExceeded(f"trials: {trials} requested, at most {max_trials} allowed", limit="max_trials",
                            value=max_trials, setting="ROLLOFF_MAX_TRIALS", field="trials")
    dist = resolve_distribution(distribution)
    temp = resolve_temperature(temperature)
    parts = varied_parts(plans, draw_order, dist, tempco_ppm_per_c, gbw_spread)
    samples = draw(parts, trials, seed, temp)
    batch = verify(design_roots(plans, samples.values), criteria, precision_db=precision_db,
                   nominal=design_roots(plans))
    passed = int(batch.meets().sum())
    return YieldCheck(trials, passed, wilson_interval(passed, trials), batch, parts)


__all__ = ["YieldCheck", "verified_yield", "PRECISION_DB"]
