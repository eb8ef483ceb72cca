"""The caller's op-amp and what each stage asks of it.

Two figures per stage:

- gain-bandwidth product.  The rule of thumb of the trade is
  ``GBW >= 100 * |G| * Q * f0`` for about 1 % error in f0 and Q [1]_ (from
  memory); scaled here to a stated error ``e`` as ``GBW >= |G| * Q * f0 / e``.
  The exact figure is the smallest GBW for which the single-pole macromodel
  (``A(s) = A0 / (1 + s*A0/(2*pi*GBW))``) keeps the stage's f0 and Q within
  ``e``; :func:`service.realization.gbw.required_gbw_sweep` finds it with the
  circuit engine by a vectorized sweep.
- slew rate.  A sine of peak ``V`` at ``f`` needs ``SR >= 2*pi*f*V`` [2]_
  (common practice), evaluated at the highest frequency where the stage output
  still carries signal.

References
----------
.. [1] R. Mancini (ed.), "Op Amps for Everyone", Texas Instruments, 2002,
       ch. 16 "Active Filter Design Techniques" (rule of thumb, from memory).
.. [2] P. Horowitz and W. Hill, "The Art of Electronics", 3rd ed., 2015,
       sec. 4.9 (slew rate and full-power bandwidth), from memory.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from service.realization.errors import RealizationError


@dataclass(frozen=True)
class OpAmpSpec:
    """An op-amp the caller intends to use (one part for every position).

    Attributes
    ----------
    gbw_hz : float
        Gain-bandwidth product (Hz).
    slew_v_per_us : float or None
        Slew rate (V/us).
    a0_db : float or None
        Open-loop DC gain (dB); None takes 100 dB in the macromodel.
    output_swing_v : float or None
        Peak output voltage the part can drive (V).
    supply_v : float or None
        Total supply voltage (V), reported only.
    rout_ohm : float
        Open-loop output resistance of the macromodel (ohm).
    part_id : str or None
        The caller's identifier, returned on the BOM line.
    """

    gbw_hz: float
    slew_v_per_us: float | None = None
    a0_db: float | None = None
    output_swing_v: float | None = None
    supply_v: float | None = None
    rout_ohm: float = 0.0
    part_id: str | None = None

    def __post_init__(self):
        if not (math.isfinite(self.gbw_hz) and self.gbw_hz > 0):
            raise RealizationError("opamp.gbw_hz must be a positive number of hertz", field="opamp.gbw_hz")
        if self.slew_v_per_us is not None and not self.slew_v_per_us > 0:
            raise RealizationError("opamp.slew_v_per_us must be positive", field="opamp.slew_v_per_us")
        if self.a0_db is not None and not self.a0_db > 0:
            raise RealizationError("opamp.a0_db must be positive", field="opamp.a0_db")
        if self.output_swing_v is not None and not self.output_swing_v > 0:
            raise RealizationError("opamp.output_swing_v must be positive", field="opamp.output_swing_v")
        if not self.rout_ohm >= 0:
            raise RealizationError("opamp.rout_ohm must not be negative", field="opamp.rout_ohm")

    @property
    def a0(self) -> float:
        """Open-loop DC gain as a ratio (100 dB when not given)."""
        return 10 ** ((DEFAULT_A0_DB if self.a0_db is None else self.a0_db) / 20)

    @classmethod
    def from_dict(cls, data) -> "OpAmpSpec | None":
        """Build from the plain ``opamp`` field of a request (None stays None)."""
        if data is None or isinstance(data, OpAmpSpec):
            return data
        data = dict(data)
        known = {"gbw_hz", "slew_v_per_us", "a0_db", "output_swing_v", "supply_v", "rout_ohm", "part_id"}
        unknown = set(data) - known
        if unknown:
            name = sorted(unknown)[0]
            raise RealizationError(f"unknown op-amp field {name!r}", field=f"opamp.{name}")
        if data.get("gbw_hz") is None:
            raise RealizationError("opamp.gbw_hz is required when an op-amp is given", field="opamp.gbw_hz")
        if data.get("rout_ohm") is None:
            data.pop("rout_ohm", None)
        return cls(**data)


#: Open-loop gain the macromodel uses when the caller gives none (dB).
DEFAULT_A0_DB = 100.0

RULE_OF_THUMB = (
    "GBW >= |G|*Q*f0/error (100*|G|*Q*f0 for 1 % error): rule of thumb, "
    "R. Mancini, Op Amps for Everyone, TI 2002, ch. 16 (from memory)"
)
SLEW_RULE = "SR >= 2*pi*f*Vpeak at the highest frequency the stage passes (common practice)"


def gbw_rule_of_thumb(gain: float, q: float | None, f0_hz: float, error: float) -> float:
    """GBW (Hz) by the rule of thumb ``|G| * Q * f0 / error`` [1]_.

    ``|G|`` is taken as at least 1 (a follower still has noise gain 1) and a
    first-order section counts as Q = 1.
    """
    return max(abs(gain), 1.0) * max(q or 1.0, 1.0) * f0_hz / error


def slew_required(frequency_hz: float, peak_v: float) -> float:
    """Slew rate (V/us) a sine of ``peak_v`` volts at ``frequency_hz`` needs [2]_."""
    return 2 * math.pi * frequency_hz * peak_v * 1e-6
