"""Designs by order and by requirement: prototype -> scale -> transform -> sections.

A requirement is reduced to the lowpass selectivity ``omega_s > 1`` (stopband
over passband edge of the equivalent normalized lowpass, passband edge at 1):

- lowpass  ``omega_s = f_s / f_p``;  highpass ``omega_s = f_p / f_s``;
- bandpass ``omega_s = min_i |f_si**2 - f_0**2| / (B f_si)``, ``f_0**2 = f_p1 f_p2``,
  ``B = f_p2 - f_p1`` (the passband maps exactly onto the prototype passband);
- bandstop ``omega_s = min_i B f_si / |f_0**2 - f_si**2|`` with the same ``f_0``, ``B``

(Zverev, Handbook of Filter Synthesis, 1967, ch. 2).  The minimum order follows
from the family's order equation (Butterworth, Chebyshev, elliptic,
Linkwitz-Riley) or an order-by-order search (Bessel, Legendre).  At that
order the prototype's frequency scale ``a`` may lie anywhere in
``[a_lo, a_hi]``: ``a_lo`` puts the loss at the passband edge exactly at the
allowed ripple (the excess goes to the stopband), ``a_hi`` puts the loss at the
stopband edge exactly at the required attenuation (the excess goes to the
passband); ``split`` takes the geometric mean ``sqrt(a_lo a_hi)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .enums import CutoffAt, Excess, SectionOrder
from .errors import ApproximationError, InfeasibleRequirement, UnsupportedOrder
from .evaluate import group_delay_s, loss_db, zpk_response
from .families import _INFO
from .order import (HALF_POWER_DB, bessel_delay_deviation_frequency, butterworth_order,
                    chebyshev_order, elliptic_order, elliptic_selectivity, frequency_at_loss,
                    linkwitz_riley_order)
from .prototypes import prototype
from .sections import sections_from_zpk
from .transforms import lowpass_scale, transform
from .types import Family, ResponseType, Section
from . import validation as V

_TWO_PI = 2.0 * math.pi


@dataclass(frozen=True)
class Edge:
    """Loss achieved at one requested band edge.

    Attributes
    ----------
    frequency_hz : float
        The edge, Hz.
    loss_db : float
        Achieved loss ``-20 log10 |H|`` relative to the passband peak, dB.
    required_db : float
        The ripple (passband: largest loss allowed) or attenuation (stopband:
        smallest loss required), dB.
    margin_db : float
        Positive when met: passband ``required - loss``, stopband ``loss - required``.
    band : str
        ``"passband"`` or ``"stopband"``.
    """

    frequency_hz: float
    loss_db: float
    required_db: float
    margin_db: float
    band: str

    def as_dict(self) -> dict:
        return {"frequency_hz": self.frequency_hz, "loss_db": self.loss_db,
                "required_db": self.required_db, "margin_db": self.margin_db, "band": self.band}


@dataclass(frozen=True)
class GroupDelayLimit:
    """A Bessel lowpass requirement on the flatness of the group delay.

    Attributes
    ----------
    frequency_hz : float
        Up to this frequency (Hz) ...
    max_deviation_pct : float
        ... the group delay stays within this many percent of its DC value.
    """

    frequency_hz: float
    max_deviation_pct: float


@dataclass(frozen=True)
class GroupDelayResult:
    """Achieved group-delay deviation at the frequency of a :class:`GroupDelayLimit`.

    Attributes
    ----------
    frequency_hz : float
    deviation_pct : float
        ``100 (tau(0) - tau(f)) / tau(0)``, percent.
    limit_pct : float
    margin_pct : float
        ``limit_pct - deviation_pct`` (positive when met).
    dc_delay_s : float
        Group delay at DC, seconds.
    """

    frequency_hz: float
    deviation_pct: float
    limit_pct: float
    margin_pct: float
    dc_delay_s: float

    def as_dict(self) -> dict:
        return {"frequency_hz": self.frequency_hz, "deviation_pct": self.deviation_pct,
                "limit_pct": self.limit_pct, "margin_pct": self.margin_pct,
                "dc_delay_s": self.dc_delay_s}


@dataclass(frozen=True, eq=False)
class Approximation:
    """A designed transfer function and its sections.

    Attributes
    ----------
    family : Family
    response : ResponseType
    order : int
        Prototype order.
    degree : int
        Transfer-function degree (number of poles): ``order`` for lowpass and
        highpass, ``2*order`` for bandpass and bandstop.
    zeros : ndarray of complex, shape (nz,)
        Finite zeros, rad/s (read-only).
    poles : ndarray of complex, shape (degree,)
        Poles, rad/s (read-only).
    gain : float
        ``k`` of ``H(s) = k prod(s - z)/prod(s - p)``; the passband peak of
        ``|H|`` is 1 (0 dB) for every family.
    sections : list of Section
        Their product equals the transfer function.
    cutoff_hz : float or (float, float)
        The cutoff actually used, Hz: the family's natural edge (see
        ``cutoff_meaning``) or, for ``cutoff_at="-3db"``, the -3.01 dB point(s).
    cutoff_meaning : str
        What ``cutoff_hz`` is.
    edges : list of Edge or None
        Requirement designs: the loss at each requested edge.
    excess : str or None
        Requirement designs: where the excess of the integer order went.
    passband_ripple_db, stopband_attenuation_db : float or None
        The shape parameters the prototype was built with.
    group_delay : GroupDelayResult or None
        When a group-delay limit was given.
    notes : tuple of str
        Remarks about the request (ignored parameters, etc.).
    """

    family: Family
    response: ResponseType
    order: int
    degree: int
    zeros: np.ndarray
    poles: np.ndarray
    gain: float
    sections: list[Section]
    cutoff_hz: float | tuple[float, float]
    edges: list[Edge] | None
    excess: str | None
    cutoff_meaning: str = ""
    passband_ripple_db: float | None = None
    stopband_attenuation_db: float | None = None
    group_delay: GroupDelayResult | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)

    def response_at(self, frequency_hz) -> np.ndarray:
        """``H(j 2 pi f)`` for ``frequency_hz`` (any shape, Hz); complex, same shape."""
        return zpk_response(self.zeros, self.poles, self.gain, _TWO_PI * np.asarray(frequency_hz))

    def as_dict(self) -> dict:
        """Plain-JSON form (zeros and poles as ``[re, im]`` pairs in rad/s)."""
        return {
            "family": self.family.value,
            "response": self.response.value,
            "order": self.order,
            "degree": self.degree,
            "zeros": [[float(z.real), float(z.imag)] for z in self.zeros],
            "poles": [[float(p.real), float(p.imag)] for p in self.poles],
            "gain": self.gain,
            "sections": [s.as_dict() for s in self.sections],
            "cutoff_hz": list(self.cutoff_hz) if isinstance(self.cutoff_hz, tuple) else self.cutoff_hz,
            "cutoff_meaning": self.cutoff_meaning,
            "edges": None if self.edges is None else [e.as_dict() for e in self.edges],
            "excess": self.excess,
            "passband_ripple_db": self.passband_ripple_db,
            "stopband_attenuation_db": self.stopband_attenuation_db,
            "group_delay": None if self.group_delay is None else self.group_delay.as_dict(),
            "notes": list(self.notes),
        }


# ------------------------------------------------------------------ helpers
def _frozen(a) -> np.ndarray:
    a = np.array(a, dtype=complex)
    a.setflags(write=False)
    return a


def _highest_order(family: Family, max_order) -> int:
    cap = V.integer(max_order, "max_order")
    if cap < 1:
        raise ApproximationError(f"max_order must be at least 1, got {cap}", field="max_order")
    return min(cap, _INFO[family].max_order)


def _shape_parameters(family: Family, ripple_db, attenuation_db, notes: list):
    info = _INFO[family]
    rp = rs = None
    if info.needs_ripple:
        if ripple_db is None:
            raise ApproximationError(f"the {family.value} family needs passband_ripple_db",
                                     field="passband_ripple_db")
        rp = V.ripple(ripple_db)
    elif ripple_db is not None:
        notes.append(f"passband_ripple_db is not used by the {family.value} family and was ignored")
    if info.needs_attenuation:
        if attenuation_db is None:
            raise ApproximationError(f"the {family.value} family needs stopband_attenuation_db",
                                     field="stopband_attenuation_db")
        rs = V.attenuation(attenuation_db)
    elif attenuation_db is not None:
        notes.append(f"stopband_attenuation_db is not used by the {family.value} family and was ignored")
    if rp is not None and rs is not None and not rs > rp:
        raise InfeasibleRequirement(
            f"stopband_attenuation_db ({rs:g} dB) must be above passband_ripple_db ({rp:g} dB)",
            field="stopband_attenuation_db")
    return rp, rs


def _transform_args(response: ResponseType, edge):
    """(wc, w0, bw) in rad/s from an edge (Hz) or an edge pair."""
    if response in V.BAND_RESPONSES:
        lo, hi = edge
        return None, _TWO_PI * math.sqrt(lo * hi), _TWO_PI * (hi - lo)
    return _TWO_PI * edge, None, None


def _natural_edges(response: ResponseType, edge, a: float):
    """Frequencies (Hz) where the scaled prototype's natural edge lands."""
    if response is ResponseType.LOWPASS:
        return edge * a
    if response is ResponseType.HIGHPASS:
        return edge / a
    lo, hi = edge
    f0sq = lo * hi
    b = (hi - lo) * a if response is ResponseType.BANDPASS else (hi - lo) / a
    c = math.sqrt(f0sq + b * b / 4.0)
    return c - b / 2.0, c + b / 2.0


def _assemble(family, response, n, rp, rs, a, edge, section_order):
    proto = prototype(family, n, rp, rs)
    z, p, k = lowpass_scale(proto.zeros, proto.poles, proto.gain, a)
    wc, w0, bw = _transform_args(response, edge)
    z, p, k = transform(response, z, p, k, wc=wc, w0=w0, bw=bw)
    secs = sections_from_zpk(z, p, k, order=section_order)
    return _frozen(z), _frozen(p), float(k), secs


def _check_order(family: Family, order, highest: int) -> int:
    n = V.integer(order, "order")
    if n < 1:
        raise ApproximationError(f"order must be at least 1, got {n}", field="order")
    if family is Family.LINKWITZ_RILEY and n % 2:
        raise InfeasibleRequirement(
            f"a Linkwitz-Riley filter has even order only (the square of a Butterworth), got {n}",
            field="order")
    if n > highest:
        fam_max = _INFO[family].max_order
        why = (f"the {family.value} family is computed accurately up to order {fam_max}"
               if highest == fam_max else f"the configured max_order is {highest}")
        raise UnsupportedOrder(f"order {n} is above the highest accepted order {highest}: {why}",
                               order=n, highest=highest)
    return n


MIN_TRANSITION = 1e-6   # smallest (stopband edge / passband edge - 1) computed accurately


def _check_elliptic_transition(n, rp, rs, error):
    """ellipap loses accuracy when the transition band is narrower than ~5e-9 of the
    edge (measured against the equiripple bounds); refuse below MIN_TRANSITION."""
    ratio = 1.0 / elliptic_selectivity(n, rp, rs)
    if ratio - 1.0 < MIN_TRANSITION:
        msg = (f"an elliptic filter of order {n} with {rp:g} dB ripple and {rs:g} dB attenuation "
               f"has a transition band of {ratio - 1.0:.2e} of its edge, below the {MIN_TRANSITION:g} "
               f"that is computed accurately: lower the order or raise stopband_attenuation_db")
        if error is UnsupportedOrder:
            raise UnsupportedOrder(msg, order=n, highest=n - 1)
        raise error(msg, field="stopband_attenuation_db")


# ------------------------------------------------------------------ by order
def design_by_order(response, family, order, cutoff_hz, *, passband_ripple_db=None,
                    stopband_attenuation_db=None, cutoff_at="family",
                    section_order="ascending_q", max_order=20) -> Approximation:
    """Design a filter of given prototype order and cutoff.

    Parameters
    ----------
    response : ResponseType or str
        ``lowpass``, ``highpass``, ``bandpass``, ``bandstop``.
    family : Family or str
    order : int
        Prototype order (the band responses have twice this degree); even for
        Linkwitz-Riley.
    cutoff_hz : float or (float, float)
        Hz; a pair ``(low, high)`` for band responses.  With
        ``cutoff_at="family"`` it is the family's natural edge
        (:func:`family_info`), with ``"-3db"`` the -3.01 dB point(s).
    passband_ripple_db : float, optional
        dB, 0.001-3; required by Chebyshev I and elliptic (ignored, with a note, otherwise).
    stopband_attenuation_db : float, optional
        dB, up to 150; required by Chebyshev II and elliptic.
    cutoff_at : {"family", "-3db"}
    section_order : {"ascending_q", "descending_q", "as_computed"}
    max_order : int
        Configured cap on the order.

    Returns
    -------
    Approximation
        ``edges`` and ``excess`` are None.

    Raises
    ------
    ApproximationError
        Malformed or out-of-range parameter (``field`` names it).
    UnsupportedOrder
        Order above the family's accuracy limit or ``max_order``.
    InfeasibleRequirement
        Odd Linkwitz-Riley order; attenuation not above ripple.
    """
    response = V.as_response(response)
    family = V.as_family(family)
    cut_at = V.as_cutoff_at(cutoff_at)
    sec_order = V.as_section_order(section_order)
    n = _check_order(family, order, _highest_order(family, max_order))
    edge = V.band_edges(cutoff_hz, response, "cutoff_hz")
    notes: list[str] = []
    rp, rs = _shape_parameters(family, passband_ripple_db, stopband_attenuation_db, notes)
    if family is Family.ELLIPTIC:
        _check_elliptic_transition(n, rp, rs, UnsupportedOrder)
    a = 1.0
    meaning = _INFO[family].cutoff_meaning
    if cut_at is CutoffAt.MINUS_3DB:
        if family is Family.CHEBYSHEV2 and rs <= HALF_POWER_DB:
            raise ApproximationError(
                "cutoff_at='-3db' needs stopband_attenuation_db above 3.0103 dB for chebyshev2",
                field="stopband_attenuation_db")
        a = 1.0 / frequency_at_loss(family, n, HALF_POWER_DB, rp, rs)
        meaning = "-3 dB (half-power) point"
    z, p, k, secs = _assemble(family, response, n, rp, rs, a, edge, sec_order)
    return Approximation(family=family, response=response, order=n, degree=int(p.size), zeros=z,
                         poles=p, gain=k, sections=secs, cutoff_hz=edge, edges=None, excess=None,
                         cutoff_meaning=meaning, passband_ripple_db=rp,
                         stopband_attenuation_db=rs, notes=tuple(notes))


# ------------------------------------------------------------------ by requirement
def _selectivity(response: ResponseType, passband, stopband) -> float:
    if response is ResponseType.LOWPASS:
        return stopband / passband
    if response is ResponseType.HIGHPASS:
        return passband / stopband
    (p1, p2), (s1, s2) = passband, stopband
    f0sq, b = p1 * p2, p2 - p1
    if response is ResponseType.BANDPASS:
        return min(abs(s * s - f0sq) / (b * s) for s in (s1, s2))
    return min(b * s / abs(f0sq - s * s) for s in (s1, s2))


_ORDER_EQUATIONS = {
    Family.BUTTERWORTH: butterworth_order,
    Family.CHEBYSHEV1: chebyshev_order,
    Family.CHEBYSHEV2: chebyshev_order,
    Family.ELLIPTIC: elliptic_order,
    Family.LINKWITZ_RILEY: linkwitz_riley_order,
}


def _scale_interval(family, n, sel, ap, as_, rp, rs, gd_norm):
    """[a_lo, a_hi] of the prototype frequency scale meeting the requirement at order n."""
    a_p = 1.0 / frequency_at_loss(family, n, ap, rp, rs)
    a_s = sel / frequency_at_loss(family, n, as_, rp, rs)
    a_lo = a_p
    if gd_norm is not None:
        w_norm, pct = gd_norm
        a_lo = max(a_lo, w_norm / bessel_delay_deviation_frequency(n, pct))
    return a_lo, a_s


def _minimum_order(family, sel, ap, as_, rp, rs, gd_norm, highest, least=1):
    step = 2 if family is Family.LINKWITZ_RILEY else 1
    start = max(step, least + (least % step if step == 2 else 0))
    eq = _ORDER_EQUATIONS.get(family)
    if eq is not None and gd_norm is None:
        n_real = eq(sel, ap, as_)
        n_eq = max(1, math.ceil(n_real - 1e-9))
        if step == 2:
            n_eq += n_eq % 2
        if n_eq > highest:
            raise InfeasibleRequirement(
                f"the requirement needs a {family.value} order of {n_eq} (order equation: "
                f"{n_real:.3f}), above the highest accepted order {highest}", field=None)
        start = max(n_eq, start)
    for n in range(start, highest + 1, step):
        lo, hi = _scale_interval(family, n, sel, ap, as_, rp, rs, gd_norm)
        if lo <= hi * (1.0 + 1e-12):
            return n, lo, max(lo, hi)
    if gd_norm is not None:
        lo, hi = _scale_interval(family, highest - (highest % step), sel, ap, as_, rp, rs, None)
        if lo <= hi:
            raise InfeasibleRequirement(
                f"no {family.value} order up to {highest} meets the group-delay limit together "
                f"with the magnitude requirement", field="group_delay")
    raise InfeasibleRequirement(
        f"no {family.value} order up to the highest accepted order {highest} meets the requirement",
        field=None)


def design_by_requirement(response, family, passband_hz, stopband_hz, passband_ripple_db,
                          stopband_attenuation_db, *, excess="stopband", group_delay=None,
                          section_order="ascending_q", max_order=20, min_order=None) -> Approximation:
    """Design the lowest-order filter of ``family`` that meets a requirement.

    Parameters
    ----------
    response : ResponseType or str
    family : Family or str
    passband_hz, stopband_hz : float or (float, float)
        Band edges, Hz (pairs for band responses: bandpass stopband outside the
        passband, bandstop stopband inside it).
    passband_ripple_db : float
        Largest loss allowed in the passband, dB (0.001-3).
    stopband_attenuation_db : float
        Smallest loss required in the stopband, dB (above the ripple, at most 150).
    excess : {"stopband", "passband", "split"}
        Where the excess selectivity of the integer order goes (module docstring).
    group_delay : GroupDelayLimit, optional
        Bessel lowpass only: the delay stays within ``max_deviation_pct`` percent
        of its DC value up to ``frequency_hz``.
    section_order : {"ascending_q", "descending_q", "as_computed"}
    max_order : int
        Configured cap on the order.
    min_order : int, optional
        Lowest order to consider: the lowest order at or above it that meets the requirement is
        designed (a higher order than needed leaves excess selectivity, placed by ``excess``).

    Returns
    -------
    Approximation
        With ``edges`` (one per requested edge frequency) and ``excess``.

    Raises
    ------
    ApproximationError
        Malformed or out-of-range parameter.
    InfeasibleRequirement
        Edges not nested, attenuation not above ripple, group-delay limit not
        reachable, or an order above the cap needed (the message says which).
    """
    response = V.as_response(response)
    family = V.as_family(family)
    exc = V.as_excess(excess)
    sec_order = V.as_section_order(section_order)
    highest = _highest_order(family, max_order)
    passband = V.band_edges(passband_hz, response, "passband_hz")
    stopband = V.band_edges(stopband_hz, response, "stopband_hz")
    ap = V.ripple(passband_ripple_db)
    as_ = V.attenuation(stopband_attenuation_db)
    if not as_ > ap:
        raise InfeasibleRequirement(
            f"stopband_attenuation_db ({as_:g} dB) must be above passband_ripple_db ({ap:g} dB)",
            field="stopband_attenuation_db")
    V.check_nesting(response, passband, stopband)
    gd_norm = None
    if group_delay is not None:
        if not isinstance(group_delay, GroupDelayLimit):
            raise ApproximationError("group_delay must be a GroupDelayLimit", field="group_delay")
        if family is not Family.BESSEL or response is not ResponseType.LOWPASS:
            raise ApproximationError("a group-delay limit applies to bessel lowpass designs only",
                                     field="group_delay")
        f_gd = V.frequency(group_delay.frequency_hz, "group_delay.frequency_hz")
        pct = V.real_number(group_delay.max_deviation_pct, "group_delay.max_deviation_pct")
        if not 0.0 < pct < 100.0:
            raise ApproximationError("group_delay.max_deviation_pct must lie between 0 and 100",
                                     field="group_delay.max_deviation_pct")
        gd_norm = (f_gd / passband, pct)
    rp = ap if _INFO[family].needs_ripple else None
    rs = as_ if _INFO[family].needs_attenuation else None
    sel = _selectivity(response, passband, stopband)
    if sel - 1.0 < MIN_TRANSITION:
        raise InfeasibleRequirement(
            f"the transition band is {sel - 1.0:.2e} of the passband edge (equivalent lowpass "
            f"selectivity), below the {MIN_TRANSITION:g} that is computed accurately",
            field="stopband_hz")
    least = 1 if min_order is None else int(min_order)
    if least > highest:
        raise InfeasibleRequirement(f"an order of at least {least} is above the highest accepted order {highest}",
                                    field="order")
    n, a_lo, a_hi = _minimum_order(family, sel, ap, as_, rp, rs, gd_norm, highest, least)
    if family is Family.ELLIPTIC:
        _check_elliptic_transition(n, rp, rs, InfeasibleRequirement)
    a = {Excess.STOPBAND: a_lo, Excess.PASSBAND: a_hi,
         Excess.SPLIT: math.sqrt(a_lo * a_hi)}[exc]
    z, p, k, secs = _assemble(family, response, n, rp, rs, a, passband, sec_order)

    # edges
    freqs, bands, req = [], [], []
    for f in (passband if isinstance(passband, tuple) else (passband,)):
        freqs.append(f); bands.append("passband"); req.append(ap)
    for f in (stopband if isinstance(stopband, tuple) else (stopband,)):
        freqs.append(f); bands.append("stopband"); req.append(as_)
    loss = loss_db(zpk_response(z, p, k, _TWO_PI * np.array(freqs)))
    edges = [Edge(frequency_hz=float(f), loss_db=float(L), required_db=float(r),
                  margin_db=float(r - L if b == "passband" else L - r), band=b)
             for f, L, r, b in zip(freqs, loss, req, bands)]
    gd_result = None
    if gd_norm is not None:
        tau = group_delay_s(p, z, [0.0, _TWO_PI * group_delay.frequency_hz])
        dev = float(100.0 * (1.0 - tau[1] / tau[0]))
        gd_result = GroupDelayResult(frequency_hz=float(group_delay.frequency_hz), deviation_pct=dev,
                                     limit_pct=float(group_delay.max_deviation_pct),
                                     margin_pct=float(group_delay.max_deviation_pct) - dev,
                                     dc_delay_s=float(tau[0]))
    return Approximation(family=family, response=response, order=n, degree=int(p.size), zeros=z,
                         poles=p, gain=k, sections=secs,
                         cutoff_hz=_natural_edges(response, passband, a), edges=edges,
                         excess=exc.value, cutoff_meaning=_INFO[family].cutoff_meaning,
                         passband_ripple_db=rp, stopband_attenuation_db=rs,
                         group_delay=gd_result, notes=())
