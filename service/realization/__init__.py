"""Realization: op-amp stages with parts that can be bought.

From an approximation's sections to realized stages: topology and strategy
per section (:data:`TOPOLOGIES`, :func:`auto_topology`), section order and
gain distribution, part values chosen from the caller's series or stock list,
the op-amp each stage needs, the achieved figures read back from the circuit
engine, BOM, SPICE netlist and cautions.  What the design must meet, and
the design document, belong to :mod:`service.workflows`.

Public surface
--------------
Inputs: :class:`PartsPolicy`, :class:`KindPolicy`, :class:`StockPart`, :class:`OpAmpSpec`.
Results: :class:`Design`, :class:`Stage`, :class:`Component`, :class:`OpAmpUse`,
:class:`OpAmpRequirement`, :class:`DesignWarning`, :class:`AnalysisOptions`.
Functions: :func:`design_filter`, :func:`analyze` (figures of given stage plans),
:func:`cascade_circuit`, :func:`design_roots` (zeros and poles, per trial), :func:`auto_topology`.
Supplies: :class:`Supply`, :func:`filter_circuit` (the filter on its supply, op-amps
carrying their noise and DC figures, for the noise and headroom analyses),
:func:`supply_report` (DC operating point, offsets, added parts, netlist),
:func:`with_supply` (the design with the supply's BOM, netlist and warnings).
Errors: :class:`RealizationError` and its subclasses in :mod:`service.realization.errors`.
"""

from service.realization.design import design_filter
from service.realization.analysis import StagePlan, analyze, cascade_circuit, design_roots
from service.realization.errors import RealizationError
from service.realization.opamp import OpAmpSpec
from service.realization.parts import KindPolicy, PartsPolicy, StockPart
from service.realization.results import (AnalysisOptions, Component, Design, DesignWarning, OpAmpRequirement,
                                         OpAmpUse, Stage)
from service.realization.supply import FilterCircuit, Supply, SupplyReport, filter_circuit, supply_report, with_supply
from service.realization.topologies import TOPOLOGIES, auto_topology

__all__ = [
    "PartsPolicy", "KindPolicy", "StockPart", "OpAmpSpec",
    "Design", "Stage", "Component", "OpAmpUse", "OpAmpRequirement", "DesignWarning",
    "AnalysisOptions", "StagePlan", "design_filter", "analyze", "cascade_circuit", "design_roots",
    "TOPOLOGIES", "auto_topology", "RealizationError",
    "Supply", "SupplyReport", "FilterCircuit", "filter_circuit", "supply_report", "with_supply",
]
