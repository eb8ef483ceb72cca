"""Whether a stage's part values describe a stage the engine can analyse.

A design document may be edited by hand: a value typed in the wrong unit
(1e12 F for 1 nF, 1e-15 ohm for 1 kohm) moves the stage's poles by many
decades from the section the stage is meant to realize. The analysis that
follows (op-amp macromodel poles by a shift-and-invert eigenproblem around
the section's f0, gains on a grid around the sections) is then ill-conditioned
in double precision. Such a stage is refused here, with the part values named,
before the analysis starts: its poles (ideal op-amps, from the circuit engine)
must be finite, as many as the section's order, and within
:data:`POLE_SPAN` of the section's natural frequency.

A realized design, or one with values swapped for stock parts, has its poles
within a few percent of the section; the span is a bound on nonsense, not a
tolerance.
"""

from __future__ import annotations

import math

import numpy as np

from service.realization.errors import InvalidDocument

#: Largest ratio between a stage's pole frequencies and its section's f0 (either way).
POLE_SPAN = 1e3
#: The likely cause of such a stage in an edited document.
UNIT_HINT = "a value is probably in the wrong unit (ohm, F)"


def check_stage_poles(plans, zpks, *, root: str = "design") -> None:
    """Raise :class:`InvalidDocument` for the first stage whose poles are not where its section says.

    Parameters
    ----------
    plans : sequence of StagePlan
        The stages, in cascade order (``plan.section``: the target section).
    zpks : sequence of (zeros, poles, gain)
        Each stage's transfer function with ideal op-amps (rad/s), as
        :func:`service.circuit.transfer_function_zpk` returns it.
    root : str
        Field path of the document (``"design"``).
    """
    for k, (plan, (zeros, poles, gain)) in enumerate(zip(plans, zpks)):
        section = plan.section
        w0 = 2.0 * math.pi * float(section.f0_hz)
        p = np.asarray(poles, dtype=complex)
        z = np.asarray(zeros, dtype=complex)
        mags = np.abs(p)
        finite = bool(np.all(np.isfinite(p)) and np.all(np.isfinite(z)) and math.isfinite(float(np.real(gain))))
        order_ok = p.size >= int(section.order)
        in_span = bool(mags.size and np.all(mags <= w0 * POLE_SPAN) and np.all(mags >= w0 / POLE_SPAN))
        if finite and order_ok and in_span:
            continue
        values = ", ".join(f"{c.ref} = {c.value:.4g}" for c in plan.components)
        if finite and mags.size:
            where = (f"its poles lie at {mags.min() / (2 * math.pi):.4g} to {mags.max() / (2 * math.pi):.4g} Hz"
                     if order_ok else f"it has {p.size} poles for a section of order {section.order}")
        else:
            where = "its transfer function cannot be computed (poles at 0 or infinity)"
        raise InvalidDocument(
            f"stage {k + 1}: with these part values ({values}) {where}, not within a factor {POLE_SPAN:g} of its "
            f"section's f0_hz = {section.f0_hz:.6g}; {UNIT_HINT}",
            field=f"{root}.stages[{k}].components" if root else f"stages[{k}].components")


def check_plans(plans, *, root: str = "design") -> None:
    """:func:`check_stage_poles` with each stage's ideal-op-amp transfer function computed here."""
    from service.circuit import transfer_function_zpk
    from service.realization.analysis import stage_circuit

    check_stage_poles(plans, [transfer_function_zpk(stage_circuit(p, None), output="out") for p in plans], root=root)


__all__ = ["POLE_SPAN", "check_plans", "check_stage_poles"]
