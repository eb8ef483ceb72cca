"""Option enums of the approximation layer (string values are the public option values)."""

from __future__ import annotations

from enum import Enum


class CutoffAt(str, Enum):
    """What ``cutoff_hz`` of an order-based design means."""

    FAMILY = "family"        # the family's natural edge (see ``family_info``)
    MINUS_3DB = "-3db"       # the half-power point, loss 10*log10(2) = 3.0103 dB


class SectionOrder(str, Enum):
    """Order of the sections in the cascade (one vocabulary for approximations and designs).

    ``as_computed`` keeps the order the sections were computed (or listed) in;
    ``max_dynamic_range`` is a design-time order (see
    :func:`service.realization.cascade.order_sections`); an approximation
    alone lists its sections by ascending Q for it.
    """

    ASCENDING_Q = "ascending_q"
    DESCENDING_Q = "descending_q"
    AS_COMPUTED = "as_computed"
    MAX_DYNAMIC_RANGE = "max_dynamic_range"


class Excess(str, Enum):
    """Where a requirement design places the excess selectivity of the integer order."""

    STOPBAND = "stopband"    # passband edge exactly at the ripple, margin in the stopband
    PASSBAND = "passband"    # stopband edge exactly at the attenuation, margin in the passband
    SPLIT = "split"          # frequency scale the geometric mean of the two
