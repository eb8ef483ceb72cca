"""The design document: the one JSON shape designs come back in and go out as.

:class:`DesignDocument` is read once, strictly (:meth:`DesignDocument.from_json`):
every key known (the derived figures a reply carries are accepted and
ignored), every value typed and in the representable range of
:mod:`service.workflows.limits`, refs unique across the design, and every
stage's parts exactly those its topology needs (:meth:`DesignDocument.plans`).
Everything else -- achieved figures, op-amp needs, BOM, netlist, verdict --
is recomputed from ``stages`` (section, topology, strategy, components,
op-amps), ``requirement`` and ``settings``.

Field paths in errors count array entries from 0 (``stages[0]`` is stage 1);
stage numbers in messages count from 1.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from service.approximation import Family, ResponseType, Section, SectionKind, SectionOrder
from service.errors import RolloffError
from service.realization import Component, OpAmpUse, RealizationError
from service.realization.analysis import StagePlan
from service.realization.conditioning import check_plans
from service.realization.design import check_realizes, check_strategy, get_topology
from service.workflows import limits as L
from service.workflows.electrical import SupplySettings
from service.workflows.errors import DocumentError
from service.workflows.reading import Fields, join
from service.workflows.requirement import Requirement

PART_KINDS = ("resistor", "capacitor")

#: Keys of a stage that are read; the rest of :data:`STAGE_DERIVED` is recomputed and ignored on input.
STAGE_KEYS = ("section", "topology", "strategy", "components", "opamps")
STAGE_DERIVED = ("number", "achieved", "achieved_macromodel", "opamp_requirement", "peak_gain_db",
                 "peak_frequency_hz", "output_node", "schematic")
#: Keys of the document that are read, and the derived ones ignored on input.
DOCUMENT_KEYS = ("response", "family", "order", "stages", "requirement", "settings")
DOCUMENT_DERIVED = ("bom", "bom_lines", "netlist", "summary", "verdict", "warnings", "overall_gain",
                    "output_peak_gain_db", "service_version", "steps", "yield", "noise", "supply", "grades",
                    "cost")
COMPONENT_KEYS = ("ref", "role", "kind", "value", "ideal", "tolerance", "dielectric", "part_id")
OPAMP_FIGURES = ("gbw_hz", "slew_v_per_us", "a0_db", "output_swing_v", "supply_v", "rout_ohm", "en_nv_rthz",
                 "in_pa_rthz", "en_corner_hz", "in_corner_hz", "vos_v", "ib_a", "rail_headroom_v")
OPAMP_KEYS = ("ref", "role", *OPAMP_FIGURES, "part_id")
#: Range of each op-amp figure (None: any finite value >= 0).
_OPAMP_RANGES = {
    "gbw_hz": L.GBW_RANGE_HZ, "slew_v_per_us": L.SLEW_RANGE_V_PER_US, "a0_db": L.A0_RANGE_DB,
    "output_swing_v": L.VOLTAGE_RANGE_V, "supply_v": L.VOLTAGE_RANGE_V, "rout_ohm": L.ROUT_RANGE_OHM,
    **L.OPAMP_FIGURE_RANGES,
}
_OPAMP_UNITS = {"gbw_hz": "Hz", "en_corner_hz": "Hz", "in_corner_hz": "Hz", "output_swing_v": "V", "supply_v": "V",
                "vos_v": "V", "rail_headroom_v": "V", "rout_ohm": "ohm"}


@dataclass(frozen=True)
class PartRange:
    """Allowed value range of one part kind (ohm or F), ``low <= high``."""

    low: float
    high: float

    def contains(self, value: float) -> bool:
        return self.low * (1 - 1e-9) <= value <= self.high * (1 + 1e-9)


@dataclass(frozen=True)
class DesignSettings:
    """The options a design was made with; evaluation redoes its figures with them.

    Attributes
    ----------
    gbw_error : float
        Relative f0/Q error the op-amp GBW figures are for (0.01 = 1 %).
    output_amplitude_v : float
        Peak output voltage (V) of the slew-rate and swing figures.
    stage_peak_margin_db : float
        How far (dB) an intermediate stage may peak above the output.
    section_order : SectionOrder
    exact : bool
        Values kept unsnapped.
    impedance_ohm : float or None
        Preferred resistor level (ohm).
    ranges : dict of str to PartRange
        Allowed range per part kind (``resistor``, ``capacitor``): parts outside draw a warning.
    series : dict of str to str
        Series (``"E96"``) or ``"stock"`` per kind, as designed.
    passband_margin_db, stopband_margin_db : float or None
        Reserve the transfer function was designed with (dB), requirement designs.
    gain : float
        Overall passband gain asked for (V/V).
    supply : SupplySettings or None
        The board's rails (None: ground-referenced, rails not stated).
    """

    gbw_error: float = 0.01
    output_amplitude_v: float = 1.0
    stage_peak_margin_db: float = 1.0
    section_order: SectionOrder = SectionOrder.ASCENDING_Q
    exact: bool = False
    impedance_ohm: float | None = None
    ranges: dict[str, PartRange] = field(default_factory=dict)
    series: dict[str, str] = field(default_factory=dict)
    passband_margin_db: float | None = None
    stopband_margin_db: float | None = None
    gain: float = 1.0
    supply: SupplySettings | None = None

    KEYS = ("gbw_error", "output_amplitude_v", "stage_peak_margin_db", "section_order", "exact", "impedance_ohm",
            "ranges", "series", "passband_margin_db", "stopband_margin_db", "gain", "supply")

    def to_json(self) -> dict:
        return {
            "gbw_error": self.gbw_error, "output_amplitude_v": self.output_amplitude_v,
            "stage_peak_margin_db": self.stage_peak_margin_db, "section_order": self.section_order.value,
            "exact": self.exact, "impedance_ohm": self.impedance_ohm,
            "ranges": {k: [r.low, r.high] for k, r in self.ranges.items()},
            "series": dict(self.series), "passband_margin_db": self.passband_margin_db,
            "stopband_margin_db": self.stopband_margin_db, "gain": self.gain,
            "supply": None if self.supply is None else self.supply.to_json(),
        }

    @classmethod
    def from_json(cls, data: Any, path: str = "settings") -> "DesignSettings":
        if data is None:
            return cls()
        f = Fields(data, path, cls.KEYS)
        ranges = {}
        if f.has("ranges"):
            r = Fields(f.raw("ranges"), f.at("ranges"), PART_KINDS)
            for kind in PART_KINDS:
                pair = r.array(kind, max_items=2)
                if pair is None:
                    continue
                where = r.at(kind)
                if len(pair) != 2:
                    raise DocumentError(f"{where} must be [low, high]", field=where)
                lo, hi = (_value(v, join(where, i), kind) for i, v in enumerate(pair))
                if not lo <= hi:
                    raise DocumentError(f"{where} must be [low, high] with low <= high", field=where)
                ranges[kind] = PartRange(lo, hi)
        series = {}
        if f.has("series"):
            s = Fields(f.raw("series"), f.at("series"), PART_KINDS)
            for kind in PART_KINDS:
                if s.has(kind):
                    series[kind] = s.string(kind, max_length=16)
        return cls(
            gbw_error=f.number("gbw_error", low=1e-4, high=0.5, default=0.01),
            output_amplitude_v=f.number("output_amplitude_v", low=1e-3, high=1e3, default=1.0, unit="V"),
            stage_peak_margin_db=f.number("stage_peak_margin_db", low=0.0, high=40.0, default=1.0),
            section_order=f.enum("section_order", SectionOrder, default=SectionOrder.ASCENDING_Q),
            exact=f.boolean("exact"),
            impedance_ohm=f.number("impedance_ohm", low=10.0, high=1e8, unit="ohm"),
            ranges=ranges, series=series,
            passband_margin_db=f.number("passband_margin_db", low=0.0, high=3.0),
            stopband_margin_db=f.number("stopband_margin_db", low=0.0, high=60.0),
            gain=f.number("gain", low=1e-3, high=1e4, default=1.0),
            supply=SupplySettings.from_json(f.raw("supply"), f.at("supply")) if f.has("supply") else None,
        )


@dataclass(frozen=True)
class StageEntry:
    """One stage as the document states it: the section it should realize, how, and with which parts."""

    section: Section
    topology: str
    strategy: str | None
    components: tuple[Component, ...]
    opamps: tuple[OpAmpUse, ...]


@dataclass(frozen=True)
class DesignDocument:
    """A design document (see the module notes).

    Attributes
    ----------
    response : ResponseType or None
    family : Family or None
    order : int or None
    stages : tuple of StageEntry
        In cascade order (stage 1 first).
    requirement : Requirement or None
        What the design must meet; None for a design by order (nothing to verify).
    settings : DesignSettings
    """

    response: ResponseType | None
    family: Family | None
    order: int | None
    stages: tuple[StageEntry, ...]
    requirement: Requirement | None = None
    settings: DesignSettings = field(default_factory=DesignSettings)

    @classmethod
    def from_json(cls, data: Any, path: str = "") -> "DesignDocument":
        """Read a document strictly (see the module notes); errors name fields under ``path``."""
        f = Fields(data, path, DOCUMENT_KEYS + DOCUMENT_DERIVED)
        stages_in = f.array("stages", required=True, max_items=L.MAX_STAGES)
        if not stages_in:
            raise DocumentError("a design document needs at least one stage", field=f.at("stages"))
        seen: dict[str, str] = {}
        stages = tuple(_stage(st, join(f.at("stages"), i), seen) for i, st in enumerate(stages_in))
        requirement = None
        if f.has("requirement"):
            requirement = Requirement.from_json(f.raw("requirement"), f.at("requirement"))
        return cls(
            response=f.enum("response", ResponseType),
            family=f.enum("family", Family),
            order=f.integer("order", low=0, high=2 * L.MAX_STAGES),
            stages=stages, requirement=requirement,
            settings=DesignSettings.from_json(f.raw("settings"), f.at("settings")),
        )

    def plans(self, path: str = "") -> list[StagePlan]:
        """The stages as realization plans, after checking each against its topology.

        Raises
        ------
        DocumentError, RealizationError
            A section the topology cannot realize, an unknown strategy, a part the topology has no
            position for, a missing part or op-amp, or part values whose poles lie decades from the
            stage's section (a value in the wrong unit; :func:`check_plans`) (``field`` under ``path``).
        """
        plans = []
        for i, st in enumerate(self.stages):
            sf = join(join(path, "stages") if path else "stages", i)
            try:
                plans.append(_plan(st, i, sf, self.settings))
            except RealizationError as exc:
                if exc.field and not exc.field.startswith(sf):
                    exc.field = join(sf, exc.field)
                raise
        check_plans(plans, root=path)
        return plans

    def draw_order(self) -> list[str]:
        """Refs of the passive parts in document order (the Monte Carlo draw order)."""
        return [c.ref for st in self.stages for c in st.components]


def _value(v: Any, where: str, kind: str) -> float:
    from service.workflows.reading import number

    lo, hi = L.VALUE_RANGE[kind]
    return number(v, where, low=lo, high=hi, unit="ohm" if kind == "resistor" else "F")


def _section(data: Any, path: str) -> Section:
    f = Fields(data, path, ("kind", "order", "f0_hz", "q", "fz_hz", "gain"))
    kind = f.enum("kind", SectionKind, required=True)
    order = f.integer("order", low=1, high=2, default=2)
    flo, fhi = L.SECTION_FREQUENCY_RANGE_HZ
    f0 = f.number("f0_hz", required=True, low=flo, high=fhi, unit="Hz")
    q = f.number("q", low=L.SECTION_Q_RANGE[0], high=L.SECTION_Q_RANGE[1])
    if order == 2 and q is None:
        raise DocumentError(f"{f.at('q')} is required for a second-order section", field=f.at("q"))
    fz = f.number("fz_hz", low=flo, high=fhi, unit="Hz")
    gain = f.number("gain", low=-L.MAX_SECTION_GAIN, high=L.MAX_SECTION_GAIN, default=1.0)
    if gain == 0:
        raise DocumentError(f"{f.at('gain')} must not be 0", field=f.at("gain"))
    if order == 1 and kind not in (SectionKind.LOWPASS, SectionKind.HIGHPASS, SectionKind.ALLPASS):
        raise DocumentError(f"a first-order section is lowpass, highpass or allpass, not {kind.value}",
                            field=f.at("kind"))
    return Section(kind=kind, order=order, f0_hz=f0, q=q if order == 2 else None, fz_hz=fz, gain=gain)


def _claim(ref: str, where: str, seen: dict[str, str]) -> None:
    if ref in seen:
        raise DocumentError(f"ref {ref} repeats (first used at {seen[ref]}); refs must be unique across the design",
                            field=join(where, "ref"))
    seen[ref] = where


def _component(data: Any, path: str, seen: dict[str, str]) -> Component:
    f = Fields(data, path, COMPONENT_KEYS)
    ref = f.string("ref", required=True, max_length=L.MAX_REF_LENGTH)
    _check_ref(ref, f.at("ref"))
    _claim(ref, path, seen)
    kind = f.string("kind", required=True, max_length=16)
    if kind not in PART_KINDS:
        raise DocumentError(f"{ref}: unknown part kind {kind!r}: expected resistor or capacitor", field=f.at("kind"))
    value = _value(f.raw("value"), f.at("value"), kind) if f.has("value") else None
    if value is None:
        raise DocumentError(f"{f.at('value')} is required", field=f.at("value"))
    ideal = f.number("ideal", positive=True)
    return Component(
        ref=ref, role=f.string("role", max_length=L.MAX_REF_LENGTH), kind=kind, value=value, ideal=ideal,
        tolerance=f.number("tolerance", low=L.TOLERANCE_RANGE[0], high=L.TOLERANCE_RANGE[1]),
        dielectric=f.string("dielectric", max_length=L.MAX_DIELECTRIC_LENGTH) if kind == "capacitor" else None,
        part_id=f.string("part_id", max_length=L.MAX_ID_LENGTH))


def _opamp(data: Any, path: str, seen: dict[str, str]) -> OpAmpUse:
    f = Fields(data, path, OPAMP_KEYS)
    ref = f.string("ref", required=True, max_length=L.MAX_REF_LENGTH)
    _check_ref(ref, f.at("ref"))
    _claim(ref, path, seen)
    figures = {}
    for name in OPAMP_FIGURES:
        lo, hi = _OPAMP_RANGES[name]
        figures[name] = f.number(name, low=lo, high=hi, unit=_OPAMP_UNITS.get(name))
    return OpAmpUse(ref=ref, role=f.string("role", max_length=L.MAX_REF_LENGTH), part_id=f.string(
        "part_id", max_length=L.MAX_ID_LENGTH), **figures)


def _check_ref(ref: str, where: str) -> None:
    if not ref.isprintable() or ref != ref.strip() or any(ch.isspace() for ch in ref):
        raise DocumentError(f"{where} must be printable without spaces, got {ref!r}", field=where)


def _stage(data: Any, path: str, seen: dict[str, str]) -> StageEntry:
    f = Fields(data, path, STAGE_KEYS + STAGE_DERIVED)
    section = _section(f.raw("section"), f.at("section")) if f.has("section") else None
    if section is None:
        raise DocumentError(f"{f.at('section')} is required", field=f.at("section"))
    topology = f.string("topology", required=True, max_length=64)
    comps = f.array("components", required=True, max_items=L.MAX_COMPONENTS_PER_STAGE)
    ops = f.array("opamps", required=True, max_items=L.MAX_OPAMPS_PER_STAGE)
    return StageEntry(
        section=section, topology=topology, strategy=f.string("strategy", max_length=64),
        components=tuple(_component(c, join(f.at("components"), j), seen) for j, c in enumerate(comps)),
        opamps=tuple(_opamp(u, join(f.at("opamps"), j), seen) for j, u in enumerate(ops)))


def _plan(st: StageEntry, index: int, sf: str, settings: DesignSettings) -> StagePlan:
    """One stage checked against its topology, as a realization plan (stage ``index + 1``)."""
    number = index + 1
    topology = get_topology(st.topology, join(sf, "topology"))
    strategies = check_realizes(topology, st.section, join(sf, "topology"))
    strategy = check_strategy(topology, st.section, st.strategy, strategies, join(sf, "strategy"))
    specs = topology.parts(st.section, strategy)
    needed = {p.role: p for p in specs}
    left = {k: [p.role for p in specs if p.kind == k and p.role not in {c.role for c in st.components}]
            for k in PART_KINDS}
    comps: dict[str, Component] = {}
    for j, c in enumerate(st.components):
        cf = join(join(sf, "components"), j)
        role = c.role
        if not role:
            if not left[c.kind]:
                raise DocumentError(f"{c.ref}: the {topology.name} topology ({strategy}) of stage {number} has no "
                                    f"further {c.kind} position", field=cf)
            role = left[c.kind].pop(0)
        if role not in needed:
            raise DocumentError(f"{c.ref}: the {topology.name} topology ({strategy}) of stage {number} has no part "
                                f"{role!r}; its parts are {', '.join(needed)}", field=join(cf, "role"))
        if needed[role].kind != c.kind:
            raise DocumentError(f"{c.ref} ({role}) is a {c.kind} but the {topology.name} topology needs a "
                                f"{needed[role].kind} there", field=join(cf, "kind"))
        if role in comps:
            raise DocumentError(f"{c.ref}: part {role} of stage {number} is given twice", field=join(cf, "role"))
        rng = settings.ranges.get(c.kind)
        comps[role] = Component(ref=c.ref, role=role, kind=c.kind, value=c.value, ideal=c.ideal,
                                tolerance=c.tolerance, dielectric=c.dielectric, part_id=c.part_id,
                                in_range=True if rng is None else rng.contains(c.value))
    missing = [p for p in specs if p.role not in comps]
    if missing:
        names = ", ".join(f"{p.role} ({p.kind})" for p in missing)
        raise DocumentError(f"stage {number}: the {topology.name} topology ({strategy}) needs {names}, which the "
                            "stage lacks", field=join(sf, "components"))
    roles = list(topology.opamp_roles(st.section, strategy))
    free = [r for r in roles if r not in {u.role for u in st.opamps}]
    ops: dict[str, OpAmpUse] = {}
    for j, u in enumerate(st.opamps):
        uf = join(join(sf, "opamps"), j)
        role = u.role or (free.pop(0) if free else None)
        if role not in roles or role in ops:
            raise DocumentError(f"{u.ref}: the {topology.name} topology of stage {number} has op-amp positions "
                                f"{', '.join(roles) or 'none'} only", field=join(uf, "role"))
        ops[role] = OpAmpUse(**{**u.__dict__, "role": role})
    missing_u = [r for r in roles if r not in ops]
    if missing_u:
        raise DocumentError(f"stage {number}: the {topology.name} topology needs op-amp {', '.join(missing_u)}, "
                            "which the stage lacks", field=join(sf, "opamps"))
    return StagePlan(section=st.section, topology=topology, strategy=strategy,
                     components=[comps[p.role] for p in specs], opamps=[ops[r] for r in roles])


def prefixed(exc: RolloffError, path: str) -> RolloffError:
    """``exc`` with its field moved under ``path`` (e.g. ``design``)."""
    if path:
        exc.field = join(path, exc.field) if exc.field else path
    return exc
