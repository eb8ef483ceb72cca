"""The requirement: what a filter must do, read once and owned here.

A :class:`Requirement` is either *by order* (``order`` + ``cutoff_hz``: a
transfer function to realize, nothing to verify) or *by specification*
(``passband_hz`` + ``stopband_hz`` + ``passband_ripple_db`` +
``stopband_attenuation_db``, optionally ``passband_upper_hz`` and a
``group_delay`` limit): then it also says what "meets" means, through
:meth:`Requirement.criteria`.  Every request that carries a requirement
(approximations, designs, a design document's ``requirement``, response
masks) is read into this one type; its rules live here and in
:mod:`service.approximation.validation`, nowhere else.

The verification rule (stated in the catalog and the OpenAPI description):

- loss is measured from the largest gain over the passband segments (DC
  included where a passband starts at 0 Hz);
- passbands are checked from their lower to their upper edge; an open
  passband (a highpass's, a bandstop's upper one) up to ``passband_upper_hz``
  -- default :data:`OPEN_PASSBAND_FACTOR` times its edge.  When that frequency
  is the default and the op-amps are real, a roll-off that exceeds the allowed
  ripple from some frequency all the way up to it ends the passband there: a
  reported figure, not a failure.  A stated ``passband_upper_hz`` is checked
  as stated;
- stopbands are checked on the whole of them, open ones up to infinity;
- a ``group_delay`` limit bounds the deviation from the DC delay up to its
  frequency.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

from service.approximation import CutoffAt, Excess, Family, GroupDelayLimit, ResponseType, SectionOrder
from service.approximation import validation as V
from service.errors import RolloffError
from service.response.verification import Band, Criteria, DelayLimit, LossLimit
from service.workflows.errors import RequirementError
from service.workflows.reading import Fields, join

#: Default upper end of an open passband, as a multiple of its edge.
OPEN_PASSBAND_FACTOR = 10.0
#: With real op-amps, an open passband (default upper end) is held to its ripple at least up to the slowest
#: op-amp's GBW divided by this: a common-practice bandwidth rule (a single-pole op-amp used at a twentieth of
#: its GBW keeps most of its loop gain), our own choice of factor, no published source.
OPAMP_BANDWIDTH_FACTOR = 20.0

#: The keys of a requirement object (JSON), in the order they are written.
FIELDS = ("response", "family", "order", "cutoff_hz", "cutoff_at", "passband_hz", "stopband_hz",
          "passband_ripple_db", "stopband_attenuation_db", "passband_upper_hz", "group_delay", "excess",
          "section_order")

REFERENCE_GAIN_RULE = ("loss is measured in dB below the largest gain over the passband segments (DC included "
                       "where a passband starts at 0 Hz)")
OPEN_BAND_RULE = (f"an open passband is checked up to passband_upper_hz (default {OPEN_PASSBAND_FACTOR:g} x its "
                  "edge); with real op-amps and the default, the op-amps' roll-off may end it (reported as ended_hz, "
                  "with a warning, not a failure) where the loss exceeds the ripple from some frequency up to that "
                  "limit, but not below the slowest op-amp's GBW / "
                  f"{OPAMP_BANDWIDTH_FACTOR:g}: up to there the ripple must hold; stopbands are checked up to "
                  "infinity")

Edge = float | tuple[float, float]


def _prefixed(exc: RolloffError, path: str) -> RolloffError:
    """``exc`` with its field put under ``path``."""
    if path:
        exc.field = join(path, exc.field) if exc.field else path
    return exc


@dataclass(frozen=True)
class Requirement:
    """A filter requirement, by order or by specification (see the module notes).

    Attributes
    ----------
    response : ResponseType
    family : Family or None
        None only where no approximation is asked for (a response mask).
    order : int or None
        By order: the prototype order.
    cutoff_hz : float or (float, float) or None
        By order: the cutoff (Hz), a pair for band responses.
    cutoff_at : CutoffAt
    passband_hz, stopband_hz : float or (float, float) or None
        By specification: the band edges (Hz).
    passband_ripple_db, stopband_attenuation_db : float or None
        Largest passband loss, smallest stopband loss (dB); by order, the
        shape parameters of the families that use them.
    passband_upper_hz : float or None
        Upper end (Hz) of an open passband (highpass, bandstop) as stated;
        None for the default (:attr:`open_passband_upper_hz`).
    group_delay : GroupDelayLimit or None
        Bessel lowpass by specification: a limit on the delay's deviation from DC.
    excess : Excess
    section_order : SectionOrder
    """

    response: ResponseType
    family: Family | None = None
    order: int | None = None
    cutoff_hz: Edge | None = None
    cutoff_at: CutoffAt = CutoffAt.FAMILY
    passband_hz: Edge | None = None
    stopband_hz: Edge | None = None
    passband_ripple_db: float | None = None
    stopband_attenuation_db: float | None = None
    passband_upper_hz: float | None = None
    group_delay: GroupDelayLimit | None = None
    excess: Excess = Excess.STOPBAND
    section_order: SectionOrder = SectionOrder.ASCENDING_Q

    def __post_init__(self):
        rt = V.as_response(self.response)
        object.__setattr__(self, "response", rt)
        if self.family is not None:
            object.__setattr__(self, "family", V.as_family(self.family))
        object.__setattr__(self, "cutoff_at", V.as_cutoff_at(self.cutoff_at))
        object.__setattr__(self, "excess", V.as_excess(self.excess))
        object.__setattr__(self, "section_order", V.as_section_order(self.section_order))
        by_order = self.order is not None or self.cutoff_hz is not None
        by_spec = self.passband_hz is not None or self.stopband_hz is not None
        if by_order and by_spec:
            raise RequirementError("give either order + cutoff_hz, or passband_hz + stopband_hz + passband_ripple_db "
                                   "+ stopband_attenuation_db, not both", field="passband_hz")
        if not (by_order or by_spec):
            raise RequirementError("give order + cutoff_hz, or passband_hz + stopband_hz + passband_ripple_db + "
                                   "stopband_attenuation_db", field="order")
        if self.passband_ripple_db is not None:
            object.__setattr__(self, "passband_ripple_db", V.ripple(self.passband_ripple_db))
        if self.stopband_attenuation_db is not None:
            object.__setattr__(self, "stopband_attenuation_db", V.attenuation(self.stopband_attenuation_db))
        if by_order:
            self._check_by_order()
        else:
            self._check_by_specification(rt)

    def _check_by_order(self) -> None:
        if self.order is None:
            raise RequirementError("order is required with cutoff_hz", field="order")
        if self.cutoff_hz is None:
            raise RequirementError("cutoff_hz is required with order", field="cutoff_hz")
        if isinstance(self.order, bool) or not isinstance(self.order, int) or self.order < 1:
            raise RequirementError(f"order must be a positive integer, got {self.order!r}", field="order")
        object.__setattr__(self, "cutoff_hz", V.band_edges(self.cutoff_hz, self.response, "cutoff_hz"))
        for name in ("passband_upper_hz", "group_delay"):
            if getattr(self, name) is not None:
                raise RequirementError(f"{name} applies to a requirement by passband_hz and stopband_hz, "
                                       "not by order", field=name)

    def _check_by_specification(self, rt: ResponseType) -> None:
        for name in ("passband_hz", "stopband_hz", "passband_ripple_db", "stopband_attenuation_db"):
            if getattr(self, name) is None:
                raise RequirementError(f"{name} is required in a requirement by passband and stopband edges",
                                       field=name)
        fp = V.band_edges(self.passband_hz, rt, "passband_hz")
        fs = V.band_edges(self.stopband_hz, rt, "stopband_hz")
        object.__setattr__(self, "passband_hz", fp)
        object.__setattr__(self, "stopband_hz", fs)
        if not self.stopband_attenuation_db > self.passband_ripple_db:
            raise RequirementError(
                f"stopband_attenuation_db ({self.stopband_attenuation_db:g} dB) must be above passband_ripple_db "
                f"({self.passband_ripple_db:g} dB)", field="stopband_attenuation_db")
        V.check_nesting(rt, fp, fs)
        if self.passband_upper_hz is not None:
            if rt not in (ResponseType.HIGHPASS, ResponseType.BANDSTOP):
                raise RequirementError(f"passband_upper_hz applies to an open passband (highpass, bandstop); a "
                                       f"{rt.value} passband is closed", field="passband_upper_hz")
            upper = V.frequency(self.passband_upper_hz, "passband_upper_hz")
            if not upper > self.open_passband_edge_hz:
                raise RequirementError(f"passband_upper_hz ({upper:g} Hz) must lie above the passband edge "
                                       f"({self.open_passband_edge_hz:g} Hz)", field="passband_upper_hz")
            object.__setattr__(self, "passband_upper_hz", upper)
        gd = self.group_delay
        if gd is not None:
            if rt is not ResponseType.LOWPASS:
                raise RequirementError("a group-delay limit is relative to the DC delay: it applies to lowpass "
                                       f"requirements only, not {rt.value}", field="group_delay")
            if self.family not in (None, Family.BESSEL):
                raise RequirementError("a group-delay limit selects the order of a bessel design; the "
                                       f"{self.family.value} family has no such order rule", field="group_delay")
            f = V.frequency(gd.frequency_hz, "group_delay.frequency_hz")
            pct = V.real_number(gd.max_deviation_pct, "group_delay.max_deviation_pct")
            if not 0.0 < pct < 100.0:
                raise RequirementError("group_delay.max_deviation_pct must lie between 0 and 100",
                                       field="group_delay.max_deviation_pct")
            object.__setattr__(self, "group_delay", GroupDelayLimit(f, pct))

    # ------------------------------------------------------------------ views
    @property
    def by_specification(self) -> bool:
        """True for a requirement by band edges (which can be verified)."""
        return self.passband_hz is not None

    @property
    def open_passband_edge_hz(self) -> float | None:
        """The edge where an open passband starts (highpass, bandstop), Hz; None otherwise."""
        if self.response is ResponseType.HIGHPASS:
            return float(self.passband_hz)
        if self.response is ResponseType.BANDSTOP:
            return float(self.passband_hz[1])
        return None

    @property
    def open_passband_upper_hz(self) -> float | None:
        """Where the open passband's check ends (Hz): as stated, or the default multiple of its edge."""
        edge = self.open_passband_edge_hz
        if edge is None:
            return None
        return self.passband_upper_hz if self.passband_upper_hz is not None else OPEN_PASSBAND_FACTOR * edge

    def criteria(self, *, finite_opamps: bool, opamp_gbw_hz: float | None = None) -> Criteria:
        """What verifying against this requirement checks (needs a requirement by specification).

        Parameters
        ----------
        finite_opamps : bool
            The circuit has op-amps with a finite gain-bandwidth: an open
            passband with the default upper end may end with their roll-off
            (:data:`OPEN_BAND_RULE`).
        opamp_gbw_hz : float, optional
            The slowest op-amp's GBW (Hz): the roll-off may not end the passband below
            ``opamp_gbw_hz / OPAMP_BANDWIDTH_FACTOR``.
        """
        if not self.by_specification:
            raise RequirementError("a requirement by order states no passband and stopband to verify",
                                   field="passband_hz")
        rip, att = self.passband_ripple_db, self.stopband_attenuation_db
        fp, fs, inf = self.passband_hz, self.stopband_hz, math.inf
        rolloff = finite_opamps and self.passband_upper_hz is None
        upper = self.open_passband_upper_hz
        held = 0.0 if not (rolloff and opamp_gbw_hz) else float(opamp_gbw_hz) / OPAMP_BANDWIDTH_FACTOR
        pb, sb = Band.PASSBAND, Band.STOPBAND
        if self.response is ResponseType.LOWPASS:
            limits = [LossLimit(pb, 0.0, fp, rip), LossLimit(sb, fs, inf, att, open_end=True)]
        elif self.response is ResponseType.HIGHPASS:
            limits = [LossLimit(sb, 0.0, fs, att),
                      LossLimit(pb, fp, upper, rip, open_end=True, ends_with_rolloff=rolloff, rolloff_from_hz=held)]
        elif self.response is ResponseType.BANDPASS:
            limits = [LossLimit(sb, 0.0, fs[0], att), LossLimit(pb, fp[0], fp[1], rip),
                      LossLimit(sb, fs[1], inf, att, open_end=True)]
        else:
            limits = [LossLimit(pb, 0.0, fp[0], rip), LossLimit(sb, fs[0], fs[1], att),
                      LossLimit(pb, fp[1], upper, rip, open_end=True, ends_with_rolloff=rolloff,
                                rolloff_from_hz=held)]
        delay = None
        if self.group_delay is not None:
            delay = DelayLimit(self.group_delay.frequency_hz, self.group_delay.max_deviation_pct)
        return Criteria(tuple(limits), delay)

    def tightened(self, passband_margin_db: float, stopband_margin_db: float) -> "Requirement":
        """The same requirement with ``passband_margin_db`` less ripple and ``stopband_margin_db`` more attenuation.

        Both are clipped to what the approximation engine computes (ripple at
        least its minimum, attenuation at most its maximum).
        """
        return replace(self, passband_ripple_db=max(self.passband_ripple_db - passband_margin_db, V.MIN_RIPPLE_DB),
                       stopband_attenuation_db=min(self.stopband_attenuation_db + stopband_margin_db,
                                                   V.MAX_ATTENUATION_DB))

    # ------------------------------------------------------------------ JSON
    def to_json(self) -> dict:
        """Plain JSON (every key of :data:`FIELDS`; null where not given)."""
        def edge(e):
            return list(e) if isinstance(e, tuple) else e

        gd = self.group_delay
        return {
            "response": self.response.value, "family": None if self.family is None else self.family.value,
            "order": self.order, "cutoff_hz": edge(self.cutoff_hz), "cutoff_at": self.cutoff_at.value,
            "passband_hz": edge(self.passband_hz), "stopband_hz": edge(self.stopband_hz),
            "passband_ripple_db": self.passband_ripple_db, "stopband_attenuation_db": self.stopband_attenuation_db,
            "passband_upper_hz": self.passband_upper_hz,
            "group_delay": None if gd is None else {"frequency_hz": gd.frequency_hz,
                                                    "max_deviation_pct": gd.max_deviation_pct},
            "excess": self.excess.value, "section_order": self.section_order.value,
        }

    @classmethod
    def from_json(cls, data: Any, path: str = "requirement") -> "Requirement":
        """Read a requirement object strictly; every failure names its field under ``path``.

        Numbers may be JSON numbers or SI-prefixed strings (``"10kHz"``).
        """
        f = Fields(data, path, FIELDS, RequirementError)

        def edge(key):
            value = f.raw(key)
            if value is None:
                return None
            if isinstance(value, (list, tuple)):
                if len(value) != 2:
                    raise RequirementError(f"{f.at(key)} must be one frequency or a pair [low, high]",
                                           field=f.at(key))
                return tuple(_hz(v, join(f.at(key), i)) for i, v in enumerate(value))
            return _hz(value, f.at(key))

        gd = None
        if f.has("group_delay"):
            g = Fields(f.raw("group_delay"), f.at("group_delay"), ("frequency_hz", "max_deviation_pct"),
                       RequirementError)
            gd = GroupDelayLimit(g.number("frequency_hz", required=True, unit="Hz"),
                                 g.number("max_deviation_pct", required=True))
        try:
            return cls(
                response=f.enum("response", ResponseType, required=True),
                family=f.enum("family", Family),
                order=f.integer("order"),
                cutoff_hz=edge("cutoff_hz"),
                cutoff_at=f.enum("cutoff_at", CutoffAt, default=CutoffAt.FAMILY),
                passband_hz=edge("passband_hz"),
                stopband_hz=edge("stopband_hz"),
                passband_ripple_db=f.number("passband_ripple_db"),
                stopband_attenuation_db=f.number("stopband_attenuation_db"),
                passband_upper_hz=f.number("passband_upper_hz", unit="Hz"),
                group_delay=gd,
                excess=f.enum("excess", Excess, default=Excess.STOPBAND),
                section_order=f.enum("section_order", SectionOrder, default=SectionOrder.ASCENDING_Q),
            )
        except RolloffError as exc:
            if exc.field and exc.field.startswith(path):
                raise
            raise _prefixed(exc, path) from None


def _hz(value: Any, field: str) -> float:
    from service.workflows.reading import number

    return number(value, field, unit="Hz", error=RequirementError)
