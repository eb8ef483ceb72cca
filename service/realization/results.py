"""Result records of a realized design (named fields, plain values).

:func:`service.realization.document_from_design` turns a :class:`Design` into
the JSON design document of the design notes; the field names here are the
public field names there.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from service.approximation.types import Section


@dataclass(frozen=True)
class DesignWarning:
    """A caution about a design: a stable ``code`` and a sentence for a person."""

    code: str
    message: str
    stage: int | None = None

    def as_dict(self) -> dict:
        d = {"code": self.code, "message": self.message}
        if self.stage is not None:
            d["stage"] = self.stage
        return d


@dataclass(frozen=True)
class Component:
    """One passive part of a stage.

    Attributes
    ----------
    ref : str
        Reference unique across the design (``"R7"``, ``"C3"``).
    role : str
        Role within the stage's topology (``"R1"``, ``"Rf"``, ...).
    kind : str
        ``"resistor"`` or ``"capacitor"``.
    value : float
        Chosen value (ohm or F).
    ideal : float or None
        Value the design equations ask for (ohm or F); None when unknown
        (a document edited by hand).
    tolerance : float or None
        Relative tolerance.
    dielectric : str or None
        Capacitors only.
    part_id : str or None
        Stock identifier, None for series values.
    in_range : bool
        Whether ``value`` lies in the caller's allowed range.
    """

    ref: str
    role: str
    kind: str
    value: float
    ideal: float | None
    tolerance: float | None
    dielectric: str | None
    part_id: str | None
    in_range: bool = True

    def as_dict(self) -> dict:
        d = {
            "ref": self.ref, "role": self.role, "kind": self.kind, "value": self.value,
            "ideal": self.ideal, "tolerance": self.tolerance,
        }
        if self.kind == "capacitor":
            d["dielectric"] = self.dielectric
        d["part_id"] = self.part_id
        return d


@dataclass(frozen=True)
class OpAmpUse:
    """One op-amp position of a stage and the part in it (None fields: ideal)."""

    ref: str
    role: str
    gbw_hz: float | None = None
    slew_v_per_us: float | None = None
    a0_db: float | None = None
    output_swing_v: float | None = None
    supply_v: float | None = None
    rout_ohm: float | None = None
    part_id: str | None = None
    en_nv_rthz: float | None = None
    in_pa_rthz: float | None = None
    en_corner_hz: float | None = None
    in_corner_hz: float | None = None
    vos_v: float | None = None
    ib_a: float | None = None
    rail_headroom_v: float | None = None

    def as_dict(self) -> dict:
        return {
            "ref": self.ref, "role": self.role, "gbw_hz": self.gbw_hz, "slew_v_per_us": self.slew_v_per_us,
            "a0_db": self.a0_db, "output_swing_v": self.output_swing_v, "supply_v": self.supply_v,
            "rout_ohm": self.rout_ohm, "part_id": self.part_id, "en_nv_rthz": self.en_nv_rthz,
            "in_pa_rthz": self.in_pa_rthz, "en_corner_hz": self.en_corner_hz, "in_corner_hz": self.in_corner_hz,
            "vos_v": self.vos_v, "ib_a": self.ib_a, "rail_headroom_v": self.rail_headroom_v,
        }


@dataclass(frozen=True)
class OpAmpRequirement:
    """What a stage asks of its op-amps.

    Attributes
    ----------
    error : float
        The allowed f0/Q error the GBW figures are for (0.01 = 1 %).
    gbw_rule_hz : float
        Rule-of-thumb GBW (Hz); ``gbw_rule`` names the rule and its source.
    gbw_required_hz : float or None
        Smallest GBW (Hz) with the single-pole macromodel keeping f0 and Q
        within ``error`` (circuit engine); None when no GBW does (gain floor).
    slew_required_v_per_us : float
        Slew rate (V/us) for the stage's output amplitude at ``signal_frequency_hz``.
    signal_frequency_hz : float
        Highest frequency (Hz) where the stage output is within 3 dB of its peak.
    output_peak_v : float
        Peak voltage (V) of the stage output when the filter output has
        the stated amplitude at its peak-gain frequency.
    gbw_required_predistorted_hz : float or None
        Smallest GBW (Hz) for which a stage predistorted for that GBW keeps
        f0 and Q within ``error`` when the part's GBW is off by ``gbw_spread``
        (:func:`service.realization.gbw.spread_errors`); computed when an op-amp
        is given (the stage is then predistorted for it), None otherwise or when no GBW does.
    gbw_spread : float or None
        The relative GBW spread that figure allows for.
    predistorted : bool
        Whether the stage's parts were designed for the given op-amp
        (:mod:`service.realization.predistortion`).
    design_section : dict or None
        What the design equations were asked for when predistorted:
        ``f0_hz``, ``q``, ``fz_hz``, ``gain``.
    """

    error: float
    gbw_rule_hz: float
    gbw_required_hz: float | None
    slew_required_v_per_us: float
    signal_frequency_hz: float
    output_peak_v: float
    gbw_rule: str = ""
    slew_rule: str = ""
    gbw_required_predistorted_hz: float | None = None
    gbw_spread: float | None = None
    predistorted: bool = False
    design_section: dict | None = None

    def as_dict(self) -> dict:
        return {
            "error": self.error, "gbw_rule_hz": self.gbw_rule_hz, "gbw_rule": self.gbw_rule,
            "gbw_required_hz": self.gbw_required_hz, "slew_required_v_per_us": self.slew_required_v_per_us,
            "slew_rule": self.slew_rule, "signal_frequency_hz": self.signal_frequency_hz,
            "output_peak_v": self.output_peak_v,
            "gbw_required_predistorted_hz": self.gbw_required_predistorted_hz, "gbw_spread": self.gbw_spread,
            "predistorted": self.predistorted, "design_section": self.design_section,
        }


@dataclass
class Stage:
    """One realized stage.

    ``achieved`` holds f0_hz, q, gain, fz_hz and their relative errors with
    ideal op-amps, read from the stage circuit by the circuit engine;
    ``achieved_macromodel`` the same with the given op-amp (None when ideal).
    ``peak_gain_db`` / ``peak_frequency_hz`` are the largest gain from the
    filter input to this stage's output and where it occurs.
    """

    index: int
    section: Section
    topology: str
    strategy: str
    components: list[Component]
    opamps: list[OpAmpUse]
    achieved: dict
    achieved_macromodel: dict | None
    opamp_requirement: OpAmpRequirement
    peak_gain_db: float
    peak_frequency_hz: float
    output_node: str = "out"


@dataclass(frozen=True)
class AnalysisOptions:
    """What the op-amp and headroom figures of an analysis are for.

    Attributes
    ----------
    gbw_error : float
        Relative f0/Q error the GBW figures are for (0.01 = 1 %), in (0, 0.5).
    output_amplitude_v : float
        Peak output voltage (V) of the slew-rate and swing figures, > 0.
    stage_peak_margin_db : float
        How far (dB) an intermediate stage output may peak above the filter output, >= 0.
    """

    gbw_error: float = 0.01
    output_amplitude_v: float = 1.0
    stage_peak_margin_db: float = 1.0


@dataclass
class Design:
    """A realized filter: stages, BOM, netlist and warnings (what it must meet is the workflow's).

    Attributes
    ----------
    response, family : str or None
    order : int
    stages : list of Stage
        In cascade order; ``Stage.index`` counts from 0, stage numbers in messages from 1.
    options : AnalysisOptions
    part_ranges : dict of str to (float, float)
        Allowed value range per part kind (``resistor``, ``capacitor``), ohm or F.
    part_series : dict of str to str
        Series name or ``"stock"`` per part kind.
    bom : list of dict
    netlist : str
        SPICE netlist of the whole filter (``VIN in 0 AC 1``, output ``out``).
    warnings : list of DesignWarning
    overall_gain : float
        Product of the stage gains (dimensionless, sign included).
    output_peak_gain_db : float
        Largest gain from input to output (dB).
    plans : list of StagePlan
        What the stages were analysed from.
    notes : list of DesignWarning
        The cautions found before the analysis (kept for a re-analysis of changed parts).
    """

    response: str | None
    family: str | None
    order: int
    stages: list[Stage]
    options: AnalysisOptions = field(default_factory=AnalysisOptions)
    part_ranges: dict = field(default_factory=dict)
    part_series: dict = field(default_factory=dict)
    bom: list = field(default_factory=list)
    netlist: str = ""
    warnings: list = field(default_factory=list)
    overall_gain: float = 1.0
    output_peak_gain_db: float = 0.0
    plans: list = field(default_factory=list, repr=False, compare=False)
    notes: list = field(default_factory=list, repr=False, compare=False)
