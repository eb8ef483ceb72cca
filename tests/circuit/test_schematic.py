"""Schematics read back from their SVG agree with the netlist they were drawn from.

The drawing is parsed as a person reads a schematic: parts and their labels,
wires as line segments, a connection wherever a wire end or a pin touches a
wire (crossings without a dot are not connected), ground symbols, named
terminals.  The nodes found that way must be the netlist's nodes, for every
registered topology and every section kind and strategy it realizes.
"""

from __future__ import annotations

import dataclasses
import math
import re
import xml.etree.ElementTree as ET
from collections import defaultdict

import numpy as np
import pytest

from service.approximation import Section, SectionKind
from service.circuit import Circuit, ElementKind, to_spice
from service.circuit.schematic import SchematicError, StageLabel, draw_schematic
from service.realization.topologies import TOPOLOGIES
from service.units import parse_quantity
from tests.ngspice import run_ngspice_ac

SVG = "{http://www.w3.org/2000/svg}"
TOL = 0.01            # SVG user units (points)


# --------------------------------------------------------------------------- reading a drawing back


@dataclasses.dataclass
class Drawn:
    parts: dict            # ref -> {"kind", "label", "pins": [(x, y)...], "paths": [...], "texts": [(text, x, y)]}
    opamps: dict           # ref -> {"pins": {"+": p, "-": p, "out": p}, "texts": [...], "paths": [...]}
    wires: list            # [((x0, y0), (x1, y1)), ...]
    grounds: list          # [(x, y)]
    names: list            # [(net name, (x, y), terminal: bool)]
    dots: list             # [(x, y)]
    frames: dict           # stage number -> title text


def _points(d: str) -> list[list[tuple[float, float]]]:
    """Polylines of an SVG path made of M and L commands."""
    lines, cur = [], None
    for cmd, args in re.findall(r"([MLml])\s*([^MLml]*)", d):
        nums = [float(v) for v in re.findall(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?", args)]
        pts = list(zip(nums[0::2], nums[1::2]))
        if cmd in "Mm":
            cur = list(pts)
            lines.append(cur)
        else:
            cur.extend(pts)
    return [line for line in lines if line]


def _segments(group) -> list[tuple[tuple[float, float], tuple[float, float]]]:
    segs = []
    for path in group.iter(f"{SVG}path"):
        for line in _points(path.get("d", "")):
            segs += [(a, b) for a, b in zip(line, line[1:]) if a != b]
    return segs


def _texts(group) -> list[tuple[str, float, float]]:
    out = []
    for t in group.iter(f"{SVG}text"):
        out.append(("".join(t.itertext()).strip(), float(t.get("x")), float(t.get("y"))))
    return out


def _pins(group) -> list[tuple[float, float]]:
    return [tuple(float(v) for v in p.split(",")) for p in group.get("data-pins", "").split()]


def read_schematic(svg: str) -> Drawn:
    """Parse a schematic SVG into parts, op-amps, wires, grounds, names and dots."""
    root = ET.fromstring(svg)
    d = Drawn({}, {}, [], [], [], [], {})
    for g in root.iter(f"{SVG}g"):
        cls = g.get("class")
        if cls == "part":
            ref = g.get("data-ref")
            assert ref not in d.parts, f"{ref} drawn twice"
            d.parts[ref] = {"kind": g.get("data-kind"), "pins": _pins(g), "segments": _segments(g),
                            "texts": _texts(g)}
        elif cls == "opamp":
            ref = g.get("data-ref")
            assert ref not in d.opamps, f"{ref} drawn twice"
            names = g.get("data-pin-names").split()
            d.opamps[ref] = {"pins": dict(zip(names, _pins(g))), "segments": _segments(g), "texts": _texts(g)}
        elif cls == "wire":
            d.wires += _segments(g)
        elif cls == "ground":
            d.grounds += [(p, _segments(g)) for p in _pins(g)]
        elif cls in ("port", "netlabel"):
            texts = [t for t, _, _ in _texts(g)]
            assert len(texts) == 1
            d.names.append((texts[0], _pins(g)[0], cls == "port"))
        elif cls == "junction":
            d.dots += _pins(g)
        elif cls == "stage-title":
            d.frames[int(g.get("data-stage"))] = _texts(g)[0][0]
    return d


def _close(p, q) -> bool:
    return abs(p[0] - q[0]) <= TOL and abs(p[1] - q[1]) <= TOL


def _on(p, seg, *, strictly: bool = False) -> bool:
    """Point ``p`` on the axis-parallel segment ``seg`` (strictly: not at its ends)."""
    (ax, ay), (bx, by) = seg
    if abs(ax - bx) <= TOL:
        inside = abs(p[0] - ax) <= TOL and min(ay, by) - TOL <= p[1] <= max(ay, by) + TOL
    elif abs(ay - by) <= TOL:
        inside = abs(p[1] - ay) <= TOL and min(ax, bx) - TOL <= p[0] <= max(ax, bx) + TOL
    else:
        raise AssertionError(f"wire segment {seg} is not horizontal or vertical")
    if inside and strictly:
        return not (_close(p, seg[0]) or _close(p, seg[1]))
    return inside


def drawn_nodes(d: Drawn) -> list[set]:
    """Groups of terminals the wires connect: each a set of ("pin", ref, pin) / ("ground",) / ("name", net)."""
    terminals = []
    for ref, p in d.parts.items():
        terminals += [(("pin", ref, i), pt) for i, pt in enumerate(p["pins"])]
    for ref, u in d.opamps.items():
        terminals += [(("pin", ref, name), pt) for name, pt in u["pins"].items()]
    terminals += [(("ground", i), pt) for i, (pt, _) in enumerate(d.grounds)]
    terminals += [(("name", net, i), pt) for i, (net, pt, _) in enumerate(d.names)]
    n_w = len(d.wires)
    parent = list(range(n_w + len(terminals)))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    def union(i, j):
        parent[find(i)] = find(j)

    for i, s in enumerate(d.wires):
        for j, t in enumerate(d.wires):
            if i < j and (_on(s[0], t) or _on(s[1], t) or _on(t[0], s) or _on(t[1], s)):
                union(i, j)
    for k, (_, pt) in enumerate(terminals):
        for i, s in enumerate(d.wires):
            if _on(pt, s):
                union(n_w + k, i)
        for m, (_, q) in enumerate(terminals[:k]):
            if _close(pt, q):
                union(n_w + k, n_w + m)
    groups = defaultdict(set)
    for k, (name, _) in enumerate(terminals):
        groups[find(n_w + k)].add(name)
    return list(groups.values())


def expected_terminals(circuit: Circuit, refs) -> dict:
    """Netlist node of every drawn terminal of the elements ``refs``."""
    out = {}
    for el in circuit.elements:
        if el.name not in refs:
            continue
        if el.kind is ElementKind.OPAMP:
            plus, minus, o = el.nodes
            out.update({("pin", el.name, "+"): plus, ("pin", el.name, "-"): minus, ("pin", el.name, "out"): o})
        else:
            out.update({("pin", el.name, 0): el.nodes[0], ("pin", el.name, 1): el.nodes[1]})
    return out


def check_drawing(svg: str, circuit: Circuit, refs, terminals: dict[str, bool]) -> Drawn:
    """Every element of ``refs`` drawn once with its value; drawn nodes = netlist nodes.

    ``terminals`` names the nodes drawn as open-circle terminals (True) or as
    labels on a wire (False).
    """
    d = read_schematic(svg)
    elements = {el.name: el for el in circuit.elements if el.name in refs}
    assert set(d.parts) | set(d.opamps) == set(elements)
    assert not set(d.parts) & set(d.opamps)
    for ref, p in d.parts.items():
        el = elements[ref]
        assert p["kind"] == el.kind.value
        # the label names the part and its value in engineering notation (3 significant digits)
        labels = [t for t, _, _ in p["texts"]]
        assert len(labels) == 1 and labels[0].split(" ")[0] == ref, labels
        shown = parse_quantity(labels[0].split(" ")[1])
        assert shown == pytest.approx(float(el.value), rel=5e-3), (ref, labels[0], el.value)
        # its pins are the ends of its own drawn leads
        ends = [q for seg in p["segments"] for q in seg]
        assert len(p["pins"]) == 2 and all(any(_close(pin, q) for q in ends) for pin in p["pins"])
    for ref, u in d.opamps.items():
        ends = [q for seg in u["segments"] for q in seg]
        assert set(u["pins"]) == {"+", "-", "out"}
        assert all(any(_close(pin, q) for q in ends) for pin in u["pins"].values()), ref
        texts = {t: (x, y) for t, x, y in u["texts"]}
        assert ref in texts
        # "+" is written at the non-inverting input, "−" at the inverting one
        for sign, pin, other in (("+", "+", "-"), ("−", "-", "+")):
            x, y = texts[sign]
            assert math.dist((x, y), u["pins"][pin]) < math.dist((x, y), u["pins"][other]), (ref, sign)
    expected = expected_terminals(circuit, refs)
    groups = drawn_nodes(d)
    seen_nodes = set()
    for group in groups:
        nodes = {expected[t] for t in group if t[0] == "pin"}
        nodes |= {"0" for t in group if t[0] == "ground"}
        nodes |= {d.names[t[2]][0] for t in group if t[0] == "name"}
        # a drawn node joins terminals of one netlist node only
        assert len(nodes) == 1, (nodes, sorted(map(str, group)))
        node = nodes.pop()
        if node != "0":
            # ... and every netlist node is drawn as one connected node
            assert node not in seen_nodes, f"node {node} drawn in two unconnected pieces"
            seen_nodes.add(node)
    assert seen_nodes == {n for n in expected.values() if n != "0"} | set(terminals)
    for net, terminal in terminals.items():
        assert [t for n, _, t in d.names if n == net] == [terminal], net
    # a dot at every T-junction (IEEE 315: without a dot, crossing wires are not connected)
    for s in d.wires:
        for end in s:
            if any(_on(end, t, strictly=True) for t in d.wires):
                assert any(_close(end, dot) for dot in d.dots), f"T-junction at {end} without a dot"
    return d


# --------------------------------------------------------------------------- every topology, kind, strategy


def _section_for(top, kind: SectionKind, strategy: str) -> Section | None:
    fz = {SectionKind.NOTCH: 1.0, SectionKind.LOWPASS_NOTCH: 2.5, SectionKind.HIGHPASS_NOTCH: 0.4}.get(kind)
    qs = [None] if top.order == 1 else [0.707, 1.0, 0.4, 2.0, 5.0, 12.0]
    for q in qs:
        for gain in (1.0, 2.5, 3.0 - 1.0 / q if q else 1.0, 0.5, 10.0, 0.2, 0.1):
            sec = Section(kind, top.order, 1000.0, q, 1000.0 * fz if fz else None, gain)
            try:
                top.check(sec, strategy)
            except Exception:
                continue
            return sec
    return None


def _cases():
    out = []
    for name, top in TOPOLOGIES.items():
        for kind in sorted(top.kinds, key=lambda k: k.value):
            for strategy in top.strategy_names(kind):
                out.append(pytest.param(top, kind, strategy, id=f"{name}-{kind.value}-{strategy}"))
    return out


def stage_of(top, sec, strategy, *, refs_from: int = 1, prefix: str = "s1", circuit=None, node_in="in",
             node_out="out"):
    """Build one stage with distinct part values (the drawing must show each part's own value)."""
    parts = top.parts(sec, strategy)
    values, refs, count = {}, {}, {"resistor": 0, "capacitor": 0}
    for i, p in enumerate(parts):
        count[p.kind] += 1
        refs[p.role] = ("R" if p.kind == "resistor" else "C") + str(refs_from + count[p.kind] - 1)
        # E96-like resistors and E12-like capacitors, all different
        values[p.role] = 10.7e3 * 1.21 ** i if p.kind == "resistor" else 4.7e-9 * 1.5 ** i
    for i, role in enumerate(top.opamp_roles(sec, strategy)):
        refs[role] = f"U{refs_from + i}"
    if circuit is None:
        circuit = Circuit("stage")
        circuit.add_voltage_source("VIN", "in", "0")
    top.build(circuit, sec, strategy, values, refs, input_node=node_in, output_node=node_out, prefix=prefix)
    return circuit, tuple(refs.values())


@pytest.mark.parametrize("top, kind, strategy", _cases())
def test_every_topology_is_drawn_as_its_netlist(top, kind, strategy):
    # source: the circuit the engine solves (Topology.build), read back from the drawing by the
    # IEEE Std 315-1975 convention (connection where a wire end meets a wire; a dot at each junction)
    sec = _section_for(top, kind, strategy)
    assert sec is not None, f"no section of kind {kind.value} that {top.name} {strategy} accepts"
    circuit, refs = stage_of(top, sec, strategy)
    label = StageLabel(1, kind.value, sec.f0_hz, sec.q, "in", "out", refs, sec.fz_hz)
    svg = draw_schematic(circuit, [label])
    d = check_drawing(svg, circuit, refs, {"in": True, "out": True})
    assert d.frames[1].startswith(f"Stage 1 · {kind.value.replace('_', ' ')} · f0 1kHz")
    if sec.q is not None:
        assert f"Q {sec.q:.3g}" in d.frames[1]


def _cascade():
    """Three stages of three topologies, numbered as a design numbers them."""
    picks = [("sallen_key", SectionKind.LOWPASS), ("state_variable", SectionKind.LOWPASS_NOTCH),
             ("multiple_feedback", SectionKind.BANDPASS)]
    circuit = Circuit("filter")
    circuit.add_voltage_source("VIN", "in", "0")
    labels, node, first = [], "in", 1
    for k, (name, kind) in enumerate(picks, start=1):
        top = TOPOLOGIES[name]
        strategy = top.strategy_names(kind)[0]
        sec = _section_for(top, kind, strategy)
        out = "out" if k == len(picks) else f"out{k}"
        _, refs = stage_of(top, sec, strategy, refs_from=first, prefix=f"s{k}", circuit=circuit, node_in=node,
                           node_out=out)
        labels.append(StageLabel(k, kind.value, sec.f0_hz, sec.q, node, out, refs, sec.fz_hz))
        first += 20
        node = out
    return circuit, labels


def test_whole_filter_and_each_stage():
    # source: the cascade's netlist, read back from the drawing (IEEE Std 315-1975 conventions)
    circuit, labels = _cascade()
    all_refs = [r for lbl in labels for r in lbl.refs]
    d = check_drawing(draw_schematic(circuit, labels), circuit, all_refs,
                      {"in": True, "out1": False, "out2": False, "out": True})
    assert sorted(d.frames) == [1, 2, 3]
    for lbl in labels:
        terminals = {lbl.input_node: True, lbl.output_node: True}
        d = check_drawing(draw_schematic(circuit, labels, stage=lbl.number), circuit, lbl.refs, terminals)
        assert list(d.frames) == [lbl.number]


def circuit_from_drawing(d: Drawn) -> Circuit:
    """The netlist a reader of the drawing would write: parts with their labelled values, ideal op-amps."""
    names = {}
    for i, group in enumerate(drawn_nodes(d)):
        named = [d.names[t[2]][0] for t in group if t[0] == "name"]
        node = "0" if any(t[0] == "ground" for t in group) else (named[0] if named else f"n{i}")
        for t in group:
            if t[0] == "pin":
                names[t[1:]] = node
    c = Circuit("read back")
    c.add_voltage_source("VIN", "in", "0")
    for ref, p in d.parts.items():
        value = parse_quantity(p["texts"][0][0].split(" ")[1])
        add = {"resistor": c.add_resistor, "capacitor": c.add_capacitor, "inductor": c.add_inductor}[p["kind"]]
        add(ref, names[(ref, 0)], names[(ref, 1)], value)
    for ref in d.opamps:
        c.add_opamp(ref, names[(ref, "+")], names[(ref, "-")], names[(ref, "out")])
    return c


def test_drawing_read_back_simulates_like_the_netlist():
    # source: ngspice AC analysis (reference simulator), on the netlist read from the drawing and on the
    # engine's own; part values on the drawing carry 3 significant digits, as the values built here do
    circuit, labels = _cascade()
    rounded = circuit.with_values({el.name: float(f"{el.value:.3g}") for el in circuit.elements
                                   if el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR)})
    drawn = circuit_from_drawing(read_schematic(draw_schematic(circuit, labels)))
    ac = ("dec", 40, 10.0, 1e6)
    f_ref, v_ref = run_ngspice_ac(to_spice(rounded, output="out", ac=ac))
    f_drawn, v_drawn = run_ngspice_ac(to_spice(drawn, output="out", ac=ac))
    np.testing.assert_allclose(f_drawn, f_ref)
    peak = np.max(np.abs(v_ref["out"]))
    np.testing.assert_allclose(v_drawn["out"], v_ref["out"], rtol=1e-6, atol=1e-9 * peak)


def test_unknown_stage_and_missing_refs_are_named():
    circuit, labels = _cascade()
    with pytest.raises(SchematicError) as err:
        draw_schematic(circuit, labels, stage=4)
    assert err.value.field == "stage" and "1, 2, 3" in str(err.value)
    with pytest.raises(SchematicError) as err:
        draw_schematic(circuit, labels, stage=0)
    assert "numbered from 1" in str(err.value)
    bad = [dataclasses.replace(labels[0], refs=labels[0].refs + ("R999",))]
    with pytest.raises(SchematicError, match="R999"):
        draw_schematic(circuit, bad)
    with pytest.raises(SchematicError):
        draw_schematic(circuit, [])


def test_part_label_is_engineering_notation():
    # common practice (no source): values on schematics in engineering notation, SI prefix as multiplier
    from service.circuit.schematic import part_label

    assert part_label("R3", 10.7e3) == "R3 10.7k"
    assert part_label("C2", 4.7e-9) == "C2 4.7n"
    assert part_label("R1", 1e6) == "R1 1M"
    assert part_label("C9", 2.2e-6) == "C9 2.2u"
