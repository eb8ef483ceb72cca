"""The design margin policy and gain handling: how much reserve a requirement design keeps, and where the gain goes.

Requirement designs are computed for a tighter requirement than asked, so
that part values snapped to a series (and the op-amps) still meet the
requirement as asked, which the verdict checks on the circuit:

- ``passband_margin_db`` (default a quarter of the ripple) less passband loss;
- ``stopband_margin_db`` (default 2 dB) more stopband loss.

Our own defaults (no published source): with them, E96/E12 designs of the
test requirements meet the requirement as asked with snapped values.  Set
both to 0 for the minimum order of /v1/approximations.

When a design misses, the design loop (``service.workflows.designing``)
widens the reserve of the band that missed by :func:`widened`: the passband
reserve by a quarter of the ripple up to :data:`MAX_PASSBAND_MARGIN_FRACTION`
of it, the stopband reserve by :data:`STOPBAND_MARGIN_STEP_DB` up to
:data:`MAX_STOPBAND_MARGIN_DB` (our own steps, no published source).
"""

from __future__ import annotations

import dataclasses

#: Default passband reserve, as a fraction of the passband ripple.
DEFAULT_PASSBAND_MARGIN_FRACTION = 0.25
#: Default stopband reserve (dB).
DEFAULT_STOPBAND_MARGIN_DB = 2.0


#: Largest passband reserve the design loop widens to, as a fraction of the ripple.
MAX_PASSBAND_MARGIN_FRACTION = 0.75
#: Step (dB) and largest value (dB) of the stopband reserve in the design loop.
STOPBAND_MARGIN_STEP_DB = 4.0
MAX_STOPBAND_MARGIN_DB = 14.0


def widened(ripple_db: float, passband_db: float, stopband_db: float, *, passband_missed: bool,
            stopband_missed: bool) -> tuple[float, float]:
    """The next, wider reserves (dB) for the bands that missed; the same values when they cannot widen."""
    pb, sb = passband_db, stopband_db
    if passband_missed:
        pb = min(MAX_PASSBAND_MARGIN_FRACTION * ripple_db, passband_db + DEFAULT_PASSBAND_MARGIN_FRACTION * ripple_db)
        pb = max(pb, passband_db)
    if stopband_missed:
        sb = max(stopband_db, min(MAX_STOPBAND_MARGIN_DB, stopband_db + STOPBAND_MARGIN_STEP_DB))
    return pb, sb


def passband_margin(ripple_db: float, asked: float | None) -> float:
    """The passband reserve (dB): ``asked``, or the default fraction of the ripple."""
    return DEFAULT_PASSBAND_MARGIN_FRACTION * ripple_db if asked is None else float(asked)


def stopband_margin(asked: float | None) -> float:
    """The stopband reserve (dB): ``asked`` or the default."""
    return DEFAULT_STOPBAND_MARGIN_DB if asked is None else float(asked)


def with_gain(approximation, gain: float):
    """``approximation`` scaled by an overall passband ``gain`` (V/V), carried by its last section
    (realization distributes the total over the stages)."""
    if gain == 1.0 or not approximation.sections:
        return approximation
    sections = list(approximation.sections)
    sections[-1] = dataclasses.replace(sections[-1], gain=sections[-1].gain * gain)
    return dataclasses.replace(approximation, gain=approximation.gain * gain, sections=sections)
