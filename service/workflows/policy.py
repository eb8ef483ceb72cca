"""The design margin policy and gain handling: how much reserve a requirement design keeps, and where the gain goes.

Requirement designs are computed for a tighter requirement than asked, so
that part values snapped to a series (and the op-amps) still meet the
requirement as asked, which the verdict checks on the circuit:

- ``passband_margin_db`` (default a quarter of the ripple) less passband loss;
- ``stopband_margin_db`` (default 2 dB) more stopband loss.

Our own defaults (no published source): with them, E96/E12 designs of the
test requirements meet the requirement as asked with snapped values.  Set
both to 0 for the minimum order of /v1/approximations.
"""

from __future__ import annotations

import dataclasses

#: Default passband reserve, as a fraction of the passband ripple.
DEFAULT_PASSBAND_MARGIN_FRACTION = 0.25
#: Default stopband reserve (dB).
DEFAULT_STOPBAND_MARGIN_DB = 2.0


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
