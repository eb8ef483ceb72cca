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

An op-amp carrying :class:`~.netlist.OpAmpSources` gets them inside its
subcircuit, so that ngspice's ``.noise`` and ``.op`` reproduce the engine's
noise and DC analyses: the offset ``vos`` as a DC source and the voltage
noise ``en`` as a VCVS in series with the non-inverting input, the bias
current ``ib`` and the current noise ``in`` as sources from each input to
ground.  Noise comes from resistors in isolated generator loops, sized from
the thermal noise ``4kTR`` at the netlist's temperature (``.temp``); a 1/f
corner ``fc`` is the resistor flicker noise ``KF * I^AF / f`` (ngspice
manual, sec. 3.3 resistor model, parameters KF and AF) of a DC current
through the generator, cancelled at DC by a noiseless twin (``noisy=0``).
Resistors of the amplifier model itself are written ``noisy=0``: the
figures ``en``/``in`` already account for the amplifier's noise.  A supply
(:meth:`~.netlist.Circuit.add_supply`) is a DC voltage source.
"""

from __future__ import annotations

import math
import re

import numpy as np

from .errors import CircuitError
from .netlist import Circuit, ElementKind, OpAmpModel, OpAmpSources
from .noise import BOLTZMANN_J_PER_K, DEFAULT_TEMPERATURE_K

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
    ElementKind.SUPPLY: "V",
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


def _model_key(model: OpAmpModel | None, trial: int, sources: OpAmpSources | None = None):
    if sources is not None and sources == OpAmpSources():
        sources = None
    if model is None:
        return None if sources is None else (None, None, None, "OPAMP_IDEAL", sources)
    key = (_pick(model.gbw_hz, trial), _pick(model.a0, trial), _pick(model.rout_ohm, trial), model.name)
    return key if sources is None else key + (sources,)


def _source_lines(src: OpAmpSources, temperature_k: float) -> tuple[list[str], str]:
    """Lines that put ``src`` in front of the amplifier; returns them and the internal + input node."""
    four_kt = 4.0 * BOLTZMANN_J_PER_K * temperature_k
    fv = format_value
    lines = [f"* input sources: en {fv(src.en_v_rthz)} V/rtHz (1/f corner {fv(src.en_corner_hz)} Hz), "
             f"in {fv(src.in_a_rthz)} A/rtHz (1/f corner {fv(src.in_corner_hz)} Hz), "
             f"vos {fv(src.vos_v)} V, ib {fv(src.ib_a)} A"]
    plus = "inp"
    if src.vos_v != 0:
        lines.append(f"VOS inp_v inp DC {fv(src.vos_v)}")
        plus = "inp_v"
    if src.en_v_rthz > 0:
        r = src.en_v_rthz ** 2 / four_kt
        lines.append(f"EEN inp_n {plus} en1 en2 1")
        lines += _generator("EN", "en1", "en2", r, src.en_v_rthz ** 2 * src.en_corner_hz)
        plus = "inp_n"
    if src.ib_a != 0:
        lines += [f"IBP inp 0 DC {fv(src.ib_a)}", f"IBN inn 0 DC {fv(src.ib_a)}"]
    if src.in_a_rthz > 0:
        r = 1e3
        gm = src.in_a_rthz / math.sqrt(four_kt * r)
        kf = src.in_corner_hz * four_kt * r
        for pin, tag in (("inp", "P"), ("inn", "N")):
            lines.append(f"GIN{tag} {pin} 0 in{tag}1 in{tag}2 {fv(gm)}")
            lines += _generator(f"IN{tag}", f"in{tag}1", f"in{tag}2", r, kf)
    return lines, plus


def _generator(tag: str, node: str, twin: str, r: float, kf: float) -> list[str]:
    """A noise voltage ``4kTr + kf/f`` (V^2/Hz) between ``node`` and ``twin`` (0 V at DC)."""
    fv = format_value
    if kf <= 0:
        return [f"R{tag} {node} 0 {fv(r)}", f"R{tag}B {twin} 0 {fv(r)} noisy=0"]
    # flicker of a DC current I with R*I = 1 V: R^2 KF I^2 / f = KF / f
    return [f"I{tag} 0 {node} DC {fv(1.0 / r)}", f"R{tag} {node} 0 {fv(r)} RFLICKER_{tag}",
            f".model RFLICKER_{tag} r (kf={fv(kf)} af=2)",
            f"I{tag}B 0 {twin} DC {fv(1.0 / r)}", f"R{tag}B {twin} 0 {fv(r)} noisy=0"]


_SUBCKT_RE = re.compile(r"[^A-Za-z0-9_]")


def _subckt_lines(name: str, key, temperature_k: float = DEFAULT_TEMPERATURE_K) -> list[str]:
    sources = key[4] if key is not None and len(key) > 4 else None
    pre, plus = _source_lines(sources, temperature_k) if sources is not None else ([], "inp")
    if key is None or key[0] is None:
        return [
            f".subckt {name} inp inn out",
            f"* ideal op-amp: VCVS of gain {format_value(IDEAL_GAIN)}",
            *pre,
            f"E1 out 0 {plus} inn {format_value(IDEAL_GAIN)}",
            ".ends",
        ]
    gbw, a0, rout = key[:3]
    wt = 2.0 * math.pi * gbw
    lines = [
        f".subckt {name} inp inn out",
        f"* single-pole op-amp: a0 = {format_value(a0)}, GBW = {format_value(gbw)} Hz, rout = {format_value(rout)} ohm",
        *pre,
        f"G1 0 p {plus} inn {format_value(a0)}",
        "R1 p 0 1 noisy=0",
        f"C1 p 0 {format_value(a0 / wt)}",
    ]
    if rout > 0:
        lines += ["E1 o 0 p 0 1", f"R2 o out {format_value(rout)} noisy=0"]
    else:
        lines += ["E1 out 0 p 0 1"]
    lines.append(".ends")
    return lines


def _sweep(value, name: str) -> tuple[str, int, float, float]:
    if value is None or len(value) != 4 or str(value[0]) not in ("dec", "oct", "lin"):
        raise CircuitError(f"{name} must be (sweep, points, f_start_hz, f_stop_hz) with sweep dec, oct or lin",
                           field=name)
    sweep, npts, f1, f2 = str(value[0]), int(value[1]), float(value[2]), float(value[3])
    if npts < 1 or not (0 < f1 <= f2) or not math.isfinite(f2):
        raise CircuitError(f"{name} needs points >= 1 and 0 < f_start_hz <= f_stop_hz", field=name)
    return sweep, npts, f1, f2


def to_spice(circuit: Circuit, *, output: str = "out", ac: tuple | None = ("dec", 125, 10.0, 100e3),
             trial: int = 0, title: str | None = None, noise: tuple | None = None,
             temperature_k: float = DEFAULT_TEMPERATURE_K, op: bool = False) -> str:
    """SPICE netlist of one trial of ``circuit`` with an AC analysis.

    Parameters
    ----------
    circuit : Circuit
    output : str
        Output node (checked to exist; named in a comment).
    ac : tuple or None
        ``(sweep, points, f_start_hz, f_stop_hz)`` of the ``.ac`` line;
        sweep ``"dec"``, ``"oct"`` or ``"lin"``; None writes no ``.ac``.
    trial : int
        Which trial's values to write.
    title : str, optional
        First line; default the circuit's title.
    noise : tuple or None
        ``(sweep, points, f_start_hz, f_stop_hz)`` of a ``.noise`` analysis
        of ``v(output)`` referred to the input source, named in a comment
        line; None writes none.
    temperature_k : float
        Temperature of the netlist (``.temp``, written when the netlist has a
        noise analysis or op-amp noise generators), K; the op-amp noise
        generators are sized for it.
    op : bool
        Add an ``.op`` line (DC operating point).

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
    ac = _sweep(ac, "ac") if ac is not None else None
    noise = _sweep(noise, "noise") if noise is not None else None
    t_k = float(temperature_k)
    if not (math.isfinite(t_k) and t_k > 0):
        raise CircuitError(f"temperature_k must be a positive number of kelvin, got {temperature_k!r}",
                           field="temperature_k")
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
        elif el.kind is ElementKind.SUPPLY:
            body.append(f"{name} {nodes} DC {format_value(el.value)}")
        elif el.kind in (ElementKind.VCVS, ElementKind.VCCS):
            body.append(f"{name} {nodes} {format_value(_pick(el.value, trial))}")
        elif el.kind is ElementKind.OPAMP:
            key = _model_key(el.value, trial, el.sources)
            if key not in models:
                base = "OPAMP_IDEAL" if key is None else _SUBCKT_RE.sub("_", key[3]).upper() or "OPAMP"
                cand, i = base, 1
                while cand in used_names:
                    i += 1
                    cand = f"{base}_{i}"
                used_names.add(cand)
                models[key] = cand
            body.append(f"{name} {nodes} {models[key]}")
    generators = any(key is not None and len(key) > 4 and key[4].noisy for key in models)
    if noise is not None:
        src = circuit.input_source
        lines.append(f"* noise analysis: output v({output}), input source {spice_name(src.name, src.kind)}")
    for key, sub in models.items():
        lines += _subckt_lines(sub, key, t_k)
    lines += body
    if noise is not None or generators:
        lines.append(f".temp {t_k - 273.15:.15g}")
    if op:
        lines.append(".op")
    if ac is not None:
        lines.append(f".ac {ac[0]} {ac[1]} {format_value(ac[2])} {format_value(ac[3])}")
    if noise is not None:
        src = circuit.input_source
        lines.append(f".noise v({output}) {spice_name(src.name, src.kind)} {noise[0]} {noise[1]} "
                     f"{format_value(noise[2])} {format_value(noise[3])}")
    lines.append(".end")
    return "\n".join(lines) + "\n"
