"""Circuit engine: netlist model, batched AC analysis, zeros/poles, SPICE export.

Internal to the service (no endpoint takes a netlist): realization builds
stage circuits with it, response and tolerance analyse them.

Public surface
--------------
Circuit, OpAmpModel, Element, ElementKind
    Netlist model; values are scalars or arrays of one value per trial.
ac_response(circuit, frequency_hz, output="out", *, memory_limit_bytes, method)
    Complex ``V(output)/V(input)``, shape (T, F).
prepare_ac(circuit, frequency_hz, output="out", *, memory_limit_bytes, method) -> PreparedAc
    The same, prepared once; ``PreparedAc.response(trials=slice(a, b))``
    evaluates a range of trials (bit for bit the rows of the whole).
transfer_function_zpk(circuit, output="out")
    Exact zeros, poles (rad/s) and gain of a single-trial circuit.
to_spice(circuit, *, output, ac, trial, title)
    ngspice-compatible netlist text.
CircuitError
    Every invalid circuit or request (an ``InvalidParameter``).
draw_schematic(circuit, stages, *, stage=None) -> str, StageLabel, SchematicError
    SVG schematic of a circuit's stages, laid out from the netlist graph.
"""

from .ac import PreparedAc, ac_response, prepare_ac
from .errors import CircuitError
from .netlist import GROUND, Circuit, Element, ElementKind, OpAmpModel
from .schematic import SchematicError, StageLabel, draw_schematic
from .spice import format_value, to_spice
from .zpk import transfer_function_zpk

__all__ = [
    "Circuit",
    "CircuitError",
    "Element",
    "ElementKind",
    "GROUND",
    "OpAmpModel",
    "PreparedAc",
    "SchematicError",
    "StageLabel",
    "ac_response",
    "draw_schematic",
    "format_value",
    "prepare_ac",
    "to_spice",
    "transfer_function_zpk",
]
