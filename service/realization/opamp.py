"""The caller's op-amp and what each stage asks of it.

Two figures per stage:

- gain-bandwidth product.  The rule of thumb of the trade is
  ``GBW >= 100 * |G| * Q * f0`` for about 1 % error in f0 and Q [1]_ (from
  memory); scaled here to a stated error ``e`` as ``GBW >= |G| * Q * f0 / e``.
  The exact figure is the smallest GBW for which the single-pole macromodel
  (``A(s) = A0 / (1 + s*A0/(2*pi*GBW))``) keeps the stage's f0 and Q within
  ``e``; :func:`required_gbw` finds it with the circuit engine by a
  log-log secant search bracketed by bisection.
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
from typing import Callable

import numpy as np

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


def _model_gbw(g1, d1, g2, d2, error):
    """Smallest GBW with every ``|a_i + b_i/g| <= error`` for the line through two probes.

    ``d1``, ``d2`` : signed errors (ndarray) at GBW ``g1`` and ``g2`` (Hz).
    Returns inf when the floor ``a_i`` alone breaks the limit.
    """
    if g2 is None:
        a = np.zeros_like(d1)
        b = d1 * g1
    else:
        b = (d1 - d2) / (1.0 / g1 - 1.0 / g2)
        a = d1 - b / g1
    need = 0.0
    for ai, bi in zip(a, b):
        if abs(ai) >= error:
            return math.inf
        if bi > 0:
            need = max(need, bi / (error - ai))
        elif bi < 0:
            need = max(need, -bi / (error + ai))
    return need


def required_gbw(errors_at: Callable[[float], np.ndarray], error: float, start_hz: float, *,
                 max_iter: int = 6, rtol: float = 0.02) -> float | None:
    """Smallest GBW (Hz) with every signed error of ``errors_at(gbw)`` within ``error``.

    Parameters
    ----------
    errors_at : callable
        ``gbw_hz -> ndarray`` of the stage's signed relative f0 and Q errors
        with the macromodel (against the ideal-op-amp figures).
    error : float
        Allowed error (0.01 = 1 %).
    start_hz : float
        First probe (the rule of thumb).

    Returns
    -------
    float or None
        The GBW: either a probe whose errors lie within ``[1 - rtol, 1]`` of
        ``error``, or the line's boundary when a probe no more than
        ``4*rtol`` above it meets the error (the boundary is then bracketed
        between the two), or None
        when no GBW up to 1e4 times the probe meets ``error`` (an open-loop
        gain floor).

    Notes
    -----
    Well above the stage's frequencies each error of a stage with a
    single-pole op-amp is, to first order in 1/GBW, ``a + b/GBW`` (``a`` the
    floor set by the open-loop DC gain); Schaumann and Van Valkenburg, "Design
    of Analog Filters", 2001, sec. 4.6 (active compensation and the effect of
    GBW on f0 and Q).  Each step fits that line through the last two probes and
    probes its answer; two circuit solutions usually settle it.
    """
    g_prev, d_prev = start_hz, np.asarray(errors_at(start_hz), dtype=float)
    # First step: the floor taken as zero, aimed a little inside the boundary.
    g_next = _model_gbw(g_prev, d_prev, None, None, error) * (1 + 2 * rtol)
    if not math.isfinite(g_next) or g_next <= 0:
        g_next = start_hz * 2
    best_ok = g_prev if np.max(np.abs(d_prev)) <= error else None
    for _ in range(max_iter):
        g_next = min(max(g_next, start_hz * 1e-4), start_hz * 1e4)
        d_next = np.asarray(errors_at(g_next), dtype=float)
        worst = float(np.max(np.abs(d_next)))
        if worst <= error:
            best_ok = g_next if best_ok is None else min(best_ok, g_next)
            if worst >= error * (1 - rtol):
                return g_next
        g_new = _model_gbw(g_prev, d_prev, g_next, d_next, error) if g_next != g_prev else math.inf
        if worst <= error and math.isfinite(g_new) and g_new <= g_next <= g_new * (1 + 4 * rtol):
            # The line through two solutions puts the boundary just below a probe that
            # meets the error: the boundary lies in [g_new, g_next]; report the model's.
            return g_new * (1 + rtol / 10)
        g_prev, d_prev = g_next, d_next
        if not math.isfinite(g_new):
            if g_next >= start_hz * 1e4:
                return best_ok
            g_new = g_next * 10
        elif worst > error and g_new <= g_next:
            g_new = g_next * (1 + 2 * rtol)
        if abs(g_new / g_next - 1) < rtol / 4:
            g_new = g_next * (1 + rtol / 2) if worst > error else g_next
            if worst <= error:
                return g_next
        g_next = g_new
    return best_ok
