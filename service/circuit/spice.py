"""SPICE netlist export (ngspice-compatible, batch mode).

Element lines follow the SPICE element syntax of Quarles, *The SPICE3
Implementation Guide*, UCB/ERL M89/44, 1989, and the ngspice manual (ch. 3
and 4): ``R``, ``C``, ``L``, ``V ... AC 1``, ``E`` (VCVS), ``G`` (VCCS) and
``X`` subcircuit calls for op-amps.  The ideal op-amp is a VCVS of gain
:data:`IDEAL_GAIN`; the macromodel is a VCCS driving a 1-ohm resistor and a
capacitor (the dominant pole, ``A(s) = a0/(1 + s*a0/wt)``) followed by a
unity buffer and the output resistance.  Values are written in engineering
notation with SPICE suffixes (``Meg`` for 1e6, since SPICE reads ``M`` as
milli) and 15 significant digits.
"""

from __future__ import annotations

import math
import re

import numpy as np

from .errors import CircuitError
from .netlist import Circuit, ElementKind, OpAmpModel

IDEAL_GAIN = 1e9
"""Open-loop gain of the exported ideal op-amp.

The closed-loop error is about ``1/(IDEAL_GAIN * beta)`` relative (1e-8 dB
for feedback factors near 1).  Larger gains do worse in practice: with 1e12
ngspice 39's sparse LU loses accuracy (1.9e-3 dB and 0.16 degree off on a
gain-of-2.2 Sallen-Key and a state-variable highpass, measured); 1e8 to 1e9
keeps every reference circuit within 2e-6 dB and 1.2e-4 degree.
"""

_SUFFIXES = [(1e12, "T"), (1e9, "G"), (1e6, "Meg"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
             (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f")]

_LETTER = {
    ElementKind.RESISTOR: "R",
    ElementKind.CAPACITOR: "C",
    ElementKind.INDUCTOR: "L",
    ElementKind.VOLTAGE_SOURCE: "V",
    ElementKind.VCVS: "E",
    ElementKind.VCCS: "G",
    ElementKind.OPAMP: "X",
}


def format_value(x: float) -> str:
    """A number in SPICE engineering notation, e.g. ``10.0372k``, ``4.7n``, ``1.5Meg``.

    15 significant digits keep a round trip through a simulator far below
    1e-6 dB.
    """
    x = float(x)
    if not math.isfinite(x):
        raise CircuitError(f"cannot write the non-finite value {x!r} to a netlist")
    if x == 0.0:
        return "0"
    ax = abs(x)
    for scale, suffix in _SUFFIXES:
        if ax >= scale * (1 - 1e-15):
            mant = x / scale
            if abs(mant) >= 1000 and suffix != "T":
                continue
            text = f"{mant:.15g}"
            if "e" in text:
                break
            return text + suffix
    return f"{x:.15g}"


def spice_name(name: str, kind: ElementKind) -> str:
    """Element name with the SPICE type letter: kept when it already starts with it, else prefixed."""
    letter = _LETTER[kind]
    return name if name[:1].upper() == letter else letter + name


def _pick(value, trial: int) -> float:
    arr = np.asarray(value, dtype=float)
    return float(arr) if arr.ndim == 0 else float(arr[trial])


def _model_key(model: OpAmpModel | None, trial: int):
    if model is None:
        return None
    return (_pick(model.gbw_hz, trial), _pick(model.a0, trial), _pick(model.rout_ohm, trial), model.name)


_SUBCKT_RE = re.compile(r"[^A-Za-z0-9_]")


def _subckt_lines(name: str, key) -> list[str]:
    if key is None:
        return [
            f".subckt {name} inp inn out",
            f"* ideal op-amp: VCVS of gain {format_value(IDEAL_GAIN)}",
            f"E1 out 0 inp inn {format_value(IDEAL_GAIN)}",
            ".ends",
        ]
    gbw, a0, rout, _ = key
    wt = 2.0 * math.pi * gbw
    lines = [
        f".subckt {name} inp inn out",
        f"* single-pole op-amp: a0 = {format_value(a0)}, GBW = {format_value(gbw)} Hz, rout = {format_value(rout)} ohm",
        f"G1 0 p inp inn {format_value(a0)}",
        "R1 p 0 1",
        f"C1 p 0 {format_value(a0 / wt)}",
    ]
    if rout > 0:
        lines += ["E1 o 0 p 0 1", f"R2 o out {format_value(rout)}"]
    else:
        lines += ["E1 out 0 p 0 1"]
    lines.append(".ends")
    return lines


def to_spice(circuit: Circuit, *, output: str = "out", ac: tuple = ("dec", 125, 10.0, 100e3), trial: int = 0,
             title: str | None = None) -> str:
    """SPICE netlist of one trial of ``circuit`` with an AC analysis.

    Parameters
    ----------
    circuit : Circuit
    output : str
        Output node (checked to exist; named in a comment).
    ac : tuple
        ``(sweep, points, f_start_hz, f_stop_hz)`` of the ``.ac`` line;
        sweep ``"dec"``, ``"oct"`` or ``"lin"``.
    trial : int
        Which trial's values to write.
    title : str, optional
        First line; default the circuit's title.

    Returns
    -------
    str
        Netlist text ending in ``.end`` and a newline; runs unchanged with
        ``ngspice -b``.
    """
    circuit.validate(output)
    t = circuit.trials
    if not isinstance(trial, (int, np.integer)) or not 0 <= trial < t:
        raise CircuitError(f"trial must be an integer in [0, {t}), got {trial!r}", field="trial")
    if len(ac) != 4 or str(ac[0]) not in ("dec", "oct", "lin"):
        raise CircuitError("ac must be (sweep, points, f_start_hz, f_stop_hz) with sweep dec, oct or lin", field="ac")
    sweep, npts, f1, f2 = str(ac[0]), int(ac[1]), float(ac[2]), float(ac[3])
    if npts < 1 or not (0 < f1 <= f2) or not math.isfinite(f2):
        raise CircuitError("ac needs points >= 1 and 0 < f_start_hz <= f_stop_hz", field="ac")
    head = (title if title is not None else circuit.title).replace("\n", " ").strip() or "circuit"
    lines = [head, f"* output node: {output}"]
    models: dict[object, str] = {}
    used_names: set[str] = set()
    body = []
    for el in circuit.elements:
        name = spice_name(el.name, el.kind)
        nodes = " ".join(el.nodes)
        if el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR, ElementKind.INDUCTOR):
            body.append(f"{name} {nodes} {format_value(_pick(el.value, trial))}")
        elif el.kind is ElementKind.VOLTAGE_SOURCE:
            body.append(f"{name} {nodes} AC {format_value(el.value)}")
        elif el.kind in (ElementKind.VCVS, ElementKind.VCCS):
            body.append(f"{name} {nodes} {format_value(_pick(el.value, trial))}")
        elif el.kind is ElementKind.OPAMP:
            key = _model_key(el.value, trial)
            if key not in models:
                base = "OPAMP_IDEAL" if key is None else _SUBCKT_RE.sub("_", key[3]).upper() or "OPAMP"
                cand, i = base, 1
                while cand in used_names:
                    i += 1
                    cand = f"{base}_{i}"
                used_names.add(cand)
                models[key] = cand
            body.append(f"{name} {nodes} {models[key]}")
    for key, sub in models.items():
        lines += _subckt_lines(sub, key)
    lines += body
    lines.append(f".ac {sweep} {npts} {format_value(f1)} {format_value(f2)}")
    lines.append(".end")
    return "\n".join(lines) + "\n"
