"""Noise, headroom and supplies: what a filter adds to the signal, where it clips, and the rails it runs on.

The request concepts, read once and strictly (every field named from the
root of the request when it is wrong):

- :class:`SupplySettings` -- ``supply`` of a design request, kept in the
  design document's ``settings`` so that evaluation and responses rebuild the
  same circuit: the rails, how mid-rail is made, how the input is coupled;
- :class:`NoiseRequest` -- ``noise`` of ``/v1/responses``: integration band,
  temperature, a level for the signal-to-noise ratio, default op-amp noise;
- :class:`HeadroomRequest` -- ``headroom`` of ``/v1/responses``: the input
  or output level at which every op-amp output is compared with its range.

and the two operations that compose the computation packages for them:

- :func:`response_levels` -- the noise and headroom sections of a response
  of a design document (output noise density on the response's grid,
  integrated noise, ranked contributions, SNR and dynamic range; every
  op-amp output's level over frequency against its range, with a warning
  naming the stage, level, limit and frequency where a stage clips before
  the output);
- :func:`on_board` -- a design on its supply: the bias network and coupling
  parts in the BOM and the netlist, each op-amp output's DC operating point
  and the output offsets, a noise summary when the op-amps have noise
  figures, and a netlist that reproduces the noise (``.noise``, output and
  input named in a comment) and operating point (``.op``) in ngspice.

The filter is analysed on its supply (:func:`service.realization.filter_circuit`,
op-amps carrying their noise and DC figures); the computations are those of
:mod:`service.response.noise` (adjoint noise analysis, Rohrer et al. 1971),
:mod:`service.response.headroom` and :mod:`service.realization.supply`.
Every request's work is checked by the cost model (:func:`costs.check_levels`)
before it starts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from enum import Enum
from typing import Any, Sequence

import numpy as np

from service.circuit import DEFAULT_TEMPERATURE_K, Circuit, dc_operating_point, prepare_ac, to_spice
from service.config import Settings
from service.realization import Design, DesignWarning
from service.realization.analysis import StagePlan
from service.realization.cascade import analysis_grid
from service.realization.supply import CAUTION_SPAN_V, Supply, SupplyReport, filter_circuit, supply_report
from service.response.errors import InvalidLevel
from service.response.headroom import HeadroomReport, analyze_headroom
from service.response.noise import (INTEGRATION_POINTS_PER_DECADE, MAX_TEMPERATURE_K, NoiseReport, analyze_noise,
                                    integration_grid)
from service.workflows import costs
from service.workflows import limits as L
from service.workflows.errors import WorkflowError
from service.workflows.reading import Fields, join

#: Input level (V peak) at which the largest undistorted output is found when no level is asked: the
#: result (each output's range over its peak gain) does not depend on it.
PROBE_INPUT_V = 1e-3
#: Points per decade of the ``.noise`` sweep of a design's netlist and of its noise summary (the same grid,
#: so that ngspice's ``onoise_total`` over the sweep reproduces ``output_rms_v``).
DESIGN_NOISE_POINTS_PER_DECADE = INTEGRATION_POINTS_PER_DECADE
#: Noise sources the bias network of a single rail adds at most (two divider resistors, the input bias
#: resistor, three sources of the mid-rail buffer).
BIAS_NETWORK_SOURCES = 6
#: Relative slack of "within the grid" for a noise band (rounding of SI strings).
GRID_SLACK = 1e-9
#: A stage that clips less than this below the output's own clipping input (dB) draws no warning: it costs the
#: dynamic range less than that (common practice, no source).
CLIP_TIE_DB = 0.1

NOISE_FIGURES = ("en_nv_rthz", "in_pa_rthz", "en_corner_hz", "in_corner_hz")
DC_FIGURES = ("vos_v", "ib_a")


class MidRail(str, Enum):
    """How a single rail's mid-rail signal ground is made."""

    BUFFERED = "buffered"
    DIVIDER = "divider"


class InputCoupling(str, Enum):
    """How the input reaches the first stage on a single rail (``auto``: chosen from the response)."""

    AUTO = "auto"
    DC = "dc"
    AC = "ac"
    NONE = "none"


# ------------------------------------------------------------------------------------------ the requests


@dataclass(frozen=True)
class SupplySettings:
    """The board's supply rails and the single-rail options.

    Attributes
    ----------
    v_pos, v_neg : float
        Rail voltages, V; ``v_neg = 0`` is a single rail (the stages are re-referenced to mid-rail),
        ``v_neg < 0 < v_pos`` split rails (the circuit as designed).
    mid_rail : MidRail
        Single rail: mid-rail from a buffered divider (default) or the decoupled divider alone.
    input_coupling : InputCoupling
        Single rail: ``dc`` (the source is referred to mid-rail), ``ac`` (coupling capacitor and bias
        resistor), ``none`` (the source stays ground-referenced; the first stage blocks DC) or ``auto``.
    """

    v_pos: float
    v_neg: float = 0.0
    mid_rail: MidRail = MidRail.BUFFERED
    input_coupling: InputCoupling = InputCoupling.AUTO

    KEYS = ("v_pos", "v_neg", "mid_rail", "input_coupling")

    @property
    def single_rail(self) -> bool:
        return self.rails().single_rail

    @property
    def span_v(self) -> float:
        """``v_pos - v_neg``, V."""
        return self.rails().span_v

    def to_json(self) -> dict:
        return {"v_pos": self.v_pos, "v_neg": self.v_neg, "mid_rail": self.mid_rail.value,
                "input_coupling": self.input_coupling.value}

    def rails(self) -> Supply:
        """The rails as the realization owns them (:class:`service.realization.supply.Supply`)."""
        return Supply(self.v_pos, self.v_neg)

    @classmethod
    def from_json(cls, data: Any, path: str = "supply", error: type = WorkflowError) -> "SupplySettings":
        """Read ``supply`` strictly: rails within +/-100 V, ``v_neg <= 0 < v_pos`` (not reversed, not a
        zero span), known options; errors name the field under ``path``."""
        f = Fields(data, path, cls.KEYS, error=error)
        lo, hi = L.RAIL_RANGE_V
        v_pos = f.number("v_pos", required=True, low=lo, high=hi, unit="V")
        v_neg = f.number("v_neg", low=lo, high=hi, unit="V", default=0.0)
        if v_pos == v_neg:
            raise error(f"{f.at('v_pos')} equals {f.at('v_neg')} ({v_pos:g} V): a supply with zero span",
                        field=f.at("v_pos"))
        if v_pos < v_neg:
            raise error(f"the rails are reversed: {f.at('v_pos')} ({v_pos:g} V) must be above {f.at('v_neg')} "
                        f"({v_neg:g} V)", field=f.at("v_pos"))
        if v_neg > 0:
            raise error(f"{f.at('v_neg')} must be 0 (a single rail) or negative (split rails), got {v_neg:g} V: "
                        "ground must lie at or between the rails", field=f.at("v_neg"))
        if v_pos <= 0:
            raise error(f"{f.at('v_pos')} must be positive, got {v_pos:g} V", field=f.at("v_pos"))
        return cls(v_pos=float(v_pos), v_neg=float(v_neg),
                   mid_rail=f.enum("mid_rail", MidRail, default=MidRail.BUFFERED),
                   input_coupling=f.enum("input_coupling", InputCoupling, default=InputCoupling.AUTO))


def _level(f: Fields, key: str) -> float | None:
    lo, hi = L.LEVEL_RANGE_V
    return f.number(key, low=lo, high=hi, unit="V")


@dataclass(frozen=True)
class NoiseRequest:
    """What ``noise`` of ``/v1/responses`` asks for.

    Attributes
    ----------
    band_hz : (float, float) or None
        Integration band, Hz, within the response's frequencies; None: the whole (positive) grid.
    temperature_k : float
        Temperature of the resistors, K.
    full_scale_v : float or None
        Output full scale (V peak of a sine) for the signal-to-noise ratio.
    input_peak_v : float or None
        Or: an input sine's peak (V); its output level is this times the reference gain.
    points_per_decade : int
        Density of the integration grid.
    opamp : dict of str to float
        Noise figures (``en_nv_rthz``, ``in_pa_rthz``, ``en_corner_hz``, ``in_corner_hz``) for every
        op-amp of the design that gives none.
    """

    band_hz: tuple[float, float] | None = None
    temperature_k: float = DEFAULT_TEMPERATURE_K
    full_scale_v: float | None = None
    input_peak_v: float | None = None
    points_per_decade: int = INTEGRATION_POINTS_PER_DECADE
    opamp: dict[str, float] = field(default_factory=dict)

    KEYS = ("band_hz", "temperature_k", "full_scale_v", "input_peak_v", "points_per_decade", "opamp")

    @classmethod
    def from_json(cls, data: Any, path: str = "noise") -> "NoiseRequest":
        """Read ``noise`` strictly (see the attributes); errors name the field under ``path``."""
        f = Fields({} if data is None else data, path, cls.KEYS, error=WorkflowError)
        band = None
        pair = f.array("band_hz", max_items=2)
        if pair is not None:
            where = f.at("band_hz")
            if len(pair) != 2:
                raise WorkflowError(f"{where} must be [low, high] in Hz", field=where)
            from service.workflows.reading import number

            lo, hi = (number(v, join(where, i), low=0.0, high=1e12, unit="Hz", error=WorkflowError)
                      for i, v in enumerate(pair))
            if not 0 < lo < hi:
                raise WorkflowError(f"{where} must be [low, high] with 0 < low < high (Hz), got [{lo:g}, {hi:g}]",
                                    field=where)
            band = (lo, hi)
        full_scale = _level(f, "full_scale_v")
        input_peak = _level(f, "input_peak_v")
        if full_scale is not None and input_peak is not None:
            raise WorkflowError(f"give one of {f.at('full_scale_v')} and {f.at('input_peak_v')}, not both",
                                field=f.at("input_peak_v"))
        figures = {}
        if f.has("opamp"):
            o = Fields(f.raw("opamp"), f.at("opamp"), NOISE_FIGURES, error=WorkflowError)
            for name in NOISE_FIGURES:
                lo, hi = L.OPAMP_FIGURE_RANGES[name]
                v = o.number(name, low=lo, high=hi, unit="Hz" if name.endswith("_hz") else None)
                if v is not None:
                    figures[name] = v
        return cls(
            band_hz=band,
            temperature_k=f.number("temperature_k", low=1e-3, high=MAX_TEMPERATURE_K, default=DEFAULT_TEMPERATURE_K),
            full_scale_v=full_scale, input_peak_v=input_peak,
            points_per_decade=f.integer("points_per_decade", low=10, high=2000,
                                        default=INTEGRATION_POINTS_PER_DECADE),
            opamp=figures)


@dataclass(frozen=True)
class HeadroomRequest:
    """What ``headroom`` of ``/v1/responses`` asks for: exactly one level.

    Attributes
    ----------
    input_peak_v : float or None
        Peak of a sine at the filter input, V.
    output_peak_v : float or None
        Or: the filter output's peak at its peak-gain frequency, V (the input is derived).
    """

    input_peak_v: float | None = None
    output_peak_v: float | None = None

    KEYS = ("input_peak_v", "output_peak_v")

    @classmethod
    def from_json(cls, data: Any, path: str = "headroom") -> "HeadroomRequest":
        f = Fields(data, path, cls.KEYS, error=WorkflowError)
        inp, out = _level(f, "input_peak_v"), _level(f, "output_peak_v")
        if (inp is None) == (out is None):
            raise WorkflowError(f"give exactly one of {f.at('input_peak_v')} and {f.at('output_peak_v')}",
                                field=f.at("input_peak_v"))
        return cls(input_peak_v=inp, output_peak_v=out)


# ------------------------------------------------------------------------------------------ the circuit


@dataclass
class Board:
    """The filter as the noise and level analyses see it.

    Attributes
    ----------
    circuit : Circuit
        On its supply, op-amps carrying their noise and DC figures; ``VIN`` the input, ``out`` the output.
    stage_of : dict of str to int or None
        Part or op-amp ref -> stage number (from 1); None for the parts a supply adds.
    limits : dict of str to (float or None, float or None)
        Op-amp ref -> absolute output range, V.
    dc_v : dict of str to float
        Op-amp ref -> DC level of its output, V.
    bias_v : float
        The stages' signal ground, V (mid-rail on a single rail).
    rails : (float, float) or None
        ``(v_neg, v_pos)`` of the supply, V.
    report : SupplyReport or None
        The supply's operating point and added parts (designs on a supply).
    """

    circuit: Circuit
    stage_of: dict[str, int | None]
    limits: dict[str, tuple[float | None, float | None]]
    dc_v: dict[str, float]
    bias_v: float = 0.0
    rails: tuple[float, float] | None = None
    report: SupplyReport | None = None

    @property
    def ranges_known(self) -> bool:
        return any(lo is not None or hi is not None for lo, hi in self.limits.values())


def _stage_refs(plans: Sequence[StagePlan]) -> dict[str, int | None]:
    out: dict[str, int | None] = {}
    for k, p in enumerate(plans, start=1):
        for ref in [c.ref for c in p.components] + [u.ref for u in p.opamps]:
            out[ref] = k
    return out


def _has(plans: Sequence[StagePlan], names: Sequence[str]) -> bool:
    """Whether any op-amp of ``plans`` gives a non-zero figure among ``names``."""
    return any(getattr(u, n, None) for p in plans for u in p.opamps for n in names)


def board(design: Design, supply: SupplySettings | None, *, opamp: dict | None = None,
          report: bool = False) -> Board:
    """The filter of ``design`` on ``supply``, as the noise and level analyses see it.

    Parameters
    ----------
    design : Design
        Its plans, part ranges and series (the bias network's parts come from the same series).
    supply : SupplySettings or None
    opamp : dict, optional
        Noise figures for the op-amps that give none.
    report : bool
        With a supply, compute its whole report (offsets per stage, the passband check, added parts)
        rather than the DC levels alone.

    Returns
    -------
    Board
    """
    plans = design.plans
    stage_of = _stage_refs(plans)
    kwargs = dict(opamp=dict(opamp) if opamp else None)
    if supply is not None:
        kwargs.update(mid_rail=supply.mid_rail.value, input_coupling=supply.input_coupling.value)
    if supply is not None and report:
        rep = supply_report(design, supply=supply.rails(), **kwargs)
        for b in rep.opamp_bias:
            stage_of.setdefault(b.ref, b.stage)
        return Board(rep.circuit, stage_of, {b.ref: (b.low_v, b.high_v) for b in rep.opamp_bias},
                     {b.ref: b.dc_v for b in rep.opamp_bias}, rep.bias_v, (supply.v_neg, supply.v_pos), rep)
    fc = filter_circuit(design, supply=None if supply is None else supply.rails(), **kwargs)
    for ref, k in fc.opamp_stage.items():
        stage_of.setdefault(ref, k)
    dc = {ref: 0.0 for ref in fc.opamp_outputs}
    if supply is not None or _has(plans, DC_FIGURES):
        op = dc_operating_point(fc.circuit)
        dc = {ref: float(op.voltage(node)[0]) for ref, node in fc.opamp_outputs.items()}
    return Board(fc.circuit, stage_of, dict(fc.output_limits), dc, fc.bias_v,
                 None if supply is None else (supply.v_neg, supply.v_pos))


def _shell(plans: Sequence[StagePlan], settings) -> Design:
    """A Design carrying only what the supply network reads: the plans, part ranges and series."""
    d = Design(response=None, family=None, order=sum(p.section.order for p in plans), stages=[],
               part_ranges={k: (r.low, r.high) for k, r in settings.ranges.items()},
               part_series=dict(settings.series))
    d.plans = list(plans)
    return d


def _sources(plans: Sequence[StagePlan], supply: SupplySettings | None) -> int:
    """Noise sources of the circuit, at most (resistors, three per op-amp, the bias network)."""
    n = sum(1 for p in plans for c in p.components if c.kind == "resistor")
    n += 3 * sum(len(p.opamps) for p in plans)
    return n + (BIAS_NETWORK_SOURCES if supply is not None and supply.single_rail else 0)


def _opamp_count(plans: Sequence[StagePlan], supply: SupplySettings | None) -> int:
    return sum(len(p.opamps) for p in plans) + (1 if supply is not None and supply.single_rail else 0)


# ------------------------------------------------------------------------------------------ level analysis


def _stage_name(stage: int | None) -> str:
    return f"stage {stage}" if stage is not None else "the mid-rail bias network"


def level_warnings(rep: HeadroomReport) -> list[DesignWarning]:
    """Every op-amp that clips at the analysed level, and the one that clips first when it is not the
    output's (by more than :data:`CLIP_TIE_DB`): each names the stage, the level, the limit and the frequency."""
    out = []
    for o in rep.opamps:
        if o.headroom_db is not None and o.headroom_db < 0:
            out.append(DesignWarning(
                "stage_clips",
                f"{_stage_name(o.stage)}: {o.ref}'s output reaches {o.peak_v:.4g} V peak at "
                f"{o.peak_frequency_hz:.4g} Hz, beyond its limit of {o.limit_v:.4g} V about {o.dc_v:.4g} V "
                f"(output range {_range(o.low_v, o.high_v)}) at an input of {rep.input_peak_v:.4g} V peak",
                stage=o.stage))
    driver = next((r for r in rep.opamps if r.node == "out"), None)
    if rep.clips_before_output and rep.first_clip is not None and not (
            driver is not None and driver.clip_input_v is not None
            and rep.clip_input_v >= driver.clip_input_v * 10 ** (-CLIP_TIE_DB / 20)):
        o = next(r for r in rep.opamps if r.ref == rep.first_clip)
        out.append(DesignWarning(
            "clips_before_output",
            f"{_stage_name(o.stage)} clips before the output: {o.ref} reaches its limit of {o.limit_v:.4g} V "
            f"at {o.peak_frequency_hz:.4g} Hz when the input is {o.clip_input_v:.4g} V peak, while the output is "
            f"then {rep.max_output_v:.4g} V peak; at the {rep.input_peak_v:.4g} V peak input analysed its level "
            f"is {o.peak_v:.4g} V peak", stage=o.stage))
    return out


def _range(lo, hi) -> str:
    def fmt(x):
        return "unbounded" if x is None else f"{x:.4g}"
    return f"[{fmt(lo)}, {fmt(hi)}] V"


def _levels(b: Board, grid_hz: np.ndarray, *, input_peak_v: float | None = None,
            output_peak_v: float | None = None, field: str = "headroom") -> HeadroomReport:
    """Levels of every op-amp output (a single-trial circuit) on ``grid_hz``; an input beyond the rails is
    a 422 naming ``field``'s level."""
    try:
        return analyze_headroom(b.circuit, grid_hz, limits=b.limits, dc_v=b.dc_v, stage_of=b.stage_of,
                                input_peak_v=input_peak_v, output_peak_v=output_peak_v, input_bias_v=b.bias_v,
                                rails=b.rails)
    except InvalidLevel as exc:
        if exc.field in ("input_peak_v", "output_peak_v"):
            exc.field = join(field, exc.field)
        raise


#: The response's frequencies join the peak search up to this factor beyond the sections' analysis grid.
PEAK_GRID_REACH = 100.0


def _peak_grid(plans: Sequence[StagePlan], frequency_hz: np.ndarray) -> np.ndarray:
    """The sections' analysis grid with the response's frequencies near it (Hz): the peaks are searched there.

    The response's frequencies far from every section are left out: the circuit engine scales its polynomial
    variable to the grid's geometric centre, and a grid spanning twenty decades (a default grid around a
    bandpass's zeros at the origin) would move it far from the circuit's poles.
    """
    g = analysis_grid([p.section for p in plans])
    f = np.asarray(frequency_hz, dtype=float)
    near = f[(f >= g[0] / PEAK_GRID_REACH) & (f <= g[-1] * PEAK_GRID_REACH)]
    return np.unique(np.concatenate([near, g]))


def _level_curves(b: Board, rep: HeadroomReport, frequency_hz: np.ndarray) -> dict[str, np.ndarray]:
    """Op-amp ref -> peak swing (V) on ``frequency_hz`` at the report's input level."""
    return {o.ref: rep.input_peak_v * np.abs(prepare_ac(b.circuit, frequency_hz, o.node).response()[0])
            for o in rep.opamps}


# ------------------------------------------------------------------------------------------ responses


@dataclass
class NoiseSection:
    """The ``noise`` section of a response (see :func:`response_levels`).

    Attributes
    ----------
    report : NoiseReport
        On the response grid's positive frequencies.
    frequency_hz : ndarray, shape (F,)
        The response grid (Hz); densities are None where it is 0 Hz.
    signal_input_v : float or None
        The input level the SNR is for, when given as ``input_peak_v``.
    snr_db : float or None
    netlist : str
        The circuit with ``.noise v(out) VIN`` over the band: ngspice's ``onoise_total`` reproduces
        ``output_rms_v``.
    """

    report: NoiseReport
    frequency_hz: np.ndarray
    signal_input_v: float | None
    snr_db: float | None
    netlist: str

    def densities(self) -> tuple[list, list]:
        """Output and input-referred densities (V/sqrt(Hz)) on the response grid, None at 0 Hz."""
        pos = self.frequency_hz > 0
        out: list = [None] * self.frequency_hz.size
        inp: list = [None] * self.frequency_hz.size
        idx = np.flatnonzero(pos)
        for j, i in enumerate(idx):
            out[i] = float(self.report.output_density_v_rthz[j])
            x = float(self.report.input_density_v_rthz[j])
            inp[i] = x if math.isfinite(x) else None
        return out, inp

    def as_dict(self) -> dict:
        r = self.report
        out, inp = self.densities()
        return {
            "band_hz": list(r.band_hz), "temperature_k": r.temperature_k,
            "output_density_v_rthz": out, "input_density_v_rthz": inp,
            "output_rms_v": r.output_rms_v, "input_rms_v": _finite(r.input_rms_v),
            "reference_gain": r.reference_gain,
            "full_scale_v": r.full_scale_v if self.signal_input_v is None else self.signal_input_v * r.reference_gain,
            "input_peak_v": self.signal_input_v, "snr_db": self.snr_db,
            "max_output_v": r.max_output_v, "dynamic_range_db": r.dynamic_range_db,
            "parts": [c.as_dict() for c in r.parts], "stages": [c.as_dict() for c in r.stages],
            "sources": [c.as_dict() for c in r.sources], "notes": list(r.notes), "netlist": self.netlist,
        }


@dataclass
class HeadroomSection:
    """The ``headroom`` section of a response: every op-amp output's level on the response grid."""

    report: HeadroomReport
    curves: dict[str, np.ndarray]
    warnings: list[DesignWarning]
    notes: list[str]

    def levels(self) -> dict[str, np.ndarray]:
        """Op-amp ref -> peak level (V) over the response grid."""
        return self.curves

    def as_dict(self) -> dict:
        r = self.report
        levels = self.levels()
        first = next((o for o in r.opamps if o.ref == r.first_clip), None)
        return {
            "input_peak_v": r.input_peak_v, "output_peak_v": r.input_peak_v * r.output_peak_gain,
            "output_peak_gain": r.output_peak_gain,
            "opamps": [dict(o.as_dict(), level_v=levels[o.ref].tolist()) for o in r.opamps],
            "first_clip": None if first is None else {"ref": first.ref, "stage": first.stage},
            "clip_input_v": r.clip_input_v, "max_output_v": r.max_output_v,
            "clips_before_output": r.clips_before_output,
            "warnings": [w.as_dict() for w in self.warnings], "notes": list(self.notes),
        }


@dataclass
class ResponseLevels:
    """The noise and headroom sections of a response (each None when not asked)."""

    noise: NoiseSection | None = None
    headroom: HeadroomSection | None = None

    def as_dict(self) -> dict:
        return {"noise": None if self.noise is None else self.noise.as_dict(),
                "headroom": None if self.headroom is None else self.headroom.as_dict()}

    def columns(self) -> dict[str, np.ndarray]:
        """CSV columns on the response grid: noise densities and op-amp levels (empty when not asked)."""
        cols: dict[str, np.ndarray] = {}
        if self.noise is not None:
            out, inp = self.noise.densities()
            cols["output_noise_v_rthz"] = np.array([np.nan if x is None else x for x in out])
            cols["input_noise_v_rthz"] = np.array([np.nan if x is None else x for x in inp])
        if self.headroom is not None:
            for ref, lv in self.headroom.levels().items():
                cols[f"level_{ref}_v"] = lv
        return cols


def _finite(x):
    return x if x is not None and math.isfinite(x) else None


def _band(noise: NoiseRequest, f_pos: np.ndarray) -> tuple[float, float]:
    if f_pos.size < 2:
        raise WorkflowError("the noise analysis needs at least two positive frequencies in the response's grid",
                            field="frequencies")
    fmin, fmax = float(f_pos[0]), float(f_pos[-1])
    if noise.band_hz is None:
        return fmin, fmax
    lo, hi = noise.band_hz
    if lo < fmin * (1 - GRID_SLACK) or hi > fmax * (1 + GRID_SLACK):
        raise WorkflowError(
            f"noise.band_hz [{lo:g}, {hi:g}] Hz lies outside the response's frequencies [{fmin:g}, {fmax:g}] Hz: "
            "narrow the band or widen frequencies", field="noise.band_hz")
    return max(lo, fmin), min(hi, fmax)


def check_response_levels(plans: Sequence[StagePlan], supply: SupplySettings | None, points: int,
                          noise: NoiseRequest | None, headroom: HeadroomRequest | None, settings: Settings,
                          base_units: float, frequency_hz: np.ndarray) -> None:
    """The cost model of a response's noise and headroom sections, and the levels that need no computing
    (a band outside the grid, an input beyond the rails), checked before any of it is computed."""
    if headroom is not None and headroom.input_peak_v is not None and supply is not None:
        bias = supply.v_pos / 2 if supply.single_rail else 0.0
        if not (supply.v_neg <= bias - headroom.input_peak_v and bias + headroom.input_peak_v <= supply.v_pos):
            raise InvalidLevel(f"an input of {headroom.input_peak_v:.4g} V peak about {bias:g} V swings beyond the "
                               f"rails [{supply.v_neg:g}, {supply.v_pos:g}] V", field="headroom.input_peak_v")
    shape = costs.CircuitShape.of(plans)
    peak_points = points + analysis_grid([p.section for p in plans]).size
    noise_points = 0
    if noise is not None:
        f_pos = np.asarray(frequency_hz, dtype=float)
        f_pos = f_pos[f_pos > 0]
        band = _band(noise, f_pos)
        noise_points = f_pos.size + integration_grid(band, noise.points_per_decade).size
    work = costs.LevelsWork(
        noise_points=noise_points, noise_sources=_sources(plans, supply),
        headroom_points=(peak_points + (points if headroom is not None else 0)
                         if (headroom is not None or noise is not None) else 0),
        opamps=_opamp_count(plans, supply), supply=supply is not None)
    costs.check_levels(shape, work, settings, base_units=base_units,
                       field="noise.points_per_decade" if noise is not None else "headroom")


def response_levels(plans: Sequence[StagePlan], document_settings, frequency_hz: np.ndarray,
                    noise: NoiseRequest | None, headroom: HeadroomRequest | None) -> ResponseLevels:
    """The noise and headroom sections of a response of a design document.

    Parameters
    ----------
    plans : sequence of StagePlan
        The document's stages.
    document_settings : DesignSettings
        Its settings (supply, part ranges and series of the bias network).
    frequency_hz : ndarray, shape (F,)
        The response's grid, Hz.
    noise, headroom : NoiseRequest, HeadroomRequest or None

    Returns
    -------
    ResponseLevels

    Raises
    ------
    WorkflowError, InvalidLevel, RealizationError, CircuitError
        A band outside the grid, an input beyond the rails, figures out of range (``field`` names it).
    """
    supply = document_settings.supply
    b = board(_shell(plans, document_settings), supply, opamp=noise.opamp if noise is not None else None)
    f = np.asarray(frequency_hz, dtype=float)
    out = ResponseLevels()
    rep = None
    if headroom is not None or (noise is not None and b.ranges_known):
        grid = _peak_grid(plans, f)
        if headroom is not None:
            rep = _levels(b, grid, input_peak_v=headroom.input_peak_v, output_peak_v=headroom.output_peak_v)
            notes = []
            if not b.ranges_known:
                notes.append("no op-amp output range is known: give the op-amps' output_swing_v, or a supply in the "
                             "design's settings, to compare the levels with it")
            out.headroom = HeadroomSection(rep, _level_curves(b, rep, f), level_warnings(rep), notes)
        else:
            rep = _levels(b, grid, input_peak_v=PROBE_INPUT_V)
    if noise is not None:
        f_pos = f[f > 0]
        band = _band(noise, f_pos)
        report = analyze_noise(b.circuit, f_pos, band, temperature_k=noise.temperature_k, stage_of=b.stage_of,
                               full_scale_v=noise.full_scale_v,
                               max_output_v=None if rep is None else rep.max_output_v,
                               points_per_decade=noise.points_per_decade)
        snr = report.snr_db
        if noise.input_peak_v is not None and report.output_rms_v > 0:
            snr = 20 * math.log10(noise.input_peak_v * report.reference_gain / math.sqrt(2) / report.output_rms_v)
        netlist = to_spice(b.circuit, output="out", ac=None, temperature_k=noise.temperature_k,
                           noise=("dec", noise.points_per_decade, band[0], band[1]))
        out.noise = NoiseSection(report, f, noise.input_peak_v, snr, netlist)
    return out


# ------------------------------------------------------------------------------------------ designs


@dataclass
class BoardReport:
    """What a design on its board adds to the design document: ``supply`` and ``noise``.

    Attributes
    ----------
    supply : SupplySettings or None
    report : SupplyReport or None
        Operating point, offsets, added parts.
    noise : NoiseReport or None
        Over ``noise_band_hz`` (the netlist's ``.noise`` sweep), when an op-amp has noise figures.
    noise_band_hz : (float, float) or None
    analysis : str or None
        The netlist's ``.noise`` line.
    max_output_v : float or None
        Largest undistorted output peak (V), when the op-amps' output ranges are known.
    """

    supply: SupplySettings | None
    report: SupplyReport | None
    noise: NoiseReport | None
    noise_band_hz: tuple[float, float] | None
    analysis: str | None
    max_output_v: float | None

    def supply_dict(self) -> dict | None:
        if self.supply is None or self.report is None:
            return None
        r = self.report
        s = self.supply
        caution = None
        if s.span_v > CAUTION_SPAN_V:
            caution = (f"a {s.span_v:g} V supply is above the {CAUTION_SPAN_V:g} V DC limit of safety extra-low "
                       "voltage: it can hurt someone. Follow local electrical codes and have the design reviewed by "
                       "a licensed or otherwise qualified person")
        return {
            "v_pos": s.v_pos, "v_neg": s.v_neg, "mid_rail": s.mid_rail.value if s.single_rail else None,
            "input_coupling": r.input_coupling, "bias_v": r.bias_v, "input_bias_v": r.input_bias_v,
            "opamp_bias": [b.as_dict() for b in r.opamp_bias],
            "stage_offsets": [o.as_dict() for o in r.stage_offsets], "output_offset_v": r.output_offset_v,
            "ac_change_db": r.ac_change_db,
            "added_parts": [{"ref": c.ref, "kind": c.kind, "role": c.role, "value": c.value} for c in r.components]
            + [{"ref": u.ref, "kind": "opamp", "role": u.role, "value": None} for u in r.opamps],
            "caution": caution,
        }

    def noise_dict(self) -> dict | None:
        n = self.noise
        if n is None:
            return None
        dr = None
        if self.max_output_v is not None and n.output_rms_v > 0:
            dr = 20 * math.log10(self.max_output_v / math.sqrt(2) / n.output_rms_v)
        return {
            "band_hz": list(n.band_hz), "temperature_k": n.temperature_k, "output_rms_v": n.output_rms_v,
            "input_rms_v": _finite(n.input_rms_v), "reference_gain": n.reference_gain,
            "max_output_v": self.max_output_v, "dynamic_range_db": dr,
            "parts": [c.as_dict() for c in n.parts], "stages": [c.as_dict() for c in n.stages],
            "notes": list(n.notes), "analysis": self.analysis,
        }

    def as_dict(self) -> dict:
        return {"supply": self.supply_dict(), "noise": self.noise_dict()}


def board_fields(rep: BoardReport | None) -> dict:
    """The ``supply`` and ``noise`` members of a design document (None when the design has neither)."""
    return {"supply": None, "noise": None} if rep is None else rep.as_dict()


def _decades(plans: Sequence[StagePlan]) -> tuple[float, float]:
    """The netlist's sweep: the analysis grid widened to whole decades, Hz."""
    grid = analysis_grid([p.section for p in plans])
    return (10 ** math.floor(math.log10(grid[0]) + 1e-9), 10 ** math.ceil(math.log10(grid[-1]) - 1e-9))


def on_board(design: Design, settings, config: Settings | None = None) -> tuple[Design, BoardReport | None]:
    """``design`` on its supply (``settings.supply``), with its noise when the op-amps have noise figures.

    Parameters
    ----------
    design : Design
        As realized or re-analysed (plans, BOM, netlist, warnings).
    settings : DesignSettings
        The document's settings (``supply``, ``output_amplitude_v``).
    config : Settings, optional
        The service's limits (default: the defaults).

    Returns
    -------
    (Design, BoardReport or None)
        Unchanged, None when there is no supply and no op-amp noise or DC figure.  Otherwise a copy whose
        netlist is the circuit on its supply with the op-amps' noise and DC sources (``.noise`` over the
        netlist's sweep when an op-amp has noise figures, output and input named in a comment; ngspice's
        ``op`` command gives its operating point), whose BOM adds the supply's parts, and whose warnings
        add the supply's and those of the levels at ``output_amplitude_v``.

    Raises
    ------
    LimitExceeded, RealizationError, CircuitError
    """
    plans = design.plans
    supply = settings.supply
    noisy = _has(plans, ("en_nv_rthz", "in_pa_rthz"))
    dc = _has(plans, DC_FIGURES)
    if supply is None and not noisy and not dc:
        return design, None
    config = config or Settings()
    lo, hi = _decades(plans)
    shape = costs.CircuitShape.of(plans)
    grid = analysis_grid([p.section for p in plans])
    costs.check_levels(shape, costs.LevelsWork(
        noise_points=integration_grid((lo, hi), DESIGN_NOISE_POINTS_PER_DECADE).size + 1 if noisy else 0,
        noise_sources=_sources(plans, supply), headroom_points=grid.size, opamps=_opamp_count(plans, supply),
        supply=supply is not None), config, field="supply" if supply is not None else "opamp")
    b = board(design, supply, report=True)
    warnings = list(design.warnings)
    bom = list(design.bom)
    if b.report is not None:
        warnings += b.report.warnings
        added = len(b.report.components) + len(b.report.opamps)
        bom += [dict(r) for r in b.report.bom[len(b.report.bom) - added:]]
    max_out = None
    if b.ranges_known:
        try:
            rep = _levels(b, grid, output_peak_v=settings.output_amplitude_v, field="output_amplitude_v")
        except InvalidLevel as exc:
            warnings.append(DesignWarning("input_beyond_rails", f"at output_amplitude_v = "
                                          f"{settings.output_amplitude_v:g} V peak {exc.message}"))
            rep = _levels(b, grid, input_peak_v=PROBE_INPUT_V)
        else:
            # without a supply the design's own warnings already compare each stage's peak with its swing
            warnings += [w for w in level_warnings(rep) if supply is not None or w.code != "stage_clips"]
        max_out = rep.max_output_v
    noise_rep = analysis = None
    sweep = ("dec", DESIGN_NOISE_POINTS_PER_DECADE, lo, hi)
    if noisy:
        noise_rep = analyze_noise(b.circuit, [lo], (lo, hi), stage_of=b.stage_of, max_output_v=max_out,
                                  points_per_decade=DESIGN_NOISE_POINTS_PER_DECADE)
    # no .op line: run from a .control block, ngspice 39 then skips the .ac and .noise analyses ("no data
    # saved ... analysis not run"); its op command gives the operating point of this netlist as it is
    netlist = to_spice(b.circuit, output="out", ac=("dec", 125, lo, hi), noise=sweep if noisy else None)
    if noisy:
        analysis = next(line for line in netlist.splitlines() if line.startswith(".noise"))
    out = replace(design, bom=bom, netlist=netlist, warnings=warnings)
    out.plans = list(plans)
    return out, BoardReport(supply, b.report, noise_rep, (lo, hi) if noisy else None, analysis, max_out)


__all__ = ["SupplySettings", "MidRail", "InputCoupling", "NoiseRequest", "HeadroomRequest", "Board", "board",
           "ResponseLevels", "NoiseSection", "HeadroomSection", "response_levels", "check_response_levels",
           "BoardReport", "board_fields", "on_board", "level_warnings"]
