"""Verdicts of realized designs: the one verification engine applied to the circuit a board gets.

:func:`circuit_roots` gives the zeros and poles of the whole filter with its
part values and op-amp models -- the product of its stages when every op-amp
output is an ideal source (``rout_ohm`` 0), the whole circuit otherwise --,
for one trial or many.  :func:`verify_design` verifies them against the
requirement with :func:`service.response.verification.verify` and, where a
segment fails, says why by verifying the same parts with ideal op-amps and
the exact sections: the approximation itself, the snapped part values, or
the op-amps.  Its warnings give the value, the limit and the stage.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.circuit.roots import RootSet
from service.realization import DesignWarning
from service.realization.analysis import StagePlan, design_roots
from service.response.verification import Band, Criteria, Verdict, verify
from service.response.systems import section_zpk
from service.units import format_quantity
from service.workflows.requirement import OPEN_BAND_RULE, REFERENCE_GAIN_RULE, Requirement

TWO_PI = 2.0 * math.pi


def finite_opamps(plans: list[StagePlan]) -> bool:
    """Whether any op-amp of the design has a finite gain-bandwidth."""
    return any(u.gbw_hz is not None for p in plans for u in p.opamps)


def slowest_gbw_hz(plans: list[StagePlan]) -> float | None:
    """The smallest GBW (Hz) of the design's op-amps (None: all ideal)."""
    gbws = [u.gbw_hz for p in plans for u in p.opamps if u.gbw_hz is not None]
    return min(gbws) if gbws else None


def design_criteria(requirement: Requirement, plans: list[StagePlan]) -> Criteria:
    """What the circuit of ``plans`` is verified against: ``requirement`` with its op-amps' open-band rule."""
    return requirement.criteria(finite_opamps=finite_opamps(plans), opamp_gbw_hz=slowest_gbw_hz(plans))


def circuit_roots(plans: list[StagePlan], values: dict | None = None, *, ideal: bool = False) -> RootSet:
    """Zeros, poles and gain of the whole filter: :func:`service.realization.analysis.design_roots`."""
    return design_roots(plans, values, ideal=ideal)


def section_roots(plans: list[StagePlan]) -> RootSet:
    """The exact standard-form sections the stages should realize, as one transfer function."""
    zs, ps, k = [], [], 1.0
    for i, plan in enumerate(plans):
        z, p, g = section_zpk(plan.section, index=i)
        zs.append(z)
        ps.append(p)
        k *= g
    return RootSet.from_zpk(np.concatenate(zs), np.concatenate(ps), k)


@dataclass(frozen=True)
class DesignVerdict:
    """A design's verdict with the cause of each miss.

    Attributes
    ----------
    verdict : Verdict
        Of the circuit with its parts and op-amp models.
    causes : tuple of (str or None)
        Per segment, why it misses (None where met).
    instability : str or None
        Why the circuit is unstable, when it is.
    """

    verdict: Verdict
    causes: tuple[str | None, ...] = ()
    instability: str | None = None
    warnings: tuple[DesignWarning, ...] = field(default_factory=tuple)

    @property
    def meets(self) -> bool:
        return self.verdict.meets

    def as_dict(self) -> dict:
        d = self.verdict.as_dict()
        causes = self.causes or (None,) * len(d["segments"])
        for seg, cause in zip(d["segments"], causes):
            seg["cause"] = cause
        for p in d["stability"]["unstable_poles"]:
            p["stage"] = p["group"] + 1 if p["group"] >= 0 else None
        d["stability"]["cause"] = self.instability
        d["rules"] = {"reference": REFERENCE_GAIN_RULE, "open_bands": OPEN_BAND_RULE, "numerical_tolerance_db": 1e-9,
                      "method": "whole-band branch-and-bound with interval bounds from the circuit's poles and zeros"}
        return d


def verify_design(plans: list[StagePlan], requirement: Requirement) -> DesignVerdict:
    """Verify the circuit of ``plans`` against ``requirement`` (by specification) and explain each miss."""
    finite = finite_opamps(plans)
    criteria = design_criteria(requirement, plans)
    roots = circuit_roots(plans)
    verdict = verify(roots, criteria).verdict()
    if verdict.meets:
        return DesignVerdict(verdict, tuple(None for _ in verdict.segments), None,
                             tuple(_ended_warnings(verdict, plans)))
    ideal_v = verify(circuit_roots(plans, ideal=True), requirement.criteria(finite_opamps=False)).verdict() \
        if finite else verdict
    exact_v = verify(section_roots(plans), requirement.criteria(finite_opamps=False)).verdict()
    instability = None
    warnings: list[DesignWarning] = []
    if not verdict.stable:
        instability = _instability(verdict, ideal_v, plans)
        for stage, message in _unstable_stages(verdict, plans, ideal_v.stable):
            warnings.append(DesignWarning("unstable", message, stage=stage))
        return DesignVerdict(verdict, (), instability, tuple(warnings))
    causes = []
    for i, seg in enumerate(verdict.segments):
        if seg.met:
            causes.append(None)
            continue
        cause = _cause(i, exact_v, ideal_v, finite)
        causes.append(cause)
        lim = seg.limit
        what = "loss" if lim.band is Band.PASSBAND else "attenuation"
        bound = "at most" if lim.band is Band.PASSBAND else "at least"
        warnings.append(DesignWarning(
            "requirement_missed",
            f"{lim.band.value} {_span(lim.start_hz, seg.checked_to_hz)}: {what} {seg.loss_db:.4g} dB at "
            f"{_hz(seg.worst_hz)} against {bound} {lim.limit_db:.4g} dB: {-seg.margin_db:.3g} dB short; "
            f"cause: {cause}"))
    if verdict.delay is not None and not verdict.delay.met:
        d = verdict.delay
        warnings.append(DesignWarning(
            "group_delay_missed",
            f"the group delay deviates {d.deviation_pct:.4g} % from its DC value at {_hz(d.worst_hz)}, against "
            f"at most {d.limit.max_deviation_pct:.4g} % up to {_hz(d.limit.stop_hz)}"))
    if verdict.status == "unproved":
        worst = min(verdict.segments, key=lambda s: s.margin_db)
        warnings.append(DesignWarning(
            "unproved", f"the margin of the {worst.limit.band.value} {_span(worst.limit.start_hz, worst.checked_to_hz)} "
                        f"could be proved only to {worst.margin_db:.3g} dB ({worst.unresolved_db:.2g} dB unresolved)"))
    warnings += _ended_warnings(verdict, plans)
    return DesignVerdict(verdict, tuple(causes), None, tuple(warnings))


def _cause(i: int, exact_v: Verdict, ideal_v: Verdict, finite: bool) -> str:
    exact = exact_v.segments[i] if exact_v.stable and exact_v.segments else None
    ideal = ideal_v.segments[i] if ideal_v.stable and ideal_v.segments else None
    if exact is not None and not exact.met:
        return (f"the transfer function itself misses here ({exact.margin_db:.3g} dB with exact sections): more "
                "order or margin is needed")
    if ideal is not None and not ideal.met:
        return (f"part values snapped to what can be bought (with ideal op-amps the margin is "
                f"{ideal.margin_db:.3g} dB; with exact values {exact.margin_db:.3g} dB)" if exact is not None
                else "part values snapped to what can be bought")
    if finite:
        return (f"the op-amps' finite gain-bandwidth (with ideal op-amps the margin is "
                f"{ideal.margin_db:.3g} dB)" if ideal is not None else "the op-amps' finite gain-bandwidth")
    return "part values snapped to what can be bought"


def _instability(verdict: Verdict, ideal_v: Verdict, plans: list[StagePlan]) -> str:
    if ideal_v.stable:
        return "the op-amps' finite gain-bandwidth moves poles into the right half-plane (stable with ideal op-amps)"
    return "the circuit is unstable even with ideal op-amps (its part values)"


def _unstable_stages(verdict: Verdict, plans: list[StagePlan], stable_when_ideal: bool):
    by_stage: dict[int, list] = {}
    for p in verdict.unstable_poles:
        by_stage.setdefault(p.group, []).append(p)
    for group, poles in sorted(by_stage.items()):
        f = ", ".join(_hz(p.frequency_hz) for p in poles)
        if group < 0:
            yield None, (f"poles at {f} lie in the right half-plane with the op-amp models: the circuit oscillates; "
                         "no response figure of it meets anything")
            continue
        plan = plans[group]
        gbw = plan.opamps[0].gbw_hz if plan.opamps else None
        why = (f" with the op-amp's {format_quantity(gbw, 'Hz')} gain-bandwidth" if gbw and stable_when_ideal else "")
        yield group + 1, (f"stage {group + 1} ({plan.topology.name}, f0 {_hz(plan.section.f0_hz)}, Q "
                          f"{'-' if plan.section.q is None else format(plan.section.q, '.4g')}): poles at {f} lie in the right "
                          f"half-plane{why}: the stage oscillates; no response figure of this circuit meets anything")


def _ended_warnings(verdict: Verdict, plans: list[StagePlan]) -> list[DesignWarning]:
    out = []
    for seg in verdict.segments:
        if seg.ended_hz is None:
            continue
        gbws = [u.gbw_hz for p in plans for u in p.opamps if u.gbw_hz]
        out.append(DesignWarning(
            "passband_ends",
            f"the open passband from {_hz(seg.limit.start_hz)} ends at {_hz(seg.ended_hz)}, where the op-amps "
            f"(GBW {format_quantity(min(gbws), 'Hz') if gbws else '?'}) bring its loss to the allowed "
            f"{seg.limit.limit_db:.4g} dB; it was checked up to there, not to the default "
            f"{_hz(seg.limit.stop_hz)} (state passband_upper_hz to require more)"))
    return out


def _hz(f: float) -> str:
    return "infinity" if f is None or not math.isfinite(f) else format_quantity(f, "Hz")


def _span(lo: float, hi: float) -> str:
    return f"{_hz(lo)} to {_hz(hi)}"
