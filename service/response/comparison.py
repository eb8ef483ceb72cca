"""Every approximation family side by side for one requirement.

For each family the lowest order meeting the requirement is designed
(:func:`service.approximation.design_by_requirement`) and judged on the same
figures: order, number of second-order sections, highest section Q,
passband group-delay variation, step overshoot, settling time to 1 %, and the
worst margin against the requirement (the one verifier,
:mod:`service.response.verification`). A family that cannot meet the requirement
within ``max_order`` is listed with ``meets=False`` and the reason.

The recommended family is the lowest-order one that meets the mask and also
the stated overshoot and group-delay-variation limits (ties: lower highest Q,
then the order of :class:`service.approximation.types.Family`).  When the
realization figures of each family are known (op-amps with the automatic
topologies, the GBW they need, and with parts a predicted yield; the
workflow adds them), :func:`recommend` weighs them instead (rule
:data:`WEIGHED_RULE`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from service.approximation.types import Family, ResponseType
from service.errors import RolloffError
from service.response import zpk as _zpk
from service.errors import InvalidParameter
from service.response.grids import TimeGrid
from service.circuit.roots import RootSet
from service.response.verification import Band, Criteria, verify
from service.response.metrics import ResponseMetrics, delay_variation, step_metrics
from service.response.modal import modal_step
from service.response.refine import analysis_grid_hz
from service.response.timeresp import automatic_span, simulate

#: Samples of the automatic time grid of each family's step response; the
#: settling and overshoot figures are refined on the continuous response
#: (partial fractions, or the exact state-space method for repeated poles).
COMPARISON_TIME_POINTS = 400


@dataclass
class FamilyComparison:
    """One family's row. Units as the field names say; None when not designed."""

    family: Family
    meets: bool
    order: int | None = None
    sections: int | None = None
    first_order_sections: int | None = None
    max_q: float | None = None
    group_delay_variation_s: float | None = None
    overshoot_pct: float | None = None
    settling_time_1pct_s: float | None = None
    margin_db: float | None = None
    within_limits: bool | None = None
    reason: str | None = None
    approximation: Any = field(default=None, repr=False, compare=False)
    opamps: int | None = None
    gbw_needed_hz: float | None = None
    gbw_basis: str | None = None
    predicted_yield: dict | None = None
    design_meets: bool | None = None

    def as_dict(self) -> dict:
        from service.response.result import _clean

        return _clean({
            "family": self.family.value, "order": self.order, "sections": self.sections,
            "first_order_sections": self.first_order_sections, "max_q": self.max_q,
            "group_delay_variation_s": self.group_delay_variation_s, "overshoot_pct": self.overshoot_pct,
            "settling_time_1pct_s": self.settling_time_1pct_s, "margin_db": self.margin_db,
            "meets": self.meets, "within_limits": self.within_limits, "reason": self.reason,
            "opamps": self.opamps, "gbw_needed_hz": self.gbw_needed_hz, "gbw_basis": self.gbw_basis,
            "predicted_yield": self.predicted_yield, "design_meets": self.design_meets,
        })


@dataclass
class Comparison:
    """All families for one requirement and the recommendation.

    Attributes
    ----------
    families : list of FamilyComparison
    recommended : Family or None
    recommended_reason : str
        Why that family (or why none).
    criteria : Criteria
        The requirement every family was verified against.
    """

    families: list[FamilyComparison]
    recommended: Family | None
    recommended_reason: str
    criteria: Criteria
    response: ResponseType

    def as_dict(self) -> dict:
        return {"response": self.response.value, "families": [f.as_dict() for f in self.families],
                "recommended": None if self.recommended is None else self.recommended.value,
                "recommended_reason": self.recommended_reason}

    _COLUMNS = ("family", "order", "sections", "first_order_sections", "max_q", "group_delay_variation_s",
                "overshoot_pct", "settling_time_1pct_s", "margin_db", "meets", "within_limits", "reason",
                "opamps", "gbw_needed_hz", "predicted_yield")

    def table(self) -> dict[str, np.ndarray]:
        """Columns for CSV, a row per family (object arrays; None for missing; the yield as its fraction)."""
        rows = [f.as_dict() for f in self.families]
        for r in rows:
            y = r.get("predicted_yield")
            r["predicted_yield"] = None if y is None else y.get("fraction")
        return {c: np.array([r[c] for r in rows], dtype=object) for c in self._COLUMNS}

    def curves(self, points: int = 600) -> dict[str, tuple]:
        """Per designed family: (frequency_hz, magnitude_db, time_s, step) for the figure."""
        designed = [f for f in self.families if f.approximation is not None]
        if not designed:
            return {}
        roots = np.concatenate([np.asarray(f.approximation.poles, dtype=complex) for f in designed])
        crit = np.abs(roots) / (2 * math.pi)
        fr = np.geomspace(crit.min() / 20.0, crit.max() * 20.0, points)
        out = {}
        for f in designed:
            a = f.approximation
            mag = _zpk.magnitude_db(_zpk.freqresp(a.zeros, a.poles, a.gain, 2 * math.pi * fr))
            sim = _step_response(np.asarray(a.zeros, dtype=complex), np.asarray(a.poles, dtype=complex),
                                 float(np.real(a.gain)))
            out[f.family.value] = (fr, mag, sim.time_s, sim.step)
        return out

    def svg(self) -> bytes:
        """SVG figure: each family's magnitude against the mask, and their step responses."""
        from service.response.plotting import comparison_figure_svg

        return comparison_figure_svg(self)


def _step_response(z: np.ndarray, p: np.ndarray, k: float):
    """Step response on the comparison's automatic time grid.

    By partial fractions (:func:`service.response.modal.modal_step`, every
    candidate instant of the metric searches in one broadcast) when that is
    accurate, else by the exact state-space method (repeated poles).
    """
    stop, dt = automatic_span(p)
    t = TimeGrid().times(stop, dt, automatic_points=COMPARISON_TIME_POINTS)
    sim = modal_step(z, p, k, t)
    if sim is None:
        sim = simulate(z, p, k, t, impulse=False)
        sim.final_value = float(np.real(_zpk.dc_gain(z, p, k)))
    return sim


def _evaluate_family(family: Family, approx: Any, criteria: Criteria, overshoot_limit_pct, gd_limit_s
                     ) -> FamilyComparison:
    z = np.asarray(approx.zeros, dtype=complex)
    p = np.asarray(approx.poles, dtype=complex)
    k = float(np.real(approx.gain))
    secs = list(getattr(approx, "sections", []) or [])
    n2 = sum(1 for s in secs if s.order == 2)
    n1 = sum(1 for s in secs if s.order == 1)
    qs = [float(s.q) for s in secs if s.order == 2 and s.q is not None]
    row = FamilyComparison(family=family, meets=False, order=int(approx.order), sections=n2,
                           first_order_sections=n1, max_q=max(qs) if qs else None, approximation=approx)

    def delay(f):
        return _zpk.group_delay(z, p, 2 * math.pi * np.asarray(f, dtype=float))

    verdict = verify(RootSet.from_zpk(z, p, k), criteria).verdict()
    row.margin_db = verdict.worst_margin_db
    row.meets = verdict.meets
    passbands = [(lim.start_hz, lim.stop_hz) for lim in criteria.limits if lim.band is Band.PASSBAND]
    grid = analysis_grid_hz(z, p, extra_hz=[e for lim in criteria.limits for e in (lim.start_hz, lim.stop_hz)
                                            if math.isfinite(e)])
    row.group_delay_variation_s = delay_variation(delay, passbands, grid)
    sim = _step_response(z, p, k)
    m = ResponseMetrics()
    step_metrics(sim, m)
    row.overshoot_pct = m.overshoot_pct
    row.settling_time_1pct_s = m.settling_time_1pct_s
    ok = True
    if overshoot_limit_pct is not None:
        ok = ok and row.overshoot_pct is not None and row.overshoot_pct <= overshoot_limit_pct
    if gd_limit_s is not None:
        ok = ok and row.group_delay_variation_s <= gd_limit_s
    row.within_limits = bool(ok)
    if not row.meets:
        worst = verdict.worst
        row.reason = (f"misses the requirement by {-row.margin_db:.3g} dB at {worst.worst_hz:.6g} Hz"
                      if worst is not None else f"does not meet the requirement ({verdict.status})")
    return row


def compare_families(response: ResponseType | str, passband_hz, stopband_hz, passband_ripple_db: float,
                     stopband_attenuation_db: float, *, criteria: Criteria, overshoot_limit_pct: float | None = None,
                     group_delay_variation_limit_s: float | None = None, max_order: int = 20,
                     families: Sequence[Family | str] | None = None) -> Comparison:
    """Design every family for one requirement and compare them.

    Parameters
    ----------
    response : ResponseType or str
    passband_hz, stopband_hz : float or (float, float)
        Band edges (Hz); pairs for bandpass and bandstop.
    passband_ripple_db, stopband_attenuation_db : float
        Largest passband loss and smallest stopband loss (dB).
    criteria : Criteria
        What "meets" means for this requirement (the workflow derives it from the requirement).
    overshoot_limit_pct : float, optional
        Largest acceptable step overshoot (%) for the recommendation.
    group_delay_variation_limit_s : float, optional
        Largest acceptable passband group-delay variation (s).
    max_order : int
        Highest order tried per family (``ROLLOFF_MAX_ORDER``).
    families : sequence, optional
        Families to compare (default: every :class:`Family`).

    Returns
    -------
    Comparison

    Raises
    ------
    InvalidMask
        A malformed requirement (checked once, before any family is designed).
    InvalidParameter
        A negative limit.
    """
    from service.approximation import design_by_requirement

    rt = ResponseType(response)
    for name, v in (("overshoot_limit_pct", overshoot_limit_pct),
                    ("group_delay_variation_limit_s", group_delay_variation_limit_s)):
        if v is not None and not (math.isfinite(v) and v >= 0):
            raise InvalidParameter(f"{name} must be a number >= 0", field=name)
    fams = [Family(f) for f in families] if families is not None else list(Family)
    rows = []
    for fam in fams:
        try:
            approx = design_by_requirement(rt, fam, passband_hz, stopband_hz, passband_ripple_db,
                                           stopband_attenuation_db, max_order=max_order)
        except RolloffError as exc:
            rows.append(FamilyComparison(family=fam, meets=False, reason=exc.message))
            continue
        rows.append(_evaluate_family(fam, approx, criteria, overshoot_limit_pct, group_delay_variation_limit_s))
    family, reason = recommend(rows, fams, overshoot_limit_pct=overshoot_limit_pct,
                               group_delay_variation_limit_s=group_delay_variation_limit_s, max_order=max_order)
    return Comparison(rows, family, reason, criteria, rt)


WEIGHED_RULE = ("among the families that meet the requirement and the stated limits: with parts given, those whose "
                "predicted yield is not distinguishably below the best (Wilson intervals overlapping the best's); "
                "then the fewest op-amps with the automatic topologies, then the lowest GBW needed, then the "
                "lowest highest Q, then the lowest order")


def _limits_text(overshoot_limit_pct, group_delay_variation_limit_s) -> str:
    limits = []
    if overshoot_limit_pct is not None:
        limits.append(f"overshoot <= {overshoot_limit_pct:g} %")
    if group_delay_variation_limit_s is not None:
        limits.append(f"group-delay variation <= {group_delay_variation_limit_s:g} s")
    return " and " + " and ".join(limits) if limits else ""


def _hz(f: float) -> str:
    for scale, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if f >= scale:
            return f"{f / scale:.3g} {unit}"
    return f"{f:.3g} Hz"


def _figures(r: FamilyComparison) -> str:
    parts = []
    if r.predicted_yield is not None:
        parts.append(f"about {100 * r.predicted_yield['fraction']:.3g} % of boards pass with the given parts")
    if r.opamps is not None:
        parts.append(f"{r.opamps} op-amp{'s' if r.opamps != 1 else ''}")
    if r.gbw_needed_hz is not None:
        parts.append(f"{_hz(r.gbw_needed_hz)} GBW needed")
    if r.max_q is not None:
        parts.append(f"highest Q {r.max_q:.3g}")
    parts.append(f"order {r.order}")
    return ", ".join(parts)


def recommend(rows: list[FamilyComparison], fams: Sequence[Family], *, overshoot_limit_pct: float | None = None,
              group_delay_variation_limit_s: float | None = None, max_order: int = 20
              ) -> tuple[Family | None, str]:
    """The recommended family and why.

    Without realization figures (``opamps`` None everywhere): the lowest order (see the module notes).
    With them: :data:`WEIGHED_RULE`; the reason states the chosen family's figures and, where they differ,
    why the lowest-order and the fewest-op-amp families were passed over.
    """
    stated = _limits_text(overshoot_limit_pct, group_delay_variation_limit_s)
    candidates = [r for r in rows if r.meets and r.within_limits]
    if not candidates:
        return None, f"no family meets the requirement{stated} within order {max_order}"
    weighed = any(r.opamps is not None for r in candidates)
    if not weighed:
        best = min(candidates, key=lambda r: (r.order, r.max_q if r.max_q is not None else 0.0, fams.index(r.family)))
        return best.family, f"lowest order ({best.order}) that meets the requirement{stated}"
    pool = candidates
    with_yield = [r for r in pool if r.predicted_yield is not None]
    if with_yield:
        top = max(with_yield, key=lambda r: r.predicted_yield["ci95_low"])
        pool = [r for r in with_yield if r.predicted_yield["ci95_high"] >= top.predicted_yield["ci95_low"]]

    def key(r):
        return (r.opamps if r.opamps is not None else 10 ** 6,
                r.gbw_needed_hz if r.gbw_needed_hz is not None else math.inf,
                r.max_q if r.max_q is not None else 0.0, r.order, fams.index(r.family))

    best = min(pool, key=key)
    reason = f"{best.family.value}: {_figures(best)}; it meets the requirement{stated}"
    if with_yield:
        reason += "; no family's predicted yield is distinguishably higher"
    notes = []
    lowest = min(candidates, key=lambda r: (r.order, fams.index(r.family)))
    if lowest is not best and lowest.order < best.order:
        notes.append(f"{lowest.family.value} has the lowest order ({lowest.order}) but {_figures(lowest)}")
    fewest = min(candidates, key=key)
    if fewest is not best and fewest is not lowest:
        notes.append(f"{fewest.family.value} needs fewer op-amps or less GBW but {_figures(fewest)}")
    if notes:
        reason += "; " + "; ".join(notes)
    return best.family, reason
