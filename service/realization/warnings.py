"""Cautions about a realized design (``warnings`` of the design document).

Codes (stable, public); every warning about one stage carries its number (from 1) in ``stage`` and in
the message, with the value and the limit it breaks:

- ``high_k_dielectric``: an X7R/X5R/Y5V/Z5U ceramic sets a frequency; class 2
  and 3 ceramics change capacitance with DC bias, temperature and age
  (IEC 60384-9 / EIA-198 temperature characteristics; common practice).
- ``part_out_of_range``: a part had to go outside the caller's range.
- ``high_q_single_opamp``: Q above about 20 in a single-op-amp topology, whose
  Q sensitivity to parts and op-amp gain grows with Q (common practice).
- ``opamp_gbw_short``, ``opamp_slew_short``, ``opamp_swing_short``: the given
  op-amp falls short of what the stage needs.
- ``stage_peaking``: an intermediate output peaks more than the margin above
  the filter's output level (clipping risk).
- ``gain_mismatch``, ``inverting``: the cascade's gain differs from the one
  asked for, or the output is inverted.
- ``mains_connection``: a notch or bandstop aimed at mains frequencies.
- ``stage_topology_raised``: ``topology: "auto"`` gave a stage more op-amps than its
  fewest, because the part choices with the fewest left the whole filter short of
  its requirement (:func:`service.realization.design.design_filter`).
"""

from __future__ import annotations

import math

from service.approximation.types import SectionKind
from service.realization.parts import HIGH_K_DIELECTRICS
from service.realization.results import DesignWarning
from service.units import format_quantity

#: Q above which a single-op-amp section is flagged (common practice).
HIGH_Q_SINGLE_OPAMP = 20.0
#: Mains frequencies (Hz), harmonics considered, and the relative closeness that counts.
MAINS_HZ = (50.0, 60.0)
MAINS_HARMONICS = 5
MAINS_CLOSENESS = 0.05

MAINS_MESSAGE = (
    "this filter is aimed at mains interference ({what}); the circuit must not be connected to mains: "
    "follow local electrical codes and licensed practice for anything mains-connected "
    "(this is a sensor-side filter only)"
)


def _near_mains(f_hz: float) -> float | None:
    for base in MAINS_HZ:
        for h in range(1, MAINS_HARMONICS + 1):
            if abs(f_hz / (base * h) - 1) <= MAINS_CLOSENESS:
                return base * h
    return None


def _fmt(x: float, unit: str) -> str:
    return f"{x:.4g} {unit}"


def collect_warnings(design, plans, notes, stopbands_hz=()) -> list[DesignWarning]:
    """All cautions of ``design`` (the :class:`Design` being assembled); stage numbers from 1.

    ``stopbands_hz`` lists the requirement's stopbands ``(low, high)`` (Hz), for the mains caution.
    """
    out: list[DesignWarning] = list(notes)
    margin_db = float(design.options.stage_peak_margin_db)
    n = len(design.stages)
    for st, plan in zip(design.stages, plans):
        k = st.index + 1
        hk = [c.ref for c in st.components
              if c.kind == "capacitor" and c.dielectric and c.dielectric.strip().upper() in HIGH_K_DIELECTRICS]
        if hk:
            out.append(DesignWarning(
                "high_k_dielectric",
                f"stage {k}: {', '.join(hk)} use a high-permittivity ceramic dielectric in a frequency-setting "
                "position; its capacitance moves with applied voltage and temperature. Prefer C0G/NP0 or film.",
                stage=k))
        out_r = [c for c in st.components if not c.in_range]
        if out_r:
            rng = design.part_ranges
            unit = {"resistor": "ohm", "capacitor": "F"}
            parts = "; ".join(
                f"{c.ref} = {format_quantity(c.value, unit[c.kind])}"
                + (f" outside {format_quantity(rng[c.kind][0], unit[c.kind])} to "
                   f"{format_quantity(rng[c.kind][1], unit[c.kind])}" if c.kind in rng else "")
                for c in out_r)
            out.append(DesignWarning(
                "part_out_of_range",
                f"stage {k}: {parts} (the allowed {', '.join(sorted({c.kind for c in out_r}))} range)", stage=k))
        n_opamps = len(plan.topology.opamp_roles(plan.section, plan.strategy))
        if st.section.q is not None and st.section.q > HIGH_Q_SINGLE_OPAMP and n_opamps == 1:
            out.append(DesignWarning(
                "high_q_single_opamp",
                f"stage {k}: Q = {st.section.q:.3g} in the single-op-amp {st.topology} topology; above about "
                f"{HIGH_Q_SINGLE_OPAMP:g} its Q is very sensitive to part values and op-amp gain. "
                "Consider a state-variable or Tow-Thomas stage.", stage=k))
        req = st.opamp_requirement
        for u in st.opamps[:1]:
            if u.gbw_hz is None:
                continue
            if req.gbw_required_hz is None:
                out.append(DesignWarning(
                    "opamp_gbw_short",
                    f"stage {k}: no gain-bandwidth product keeps f0 and Q within {req.error:.3g} with the given "
                    "open-loop gain", stage=k))
            elif u.gbw_hz < req.gbw_required_hz:
                out.append(DesignWarning(
                    "opamp_gbw_short",
                    f"stage {k}: the op-amp's GBW {_fmt(u.gbw_hz, 'Hz')} is below the "
                    f"{_fmt(req.gbw_required_hz, 'Hz')} needed for {100 * req.error:.3g} % f0/Q error; "
                    f"with it the stage reaches f0 error {100 * st.achieved_macromodel['f0_error']:.3g} %"
                    + (f", Q error {100 * st.achieved_macromodel['q_error']:.3g} %"
                       if st.achieved_macromodel.get("q_error") is not None else ""),
                    stage=k))
            if u.slew_v_per_us is not None and u.slew_v_per_us < req.slew_required_v_per_us:
                out.append(DesignWarning(
                    "opamp_slew_short",
                    f"stage {k}: slew rate {u.slew_v_per_us:.3g} V/us is below the "
                    f"{req.slew_required_v_per_us:.3g} V/us a {req.output_peak_v:.3g} V peak output needs at "
                    f"{_fmt(req.signal_frequency_hz, 'Hz')}", stage=k))
            if u.output_swing_v is not None and u.output_swing_v < req.output_peak_v:
                out.append(DesignWarning(
                    "opamp_swing_short",
                    f"stage {k}: the output peaks at {req.output_peak_v:.3g} V, beyond the op-amp's "
                    f"{u.output_swing_v:.3g} V swing", stage=k))
        if st.index < n - 1 and st.peak_gain_db > design.output_peak_gain_db + margin_db + 1e-6:
            out.append(DesignWarning(
                "stage_peaking",
                f"stage {k}: its output peaks at {st.peak_gain_db:.2f} dB ({_fmt(st.peak_frequency_hz, 'Hz')}), "
                f"{st.peak_gain_db - design.output_peak_gain_db:.2f} dB above the filter output "
                f"(margin {margin_db:g} dB); it clips first", stage=k))
        if st.section.kind == SectionKind.NOTCH:
            fz = st.section.fz_hz or st.section.f0_hz
            m = _near_mains(fz)
            if m is not None:
                out.append(DesignWarning(
                    "mains_connection",
                    MAINS_MESSAGE.format(what=f"stage {k} notches {_fmt(fz, 'Hz')}, near {m:g} Hz"),
                    stage=k))
    if design.response == "bandstop" and not any(w.code == "mains_connection" for w in out):
        bands = [(float(min(b)), float(max(b))) for b in stopbands_hz]
        hit = None
        for lo, hi in bands:
            for base in MAINS_HZ:
                for h in range(1, MAINS_HARMONICS + 1):
                    f = base * h
                    if lo * (1 - MAINS_CLOSENESS) <= f <= hi * (1 + MAINS_CLOSENESS):
                        hit = f
                        break
                if hit:
                    break
        if hit is None and not bands:
            centre = math.sqrt(min(s.f0_hz for s in (st.section for st in design.stages))
                               * max(s.f0_hz for s in (st.section for st in design.stages)))
            hit = _near_mains(centre)
        if hit is not None:
            out.append(DesignWarning("mains_connection",
                                     MAINS_MESSAGE.format(what=f"a bandstop around {hit:g} Hz")))
    if design.overall_gain < 0:
        out.append(DesignWarning("inverting", "the filter output is inverted (overall gain "
                                 f"{design.overall_gain:.4g}); inverting stages change its sign"))
    return out
