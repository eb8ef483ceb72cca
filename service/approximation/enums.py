"""Option enums of the approximation layer (string values are the public option values)."""

from __future__ import annotations

from enum import Enum


class CutoffAt(str, Enum):
    """What ``cutoff_hz`` of an order-based design means."""

    FAMILY = "family"        # the family's natural edge (see ``family_info``)
    MINUS_3DB = "-3db"       # the half-power point, loss 10*log10(2) = 3.0103 dB


class SectionOrder(str, Enum):
    """Order of the sections in the cascade."""

    ASCENDING_Q = "ascending_q"
    DESCENDING_Q = "descending_q"
    AS_COMPUTED = "as_computed"


class Excess(str, Enum):
    """Where a requirement design places the excess selectivity of the integer order."""

    STOPBAND = "stopband"    # passband edge exactly at the ripple, margin in the stopband
    PASSBAND = "passband"    # stopband edge exactly at the attenuation, margin in the passband
    SPLIT = "split"          # frequency scale the geometric mean of the two
