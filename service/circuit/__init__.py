"""Circuit engine: netlist model, batched AC analysis, zeros/poles, SPICE export.

Internal to the service (no endpoint takes a netlist): realization builds
stage circuits with it, response and tolerance analyse them.

Public surface
--------------
Circuit, OpAmpModel, OpAmpSources, Element, ElementKind
    Netlist model; values are scalars or arrays of one value per trial;
    op-amps may carry input-referred noise and DC error sources.
ac_response(circuit, frequency_hz, output="out", *, memory_limit_bytes, method)
    Complex ``V(output)/V(input)``, shape (T, F).
prepare_ac(circuit, frequency_hz, output="out", *, memory_limit_bytes, method) -> PreparedAc
    The same, prepared once; ``PreparedAc.response(trials=slice(a, b))``
    evaluates a range of trials (bit for bit the rows of the whole);
    ``PreparedAc.polar(...) -> PolarResponse`` gives ``|H|^2``, the phase and
    the group delay (closed form) without forming ``H``.
transfer_function_zpk(circuit, output="out")
    Exact zeros, poles (rad/s) and gain of a single-trial circuit.
noise_spectra(circuit, frequency_hz, output="out", *, temperature_k, method) -> OutputNoise
    Output noise density of every resistor and op-amp noise source, (T, S, F) V^2/Hz.
dc_operating_point(circuit) -> DcSolution
    Node voltages at DC with the supplies, offsets and bias currents.
to_spice(circuit, *, output, ac, trial, title, noise, temperature_k, op)
    ngspice-compatible netlist text (``.ac``, ``.noise``, ``.op``).
CircuitError
    Every invalid circuit or request (an ``InvalidParameter``).
draw_schematic(circuit, stages, *, stage=None) -> str, StageLabel, SchematicError
    SVG schematic of a circuit's stages, laid out from the netlist graph.
"""

from .ac import PolarResponse, PreparedAc, ac_response, prepare_ac
from .dc import DcSolution, dc_contributions, dc_operating_point
from .errors import CircuitError
from .netlist import GROUND, Circuit, Element, ElementKind, OpAmpModel, OpAmpSources
from .noise import DEFAULT_TEMPERATURE_K, NoiseKind, NoiseSource, OutputNoise, noise_spectra
from .schematic import SchematicError, StageLabel, draw_schematic
from .spice import format_value, to_spice
from .zpk import transfer_function_zpk

__all__ = [
    "Circuit",
    "DcSolution",
    "dc_contributions",
    "dc_operating_point",
    "CircuitError",
    "Element",
    "ElementKind",
    "GROUND",
    "OpAmpModel",
    "OpAmpSources",
    "DEFAULT_TEMPERATURE_K",
    "NoiseKind",
    "NoiseSource",
    "OutputNoise",
    "noise_spectra",
    "PolarResponse",
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
