"""The interface every op-amp stage topology implements.

A topology turns one :class:`~service.approximation.Section` (a first- or
second-order section in the standard forms of
:class:`~service.approximation.SectionKind`) into part values, tells what
figures (f0, Q, gain, fz) any set of part values achieves with an ideal
op-amp, adds its circuit to a :class:`service.circuit.Circuit`, and gives the
normalized sensitivities of f0 and Q to each part.

Conventions
-----------
- Frequencies of sections and achieved figures are in hertz; the design
  equations work in rad/s (``w0 = 2*pi*f0_hz``) internally.
- Resistances in ohm, capacitances in farad.
- Vectorized: free capacitor candidates and part values are arrays of shape
  ``(N,)`` (float64); results have the same shape.
- Polarity: each stage realizes the section's standard form up to a sign.
  Inverting stages realize ``-|g|``; the sign is reported in
  ``achieved()["gain"]`` and by :meth:`Topology.forced_gain`, so a cascade can
  track polarity.
- Infeasible candidates (a ratio limit violated, a negative resistor) give
  NaN in every returned part value of that candidate; a section a strategy
  cannot realize at all raises :class:`~service.realization.errors.RealizationError`.

References
----------
.. [1] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*,
   Oxford University Press, 2001, ch. 3 (sensitivity of active RC circuits).
.. [2] L. P. Huelsman, *Active and Passive Analog Filter Design*, McGraw-Hill,
   1993.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from service.approximation.types import Section, SectionKind
from service.realization.errors import (
    RatioLimitViolated,
    RealizationError,
    UnknownStrategy,
    UnsupportedSection,
)

TWO_PI = 2.0 * math.pi
NOTCH_KINDS = frozenset({SectionKind.NOTCH, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH})
GROUND = "0"


@dataclass(frozen=True)
class PartSpec:
    """One part of a stage.

    Attributes
    ----------
    role : str
        Role within the stage (``"R1"``, ``"C2"``, ``"Rf"``, ...).
    kind : str
        ``"resistor"`` or ``"capacitor"``.
    free : bool
        True for a capacitor the value search chooses from stock; False for a
        part computed from the free ones (then snapped to a series).
    """

    role: str
    kind: str
    free: bool


def resistor(role: str) -> PartSpec:
    """A computed resistor."""
    return PartSpec(role, "resistor", False)


def capacitor(role: str, free: bool = True) -> PartSpec:
    """A capacitor, free unless told otherwise."""
    return PartSpec(role, "capacitor", free)


# ----------------------------------------------------------------------------
# small vectorized helpers shared by the topologies
# ----------------------------------------------------------------------------


def arr(values: Mapping[str, object], role: str) -> np.ndarray:
    """``values[role]`` as an array, keeping a complex dtype (complex-step derivatives)."""
    try:
        v = values[role]
    except KeyError:
        raise RealizationError(f"part value {role!r} is missing", field=f"values.{role}") from None
    a = np.asarray(v)
    if a.dtype.kind not in "fc":
        a = a.astype(np.float64)
    return a


def nan_where(mask: np.ndarray, *parts: np.ndarray) -> list[np.ndarray]:
    """Copies of ``parts`` with NaN where ``mask`` is True."""
    return [np.where(mask, np.nan, p) for p in parts]


def figures(kind: SectionKind, order: int, num: Sequence[np.ndarray], den: Sequence[np.ndarray]) -> dict[str, np.ndarray]:
    """Standard-form figures of a first- or second-order transfer function.

    Parameters
    ----------
    kind : SectionKind
    order : int
        1 or 2.
    num, den : sequence of ndarray, shape (N,) each
        Polynomial coefficients in s (rad/s), highest power first, each of
        length ``order + 1``.

    Returns
    -------
    dict
        ``f0_hz``, ``q`` (NaN for first order), ``gain`` in the section's
        standard form (see :class:`~service.approximation.SectionKind`), and
        for the notch kinds ``fz_hz`` and ``zero_damping`` (the damping
        ratio ``b1 / (2 sqrt(b0 b2))`` of the numerator: 0 when the zeros
        lie on the j-axis, as the standard form asks).  Pure arithmetic, so
        complex inputs give complex-step derivatives.
    """
    if order == 1:
        a1, a0 = den
        b1, b0 = num
        w0 = a0 / a1
        gain = b0 / a0 if kind == SectionKind.LOWPASS else b1 / a1
        q = np.full(np.shape(w0), np.nan)
        return {"f0_hz": w0 / TWO_PI, "q": q, "gain": gain}
    a2, a1, a0 = den
    b2, b1, b0 = num
    w0 = np.sqrt(a0 / a2)
    q = np.sqrt(a0 * a2) / a1
    out = {"f0_hz": w0 / TWO_PI, "q": q}
    if kind == SectionKind.LOWPASS:
        out["gain"] = b0 / a0
    elif kind == SectionKind.HIGHPASS:
        out["gain"] = b2 / a2
    elif kind == SectionKind.BANDPASS:
        out["gain"] = b1 / a1
    elif kind in NOTCH_KINDS:
        out["gain"] = b0 / a0
        out["fz_hz"] = np.sqrt(b0 / b2) / TWO_PI
        out["zero_damping"] = b1 / (2.0 * np.sqrt(b0 * b2))
    else:  # pragma: no cover - guarded by Topology.check
        raise UnsupportedSection(f"no standard figures for section kind {kind.value!r}", field="section.kind")
    return out


# ----------------------------------------------------------------------------
# the abstract topology
# ----------------------------------------------------------------------------


class Topology(ABC):
    """An op-amp stage topology: design equations, circuit and sensitivities.

    Class attributes
    ----------------
    name : str
        Public name (``"sallen_key"``, ...); the value of ``stages[].topology``.
    kinds : frozenset of SectionKind
        Section kinds it realizes.
    order : int
        Section order it realizes (1 or 2).
    reference : str
        Published source of its design equations.
    """

    name: str = ""
    kinds: frozenset = frozenset()
    order: int = 2
    reference: str = ""

    # -- to implement -------------------------------------------------------

    @abstractmethod
    def strategy_names(self, kind: SectionKind) -> tuple[str, ...]:
        """Every strategy the topology has for ``kind`` (first is the default)."""

    def strategy_applicable(self, section: Section, strategy: str) -> str | None:
        """None when ``strategy`` can realize ``section``; otherwise the reason (a sentence)."""
        return None

    def arbitrary_gain(self, kind: SectionKind, strategy: str) -> bool:
        """True when ``strategy`` sets the section's gain magnitude freely."""
        return strategy == "given_gain"

    @abstractmethod
    def opamp_roles(self, section: Section, strategy: str) -> tuple[str, ...]:
        """Op-amp roles of the stage: ``("U1",)`` or ``("U1", "U2", "U3")``..."""

    @abstractmethod
    def parts(self, section: Section, strategy: str) -> tuple[PartSpec, ...]:
        """Passive parts of the stage, free capacitors first."""

    @abstractmethod
    def forced_gain(self, section: Section, strategy: str) -> float | None:
        """Gain (standard form, with sign) the strategy imposes; None when it realizes ``section.gain``."""

    @abstractmethod
    def _design(self, section: Section, strategy: str, free: dict[str, np.ndarray], r_ref: float) -> tuple[dict[str, np.ndarray], np.ndarray]:
        """Part values and an infeasibility mask, shape (N,)."""

    @abstractmethod
    def polynomials(self, section: Section, strategy: str, values: Mapping[str, object]) -> tuple[list, list]:
        """``(num, den)`` in s (rad/s), highest power first, of the stage with an ideal op-amp."""

    @abstractmethod
    def build(self, circuit, section: Section, strategy: str, values: Mapping[str, object], refs: Mapping[str, str], *,
              input_node: str, output_node: str, prefix: str, opamp_model=None) -> None:
        """Add the stage to ``circuit`` (see :class:`service.circuit.Circuit`).

        Element names are ``refs[role]``; internal nodes are ``f"{prefix}_<name>"``.
        ``opamp_model`` is None for ideal op-amps.
        """

    def ratio_limit(self, section: Section, strategy: str) -> str | None:
        """The ratio limit the strategy imposes on its free parts, as a sentence (None if none)."""
        return None

    # -- shared behaviour --------------------------------------------------

    def strategies(self, section: Section) -> tuple[str, ...]:
        """Strategies that can realize ``section`` (first is the default).

        Raises
        ------
        UnsupportedSection
            When the topology does not realize the section's kind and order.
        """
        self.check_section(section)
        return tuple(s for s in self.strategy_names(section.kind) if self.strategy_applicable(section, s) is None)

    def check_section(self, section: Section) -> None:
        """Raise :class:`UnsupportedSection` unless the topology realizes ``section``."""
        kind = section.kind
        if kind not in self.kinds or section.order != self.order:
            kinds = ", ".join(sorted(k.value for k in self.kinds))
            raise UnsupportedSection(
                f"topology {self.name!r} cannot realize a {kind.value!r} section of order {section.order}; "
                f"it realizes order-{self.order} sections of kind {kinds}",
                field="topology",
            )
        if not (math.isfinite(section.f0_hz) and section.f0_hz > 0):
            raise RealizationError(f"section f0_hz must be a positive number of hertz, got {section.f0_hz!r}", field="section.f0_hz")
        if self.order == 2 and (section.q is None or not math.isfinite(section.q) or section.q <= 0):
            raise RealizationError(f"a second-order section needs a positive q, got {section.q!r}", field="section.q")
        if not math.isfinite(section.gain) or section.gain == 0:
            raise RealizationError(f"section gain must be a non-zero finite number, got {section.gain!r}", field="section.gain")
        if kind in NOTCH_KINDS and (section.fz_hz is None or not math.isfinite(section.fz_hz) or section.fz_hz <= 0):
            raise RealizationError(f"a {kind.value!r} section needs a positive fz_hz, got {section.fz_hz!r}", field="section.fz_hz")

    def check(self, section: Section, strategy: str) -> None:
        """Raise unless ``strategy`` of this topology can realize ``section``."""
        self.check_section(section)
        names = self.strategy_names(section.kind)
        if strategy not in names:
            raise UnknownStrategy(
                f"topology {self.name!r} has no strategy {strategy!r} for a {section.kind.value!r} section; "
                f"it offers {', '.join(names)}",
                field="strategy",
            )
        reason = self.strategy_applicable(section, strategy)
        if reason is not None:
            raise RealizationError(f"{self.name} {strategy}: {reason}", field="strategy")

    def free_roles(self, section: Section, strategy: str) -> tuple[str, ...]:
        """Roles of the free capacitors."""
        return tuple(p.role for p in self.parts(section, strategy) if p.free)

    def design(self, section: Section, strategy: str, free: Mapping[str, object], *, r_ref_ohm: float = 10e3,
               infeasible: str = "nan") -> dict[str, np.ndarray]:
        """Ideal part values for candidate free capacitors.

        Parameters
        ----------
        section : Section
        strategy : str
            One of :meth:`strategies`.
        free : dict of str to ndarray, shape (N,)
            Candidate values (F) of every free capacitor (:meth:`free_roles`).
        r_ref_ohm : float
            Resistance (ohm) of resistors that only a ratio fixes (gain-setting
            pairs, summing networks).
        infeasible : {"nan", "raise"}
            ``"nan"``: an infeasible candidate gives NaN in all its part values;
            ``"raise"``: raise :class:`RatioLimitViolated` naming the limit.

        Returns
        -------
        dict of str to ndarray, shape (N,), float64
            Values of every part (free ones included), ohm or F.
        """
        self.check(section, strategy)
        if not (math.isfinite(r_ref_ohm) and r_ref_ohm > 0):
            raise RealizationError(f"r_ref_ohm must be a positive resistance in ohm, got {r_ref_ohm!r}", field="r_ref_ohm")
        roles = self.free_roles(section, strategy)
        missing = [r for r in roles if r not in free]
        if missing:
            raise RealizationError(
                f"{self.name} {strategy} needs candidate values of its free capacitors {', '.join(roles)}; missing {', '.join(missing)}",
                field="free",
            )
        arrays = np.broadcast_arrays(*[np.asarray(free[r], dtype=np.float64) for r in roles])
        cand = {r: np.array(a, dtype=np.float64, ndmin=1) for r, a in zip(roles, arrays)}
        for r, a in cand.items():
            if np.any(~np.isfinite(a) | (a <= 0)):
                raise RealizationError(f"candidate values of {r} must be positive capacitances in farad", field=f"free.{r}")
        with np.errstate(invalid="ignore", divide="ignore"):
            values, bad = self._design(section, strategy, cand, float(r_ref_ohm))
            out = {}
            for role, v in values.items():
                v = np.broadcast_to(np.asarray(v, dtype=np.float64), bad.shape)
                bad = bad | ~np.isfinite(v) | (v <= 0)
                out[role] = v
        if np.any(bad):
            if infeasible == "raise":
                limit = self.ratio_limit(section, strategy) or "a computed part value is not a positive number"
                raise RatioLimitViolated(
                    f"{self.name} {strategy} cannot realize the {section.kind.value} section (f0 {section.f0_hz:g} Hz, "
                    f"Q {section.q}) with these free capacitors: {limit}",
                    field="free",
                )
        return {role: np.where(bad, np.nan, v) for role, v in out.items()}

    def achieved(self, section: Section, strategy: str, values: Mapping[str, object]) -> dict[str, np.ndarray]:
        """Figures the part values achieve with an ideal op-amp.

        Parameters
        ----------
        section : Section
            Gives the kind (and which output is the stage's).
        strategy : str
        values : dict of str to float or ndarray, shape (N,)
            Part values (ohm, F).

        Returns
        -------
        dict of str to ndarray, shape (N,)
            ``f0_hz`` (Hz), ``q`` (NaN for first order), ``gain`` (standard
            form of the section's kind, negative for an inverting stage) and
            ``fz_hz`` (Hz) for the notch kinds.
        """
        self.check(section, strategy)
        num, den = self.polynomials(section, strategy, values)
        return figures(section.kind, self.order, num, den)

    def sensitivities(self, section: Section, strategy: str, values: Mapping[str, float]) -> dict[str, tuple[float, float]]:
        """Normalized sensitivities ``(S^f0_x, S^Q_x)`` of each part, ideal op-amp.

        ``S^y_x = (x/y)(dy/dx)``, computed exactly (to rounding) by the
        complex-step derivative of :meth:`achieved`'s closed form
        (J. N. Lyness, C. B. Moler, "Numerical differentiation of analytic
        functions", SIAM J. Numer. Anal. 4 (1967) 202-210).  First-order
        stages give ``S^Q = 0``.

        Returns
        -------
        dict of str to (float, float)
        """
        self.check(section, strategy)
        base = {k: complex(float(np.asarray(v).reshape(-1)[0])) for k, v in values.items()}
        nominal = self.achieved(section, strategy, {k: np.array([v.real]) for k, v in base.items()})
        f0 = float(nominal["f0_hz"][0])
        q = float(nominal["q"][0])
        h = 1e-20
        out = {}
        for p in self.parts(section, strategy):
            vals = {k: np.array([v]) for k, v in base.items()}
            vals[p.role] = np.array([base[p.role] * (1.0 + 1j * h)])
            a = self.achieved(section, strategy, vals)
            sf = float(np.imag(a["f0_hz"][0])) / (h * f0)
            sq = 0.0 if self.order == 1 else float(np.imag(a["q"][0])) / (h * q)
            out[p.role] = (sf, sq)
        return out

    def describe(self) -> dict:
        """Catalog entry: ``{name, kinds, order, strategies, arbitrary_gain, opamps, reference}``.

        ``strategies``, ``arbitrary_gain`` (strategies that set any gain
        magnitude) and ``opamps`` (op-amp count) are given per kind.
        """
        kinds = sorted(self.kinds, key=lambda k: list(SectionKind).index(k))
        strategies = {k.value: list(self.strategy_names(k)) for k in kinds}
        probe = {k: _probe_section(k, self.order) for k in kinds}
        return {
            "name": self.name,
            "kinds": [k.value for k in kinds],
            "order": self.order,
            "strategies": strategies,
            "arbitrary_gain": {k.value: [s for s in self.strategy_names(k) if self.arbitrary_gain(k, s)] for k in kinds},
            "opamps": {k.value: len(self.opamp_roles(probe[k], self.strategy_names(k)[0])) for k in kinds},
            "reference": self.reference,
        }

    def __repr__(self) -> str:
        return f"<topology {self.name}>"


def _probe_section(kind: SectionKind, order: int) -> Section:
    """A representative section of ``kind`` (for catalog descriptions only)."""
    fz = {SectionKind.NOTCH: 1000.0, SectionKind.LOWPASS_NOTCH: 2000.0, SectionKind.HIGHPASS_NOTCH: 500.0}.get(kind)
    return Section(kind=kind, order=order, f0_hz=1000.0, q=None if order == 1 else 1.0, fz_hz=fz, gain=1.0)


def omega(section: Section) -> float:
    """Pole frequency of the section in rad/s."""
    return TWO_PI * section.f0_hz


def omega_z(section: Section) -> float:
    """Zero frequency of a notch-kind section in rad/s."""
    return TWO_PI * float(section.fz_hz)


def nodes(prefix: str, *names: str) -> list[str]:
    """Internal node names ``f"{prefix}_<name>"``."""
    return [f"{prefix}_{n}" for n in names]
