"""What a verification checks: loss limits on frequency segments, a group-delay limit, the reference.

The segments of a requirement come from :meth:`service.workflows.Requirement.criteria`
(or a caller's listed mask); :func:`service.response.verification.verify` checks them.
Frequencies in Hz, losses in dB.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum

from service.response.errors import InvalidMask

TWO_PI = 2.0 * math.pi
NEPER_DB = 20.0 / math.log(10.0)

#: Margins within this of 0 dB are 0 (and met); also the precision of a proof near 0.
TOLERANCE_DB = 1e-9
#: Precision (dB) to which a clearly positive or negative worst margin is located.
PRECISION_DB = 1e-6
#: Delay margins within this of 0 percent are 0.
DELAY_TOLERANCE_PCT = 1e-9
#: Precision (percent) to which the largest delay deviation is located.
DELAY_PRECISION_PCT = 1e-6


class Band(str, Enum):
    """What a segment bounds: the largest loss (passband) or the smallest loss (stopband)."""

    PASSBAND = "passband"
    STOPBAND = "stopband"


@dataclass(frozen=True)
class LossLimit:
    """One segment of a requirement.

    Attributes
    ----------
    band : Band
    start_hz, stop_hz : float
        The segment, Hz, ``0 <= start < stop``; only a stopband may have ``stop = inf``.
    limit_db : float
        Largest allowed loss (passband) or smallest required loss (stopband), dB.
    open_end : bool
        ``stop_hz`` stands for the upper end of a band that is open in the
        requirement (a highpass passband, a bandstop's upper passband,
        a lowpass or bandpass upper stopband).
    ends_with_rolloff : bool
        A loss above the limit everywhere from some frequency up to
        ``stop_hz`` ends the segment there instead of failing it.
    rolloff_from_hz : float
        Lowest frequency (Hz) at which such a roll-off may end the segment: below it the
        limit holds whatever follows (0: anywhere).
    """

    band: Band
    start_hz: float
    stop_hz: float
    limit_db: float
    open_end: bool = False
    ends_with_rolloff: bool = False
    rolloff_from_hz: float = 0.0

    def __post_init__(self):
        start, stop, limit = float(self.start_hz), float(self.stop_hz), float(self.limit_db)
        band = Band(self.band)
        finite_stop = math.isfinite(stop) or (stop == math.inf and band is Band.STOPBAND)
        if not (math.isfinite(start) and start >= 0 and finite_stop and stop > start):
            raise InvalidMask(f"a segment needs 0 <= start_hz < stop_hz (a stopband may run to infinity), got "
                              f"[{start:g}, {stop:g}] Hz", field="mask.stop_hz")
        if not math.isfinite(limit):
            raise InvalidMask("a segment's loss limit must be finite", field="mask.limit_db")
        object.__setattr__(self, "band", band)
        object.__setattr__(self, "start_hz", start)
        object.__setattr__(self, "stop_hz", stop)
        object.__setattr__(self, "limit_db", limit)


@dataclass(frozen=True)
class DelayLimit:
    """``|tau(f) - tau(0)| <= max_deviation_pct/100 * tau(0)`` for ``0 <= f <= stop_hz``."""

    stop_hz: float
    max_deviation_pct: float

    def __post_init__(self):
        if not (math.isfinite(self.stop_hz) and self.stop_hz > 0):
            raise InvalidMask("the group-delay limit needs a positive frequency", field="group_delay.frequency_hz")
        if not (math.isfinite(self.max_deviation_pct) and self.max_deviation_pct > 0):
            raise InvalidMask("the group-delay deviation limit must be positive",
                              field="group_delay.max_deviation_pct")


@dataclass(frozen=True)
class Criteria:
    """Everything a verification checks."""

    limits: tuple[LossLimit, ...]
    delay: DelayLimit | None = None
    reference_gain_db: float | None = None

    def __post_init__(self):
        object.__setattr__(self, "limits", tuple(self.limits))
        if not self.limits and self.delay is None:
            raise InvalidMask("nothing to verify: no segment and no delay limit", field="mask")


__all__ = ["Band", "LossLimit", "DelayLimit", "Criteria", "TOLERANCE_DB", "PRECISION_DB",
           "DELAY_TOLERANCE_PCT", "DELAY_PRECISION_PCT", "TWO_PI", "NEPER_DB"]
