"""Shared pieces of the realization tests: stand-in approximations and ngspice read-outs."""

from __future__ import annotations

import re
from types import SimpleNamespace

import numpy as np
import pytest

from service.approximation import Section, SectionKind, section_polynomials
from tests.ngspice import run_ngspice_ac

_AC = re.compile(r"^\s*\.ac\s+.*$", re.IGNORECASE | re.MULTILINE)


def one_section(section: Section, response: str = "lowpass") -> SimpleNamespace:
    """An approximation-shaped record holding one section (what design_filter reads)."""
    return SimpleNamespace(sections=[section], response=response, family="butterworth",
                           order=section.order, edges=None)


def sections_record(sections, response="lowpass") -> SimpleNamespace:
    return SimpleNamespace(sections=list(sections), response=response, family="butterworth",
                           order=sum(s.order for s in sections), edges=None)


def with_ac(netlist: str, ac: str) -> str:
    """``netlist`` with its ``.ac`` line replaced by ``.ac <ac>``."""
    return _AC.sub(f".ac {ac}", netlist, count=1)


def ngspice_at(netlist: str, frequencies_hz) -> np.ndarray:
    """|V(out)| by ngspice at each of ``frequencies_hz`` (one ``.ac lin 1 f f`` run each)."""
    out = []
    for f in np.atleast_1d(frequencies_hz):
        _, v = run_ngspice_ac(with_ac(netlist, f"lin 1 {float(f)!r} {float(f)!r}"))
        out.append(abs(v["out"][0]))
    return np.array(out)


def ngspice_sweep(netlist: str, lo_hz: float, hi_hz: float, per_decade: int = 200):
    """Frequencies and complex V(out) by ngspice on a log sweep."""
    f, v = run_ngspice_ac(with_ac(netlist, f"dec {per_decade} {float(lo_hz)!r} {float(hi_hz)!r}"))
    return f, v["out"]


def section_response(section: Section, f_hz) -> np.ndarray:
    """The section's standard form at ``s = j 2 pi f`` (complex)."""
    b, a = section_polynomials(section)
    s = 2j * np.pi * np.asarray(f_hz, dtype=float)
    return np.polyval(b, s) / np.polyval(a, s)


def achieved_response(section: Section, achieved: dict, f_hz) -> np.ndarray:
    """The section's form with the achieved f0, Q, gain, zero frequency and zero damping (complex)."""
    sec = achieved_section(section, achieved)
    b, a = section_polynomials(sec)
    zeta = achieved.get("zero_damping")
    if zeta and section.kind in (SectionKind.NOTCH, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH):
        b = np.array(b, dtype=float)
        b[-2] = 2.0 * zeta * np.sqrt(b[-1] * b[0])       # s^2 + 2 zeta wz s + wz^2, same scale
    s = 2j * np.pi * np.asarray(f_hz, dtype=float)
    return np.polyval(b, s) / np.polyval(a, s)


def achieved_section(section: Section, achieved: dict) -> Section:
    """``section`` with the achieved f0, Q, gain and zero frequency."""
    return Section(kind=section.kind, order=section.order, f0_hz=achieved["f0_hz"],
                   q=achieved["q"], fz_hz=achieved["fz_hz"] if achieved["fz_hz"] else section.fz_hz,
                   gain=achieved["gain"])


SECTIONS = {
    # (kind, order): a representative section of each kind
    (SectionKind.LOWPASS, 2): Section(SectionKind.LOWPASS, 2, 1000.0, 0.9, None, 1.0),
    (SectionKind.HIGHPASS, 2): Section(SectionKind.HIGHPASS, 2, 1000.0, 0.9, None, 1.0),
    (SectionKind.BANDPASS, 2): Section(SectionKind.BANDPASS, 2, 1000.0, 3.0, None, 1.0),
    (SectionKind.NOTCH, 2): Section(SectionKind.NOTCH, 2, 1000.0, 2.0, 1000.0, 1.0),
    (SectionKind.LOWPASS_NOTCH, 2): Section(SectionKind.LOWPASS_NOTCH, 2, 1000.0, 1.5, 2000.0, 1.0),
    (SectionKind.HIGHPASS_NOTCH, 2): Section(SectionKind.HIGHPASS_NOTCH, 2, 1000.0, 1.5, 500.0, 1.0),
    (SectionKind.LOWPASS, 1): Section(SectionKind.LOWPASS, 1, 1000.0, None, None, 1.0),
    (SectionKind.HIGHPASS, 1): Section(SectionKind.HIGHPASS, 1, 1000.0, None, None, 1.0),
}


def topology_cases():
    """One pytest param per (topology, section kind and order, strategy): the first of gains 1, 2, -2
    the strategy accepts for the section of :data:`SECTIONS`; id ``topology-kindorder-strategy``."""
    from service.realization import TOPOLOGIES

    for name, topo in sorted(TOPOLOGIES.items()):
        for (kind, order), sec in SECTIONS.items():
            if kind not in topo.kinds or order != topo.order:
                continue
            for strategy in topo.strategy_names(kind):
                for gain in (1.0, 2.0, -2.0):
                    s = type(sec)(sec.kind, sec.order, sec.f0_hz, sec.q, sec.fz_hz, gain)
                    try:
                        ok = strategy in topo.strategies(s)
                    except Exception:
                        ok = False
                    if ok:
                        yield pytest.param(name, strategy, s, id=f"{name}-{kind.value}{order}-{strategy}")
                        break
