"""The title of a figure: the filter, what it must do, and the circuit, written from what a request holds.

A response figure is of a requirement's transfer function, a bare transfer
function (zeros/poles or sections) or a design document; a tolerance figure
is of a design document. :func:`figure_subject` and :func:`document_subject`
turn each into a :class:`service.response.subject.FigureSubject`. Frequencies
are written in Hz with SI prefixes (``"25.6 kHz"``), losses in dB.
"""

from __future__ import annotations

from collections import Counter

from service.approximation import Family, ResponseType, Section
from service.approximation.families import family_info
from service.approximation import CutoffAt
from service.response.figure_inputs import FigureSubject
from service.units import format_quantity
from service.workflows.document import DesignDocument
from service.workflows.requirement import Requirement

#: Family names as an engineer writes them.
FAMILY_NAMES = {
    Family.BUTTERWORTH: "Butterworth", Family.CHEBYSHEV1: "Chebyshev I", Family.CHEBYSHEV2: "Chebyshev II",
    Family.ELLIPTIC: "Elliptic", Family.BESSEL: "Bessel", Family.LEGENDRE: "Legendre",
    Family.LINKWITZ_RILEY: "Linkwitz-Riley",
}

#: Topology names as an engineer writes them (others: underscores read as spaces).
TOPOLOGY_NAMES = {
    "sallen_key": "Sallen-Key", "multiple_feedback": "multiple feedback", "state_variable": "state variable",
    "tow_thomas": "Tow-Thomas", "twin_t_notch": "twin-T notch", "delyiannis_friend_notch": "Delyiannis-Friend notch",
    "rc_first_order": "RC first order", "inverting_first_order": "inverting first order",
    "noninverting_first_order": "non-inverting first order",
}

SEPARATOR = " · "


def hz(value: float) -> str:
    """A frequency (Hz) in engineering notation with a space before the unit: ``"25.6 kHz"``, ``"0 Hz"``."""
    text = format_quantity(float(value), significant=4, micro="µ")
    if text[-1].isalpha():
        return f"{text[:-1]} {text[-1]}Hz"
    return f"{text} Hz"


def db(value: float) -> str:
    """A loss or gain (dB) with up to four significant digits: ``"0.1 dB"``, ``"80 dB"``."""
    return f"{float(value):.4g} dB"


def _span(lo: float, hi: float) -> str:
    """``"35–45 kHz"`` when both ends share a prefix, else ``"900 Hz–1.2 kHz"``."""
    a, b = hz(lo), hz(hi)
    ua, ub = a.split(" ")[1], b.split(" ")[1]
    return f"{a.split(' ')[0]}–{b}" if ua == ub else f"{a}–{b}"


def filter_text(family: Family | None, response: ResponseType | None, order: int | None) -> str:
    """``"Elliptic lowpass, order 6"``; the parts not known are left out."""
    words = []
    if family is not None:
        words.append(FAMILY_NAMES.get(family, str(family.value)))
    if response is not None:
        words.append(response.value)
    text = " ".join(words) or "Filter"
    text = text[0].upper() + text[1:]
    return text if order is None else f"{text}, order {order}"


def requirement_text(req: Requirement) -> str:
    """What ``req`` asks for, band by band (see the module notes)."""
    rt = req.response
    if not req.by_specification:
        return _by_order_text(req)
    pb, sb = req.passband_hz, req.stopband_hz
    ripple = f" within {db(req.passband_ripple_db)}" if req.passband_ripple_db is not None else ""
    atten = f", {db(req.stopband_attenuation_db)} down" if req.stopband_attenuation_db is not None else ""
    upper = req.passband_upper_hz
    if rt is ResponseType.LOWPASS:
        parts = [f"passband to {hz(pb)}{ripple}", f"stopband from {hz(sb)}{atten}"]
    elif rt is ResponseType.HIGHPASS:
        band = _span(pb, upper) if upper else f"from {hz(pb)}"
        parts = [f"passband {band}{ripple}", f"stopband to {hz(sb)}{atten}"]
    elif rt is ResponseType.BANDPASS:
        parts = [f"passband {_span(*pb)}{ripple}", f"stopbands to {hz(sb[0])} and from {hz(sb[1])}{atten}"]
    else:
        top = f"{_span(pb[1], upper)}" if upper else f"from {hz(pb[1])}"
        parts = [f"passbands to {hz(pb[0])} and {top}{ripple}", f"stopband {_span(*sb)}{atten}"]
    if req.group_delay is not None:
        gd = req.group_delay
        parts.append(f"group delay within {gd.max_deviation_pct:g} % to {hz(gd.frequency_hz)}")
    return SEPARATOR.join(parts)


def _by_order_text(req: Requirement) -> str:
    cut = req.cutoff_hz
    where = _span(*cut) if isinstance(cut, tuple) else hz(cut)
    if req.cutoff_at is CutoffAt.MINUS_3DB or req.family is None:
        meaning = "−3 dB point"
    else:
        meaning = family_info(req.family).cutoff_meaning.replace("-3 dB", "−3 dB")
    parts = [f"cutoff {where}: {meaning}"]
    if req.passband_ripple_db is not None:
        parts.append(f"{db(req.passband_ripple_db)} ripple")
    if req.stopband_attenuation_db is not None:
        parts.append(f"{db(req.stopband_attenuation_db)} stopband")
    return SEPARATOR.join(parts)


def _counted(names: list[str]) -> str:
    """``"2 Sallen-Key, 1 state variable"`` in order of first appearance."""
    return ", ".join(f"{n} {name}" for name, n in Counter(names).items())


def design_text(doc: DesignDocument) -> str:
    """The circuit of ``doc``: stages and their topologies, op-amps and their gain-bandwidth (Hz)."""
    stages = len(doc.stages)
    topologies = _counted([TOPOLOGY_NAMES.get(st.topology, st.topology.replace("_", " ")) for st in doc.stages])
    opamps = [u for st in doc.stages for u in st.opamps]
    text = f"{stages} stage{'s' if stages != 1 else ''}: {topologies}"
    if not opamps:
        return text + SEPARATOR + "passive"
    gbw = sorted({float(u.gbw_hz) for u in opamps if u.gbw_hz})
    ideal = sum(1 for u in opamps if not u.gbw_hz)
    count = f"{len(opamps)} op-amp{'s' if len(opamps) != 1 else ''}"
    if not gbw:
        return text + SEPARATOR + f"{count}, ideal"
    band = hz(gbw[0]) if len(gbw) == 1 else _span(gbw[0], gbw[-1])
    return text + SEPARATOR + f"{count}, GBW {band}" + (f" ({ideal} ideal)" if ideal else "")


def document_subject(doc: DesignDocument) -> FigureSubject:
    """The subject of a figure of a design document (a response or a tolerance run)."""
    order = doc.order if doc.order is not None else sum(st.section.order for st in doc.stages)
    return FigureSubject(filter_text(doc.family, doc.response, order),
                         None if doc.requirement is None else requirement_text(doc.requirement), design_text(doc))


def figure_subject(system, display, response: ResponseType | None) -> FigureSubject:
    """The subject of a response figure.

    Parameters
    ----------
    system : Requirement, Zpk, tuple of Section, or DesignDocument
        What the request asked for.
    display : object
        What was analysed (for a requirement: its approximation, which knows the order it chose).
    response : ResponseType or None
        The response type of the result (given or inferred), for a bare transfer function.
    """
    if isinstance(system, DesignDocument):
        return document_subject(system)
    if isinstance(system, Requirement):
        return FigureSubject(filter_text(system.family, system.response, getattr(display, "order", system.order)),
                             requirement_text(system))
    kind = "" if response is None else f" ({response.value})"
    if isinstance(system, tuple) and all(isinstance(s, Section) for s in system):
        n = len(system)
        kinds = _counted([s.kind.value.replace("_", " ") for s in system])
        return FigureSubject(f"Cascade of {n} section{'s' if n != 1 else ''}{kind}: {kinds}")
    poles, zeros = len(system.poles), len(system.zeros)
    return FigureSubject(f"Transfer function{kind}: {poles} pole{'s' if poles != 1 else ''}, "
                         f"{zeros} zero{'s' if zeros != 1 else ''}")


__all__ = ["figure_subject", "document_subject", "requirement_text", "design_text", "filter_text", "hz", "db"]
