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

The caller may also state the part's input-referred noise (``en_nv_rthz``,
``in_pa_rthz`` and their 1/f corners), its DC errors (``vos_v``, ``ib_a``)
and how close its output swings to each rail (``rail_headroom_v``); they
enter the noise, DC and headroom analyses through :meth:`OpAmpSpec.sources`
(:class:`service.circuit.OpAmpSources`, SI units).

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

from service.circuit import OpAmpSources
from service.realization.errors import RealizationError

#: Largest accepted voltage noise density, nV/sqrt(Hz) (a microvolt per root hertz is no op-amp).
MAX_EN_NV_RTHZ = 1000.0
#: Largest accepted current noise density, pA/sqrt(Hz).
MAX_IN_PA_RTHZ = 1.0e5
#: Largest accepted 1/f corner, Hz.
MAX_CORNER_HZ = 1.0e6
#: Largest accepted offset voltage magnitude, V.
MAX_VOS_V = 0.1
#: Largest accepted bias current magnitude, A.
MAX_IB_A = 1.0e-3
#: Largest accepted output-to-rail headroom, V.
MAX_RAIL_HEADROOM_V = 10.0


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
    en_nv_rthz : float or None
        Input voltage noise density, nV/sqrt(Hz) (white part).
    in_pa_rthz : float or None
        Input current noise density at each input, pA/sqrt(Hz) (white part).
    en_corner_hz, in_corner_hz : float or None
        1/f corner frequencies of the voltage and current noise, Hz.
    vos_v : float or None
        Input offset voltage, V (sign as in series with the + input).
    ib_a : float or None
        Input bias current into each input, A.
    rail_headroom_v : float or None
        How close the output swings to each supply rail, V (0: rail to rail).
    """

    gbw_hz: float
    slew_v_per_us: float | None = None
    a0_db: float | None = None
    output_swing_v: float | None = None
    supply_v: float | None = None
    rout_ohm: float = 0.0
    part_id: str | None = None
    en_nv_rthz: float | None = None
    in_pa_rthz: float | None = None
    en_corner_hz: float | None = None
    in_corner_hz: float | None = None
    vos_v: float | None = None
    ib_a: float | None = None
    rail_headroom_v: float | None = None

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
        check_figures(self, "opamp")

    def sources(self) -> OpAmpSources | None:
        """The part's input-referred sources in SI units (None when none is given)."""
        return sources_of(self)

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
        known = {"gbw_hz", "slew_v_per_us", "a0_db", "output_swing_v", "supply_v", "rout_ohm", "part_id",
                 *FIGURES}
        unknown = set(data) - known
        if unknown:
            name = sorted(unknown)[0]
            raise RealizationError(f"unknown op-amp field {name!r}", field=f"opamp.{name}")
        if data.get("gbw_hz") is None:
            raise RealizationError("opamp.gbw_hz is required when an op-amp is given", field="opamp.gbw_hz")
        if data.get("rout_ohm") is None:
            data.pop("rout_ohm", None)
        return cls(**data)


#: Noise, DC and swing figures an op-amp entry may carry: name -> (lowest, highest, sign free).
FIGURES = {
    "en_nv_rthz": (0.0, MAX_EN_NV_RTHZ, False),
    "in_pa_rthz": (0.0, MAX_IN_PA_RTHZ, False),
    "en_corner_hz": (0.0, MAX_CORNER_HZ, False),
    "in_corner_hz": (0.0, MAX_CORNER_HZ, False),
    "vos_v": (0.0, MAX_VOS_V, True),
    "ib_a": (0.0, MAX_IB_A, True),
    "rail_headroom_v": (0.0, MAX_RAIL_HEADROOM_V, False),
}

_UNITS = {"en_nv_rthz": "nV/sqrt(Hz)", "in_pa_rthz": "pA/sqrt(Hz)", "en_corner_hz": "Hz", "in_corner_hz": "Hz",
          "vos_v": "V", "ib_a": "A", "rail_headroom_v": "V"}


def check_figures(entry, prefix: str) -> None:
    """Raise :class:`RealizationError` (``field=f"{prefix}.<name>"``) for a noise, DC or swing figure out of range.

    ``entry`` is an :class:`OpAmpSpec` or :class:`~service.realization.results.OpAmpUse`
    (any object with the attributes of :data:`FIGURES`; None means not given).
    """
    for name, (lo, hi, signed) in FIGURES.items():
        v = getattr(entry, name, None)
        if v is None:
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise RealizationError(f"{prefix}.{name} must be a finite number ({_UNITS[name]})",
                                   field=f"{prefix}.{name}")
        mag = abs(v) if signed else v
        if mag < lo or mag > hi:
            what = "magnitude " if signed else ""
            raise RealizationError(
                f"{prefix}.{name} {what}must lie between {lo:g} and {hi:g} {_UNITS[name]}, got {v!r}",
                field=f"{prefix}.{name}")


def sources_of(entry) -> OpAmpSources | None:
    """:class:`OpAmpSources` (SI) of an op-amp entry's figures; None when it gives no noise or DC figure."""
    names = ("en_nv_rthz", "in_pa_rthz", "en_corner_hz", "in_corner_hz", "vos_v", "ib_a")
    if all(getattr(entry, n, None) is None for n in names):
        return None

    def get(n):
        v = getattr(entry, n, None)
        return 0.0 if v is None else float(v)

    return OpAmpSources(en_v_rthz=get("en_nv_rthz") * 1e-9, in_a_rthz=get("in_pa_rthz") * 1e-12,
                        en_corner_hz=get("en_corner_hz"), in_corner_hz=get("in_corner_hz"),
                        vos_v=get("vos_v"), ib_a=get("ib_a"))


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
