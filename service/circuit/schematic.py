"""Schematics of a filter's circuit as SVG text, drawn from the netlist the engine solves.

:func:`draw_schematic` takes a :class:`~service.circuit.Circuit` (the one
the realization builds and the AC engine solves, element names = the
design's refs) and plain per-stage labels, lays it out from the netlist
graph (:mod:`service.circuit.schematic_layout`), and draws it with
`schemdraw <https://schemdraw.readthedocs.io>`_'s own SVG backend (no GUI
toolkit, no matplotlib).  schemdraw is imported on first use.

What the SVG carries
--------------------
Parts are labelled with ref and value in engineering notation
(``R3 10.7k``, ``C2 4.7n``); op-amps with their ref and ``+``/``−`` at the
inputs; the stage's input and output nodes are named; each stage sits in a
dashed frame titled with its number (from 1), section kind, f0 and Q.
Every drawn item is an SVG group with a class (``part``, ``opamp``,
``wire``, ``junction``, ``ground``, ``port``, ``netlabel``, ``stage``) and,
for parts and op-amps, ``data-ref`` and ``data-pins`` (pin positions in the
SVG's user units), so other programs can read the drawing back.

Symbols follow IEEE Std 315-1975 (resistor zig-zag, capacitor plates,
op-amp triangle; a dot at every junction of three or more wires, crossings
without a dot are not connected).
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from typing import Sequence

from service.units import format_quantity

from .netlist import Circuit, ElementKind
from .schematic_layout import (
    PlacedPort, PlacedWire, SchematicError, StageLayout, junction_dots, layout_stage, stage_elements,
)

#: Significant digits of part values on the drawing (E96 values have three).
VALUE_DIGITS = 3
#: Space between two stages of a whole-filter drawing, schematic units.
STAGE_SPACING = 3.0
FONT_SIZE = 13.0
TITLE_SIZE = 14.0
FRAME_MARGIN = 0.6
INCHES_PER_UNIT = 0.42


@dataclass(frozen=True)
class StageLabel:
    """What a stage's frame says, and which elements of the circuit are the stage.

    Attributes
    ----------
    number : int
        Stage number, from 1.
    kind : str
        Section kind (``"lowpass"``, ``"lowpass_notch"``, ...).
    f0_hz : float or None
        Section pole frequency, Hz.
    q : float or None
        Section pole Q (None for a first-order section).
    input_node, output_node : str
        The stage's input and output nodes in the circuit.
    refs : tuple of str
        Names of the stage's elements in the circuit (parts and op-amps).
    fz_hz : float or None
        Zero frequency of a notch-kind section, Hz.
    """

    number: int
    kind: str
    f0_hz: float | None
    q: float | None
    input_node: str
    output_node: str
    refs: tuple[str, ...]
    fz_hz: float | None = None

    def title(self) -> str:
        """``"Stage 2 · lowpass notch · f0 12.3 kHz · Q 1.23 · fz 31 kHz"``."""
        bits = [f"Stage {self.number}", self.kind.replace("_", " ")]
        if self.f0_hz is not None and math.isfinite(self.f0_hz):
            bits.append(f"f0 {format_quantity(self.f0_hz, 'Hz', significant=4)}")
        if self.q is not None and math.isfinite(self.q):
            bits.append(f"Q {self.q:.3g}")
        if self.fz_hz is not None and math.isfinite(self.fz_hz):
            bits.append(f"fz {format_quantity(self.fz_hz, 'Hz', significant=4)}")
        return " · ".join(bits)


def part_label(ref: str, value: float) -> str:
    """``"R3 10.7k"``: ref and value in engineering notation (no unit: the symbol says it)."""
    return f"{ref} {format_quantity(float(value), significant=VALUE_DIGITS)}"


def _check_stages(circuit: Circuit, stages: Sequence[StageLabel], stage: int | None) -> list[StageLabel]:
    if not stages:
        raise SchematicError("no stages to draw", field="stages")
    numbers = [s.number for s in stages]
    if stage is not None:
        if isinstance(stage, bool) or not isinstance(stage, int) or stage not in numbers:
            raise SchematicError(f"stage must be one of {', '.join(map(str, numbers))} (stages are numbered from 1), "
                                 f"got {stage!r}", field="stage")
        return [s for s in stages if s.number == stage]
    return list(stages)


def layout_filter(circuit: Circuit, stages: Sequence[StageLabel], *, stage: int | None = None
                  ) -> tuple[StageLayout, list[tuple[StageLabel, tuple[float, float, float, float]]]]:
    """The placed drawing of the whole filter (or of stage number ``stage``) and each stage's frame.

    Stages stand left to right; one stage's output terminal is joined to the
    next one's input by a wire carrying the node's name.

    Returns
    -------
    layout : StageLayout
    frames : list of (StageLabel, (xmin, ymin, xmax, ymax))
        Frame rectangles in schematic units.
    """
    chosen = _check_stages(circuit, stages, stage)
    merged = StageLayout()
    frames = []
    x_next = 0.0
    prev_out = None
    for k, label in enumerate(chosen):
        lay = layout_stage(stage_elements(circuit, label.refs), label.input_node, label.output_node)
        xmin, _, _, _ = lay.bbox()
        lay = lay.shifted(x_next - xmin)
        if prev_out is not None:
            # join the previous output terminal to this input terminal; name the node once on the wire
            pin = next(p for p in lay.ports if p.terminal and p.side == "left")
            lay.ports.remove(pin)
            merged.ports.remove(prev_out)
            (xa, ya), (xb, yb) = prev_out.at, pin.at
            xm = (xa + xb) / 2
            net = label.input_node
            if abs(ya - yb) > 1e-9:
                merged.wires += [PlacedWire(net, (xa, ya), (xm, ya)), PlacedWire(net, (xm, ya), (xm, yb)),
                                 PlacedWire(net, (xm, yb), (xb, yb))]
            else:
                merged.wires.append(PlacedWire(net, (xa, ya), (xb, yb)))
            merged.ports.append(PlacedPort(net, (xm, yb), "label", False))
        merged.parts += lay.parts
        merged.opamps += lay.opamps
        merged.wires += lay.wires
        merged.grounds += lay.grounds
        merged.ports += lay.ports
        bx0, by0, bx1, by1 = lay.bbox()
        frames.append((label, (bx0 + 0.5, by0 - FRAME_MARGIN, bx1 - 0.5, by1 + FRAME_MARGIN)))
        x_next = bx1 + STAGE_SPACING
        prev_out = next(p for p in lay.ports if p.terminal and p.side == "right")
    merged.dots = junction_dots(merged)
    return merged, frames


def draw_schematic(circuit: Circuit, stages: Sequence[StageLabel], *, stage: int | None = None,
                   title: str | None = None) -> str:
    """SVG text of the filter's schematic (all stages, or stage number ``stage``).

    Parameters
    ----------
    circuit : Circuit
        The filter's circuit; element names are the refs shown.  The input
        source is not drawn (the input node is a terminal).
    stages : sequence of StageLabel
        One per stage, in signal order.
    stage : int, optional
        Draw only this stage (numbered from 1).
    title : str, optional
        The SVG's accessible title (``<title>``); a default names the stages.

    Returns
    -------
    str
        A standalone SVG document.

    Raises
    ------
    SchematicError
        An unknown stage number (``field="stage"``), a ref not in the
        circuit, an element kind without a symbol.
    """
    layout, frames = layout_filter(circuit, stages, stage=stage)
    if title is None:
        title = "Schematic: " + "; ".join(lbl.title() for lbl, _ in frames)
    return _render(layout, frames, title)


# --------------------------------------------------------------------------- drawing with schemdraw


def _render(layout: StageLayout, frames, title: str) -> str:
    import schemdraw
    import schemdraw.elements as elm

    schemdraw.svgconfig.text = "text"          # real <text> elements (searchable, accessible)
    groups: list[tuple[object, dict]] = []     # (schemdraw element, group attributes)

    def add(element, attrs: dict) -> None:
        groups.append((element, attrs))

    for lbl, (x0, y0, x1, y1) in frames:
        box = elm.Rect(corner1=(x0, y0), corner2=(x1, y1), ls="--", lw=0.8, color="#8a8f98")
        add(box, {"class": "stage", "data-stage": str(lbl.number)})
        add(elm.Label().at((x0, y1 + 0.15)).label(lbl.title(), halign="left", valign="bottom",
                                                    fontsize=TITLE_SIZE, color="#1d3557"),
            {"class": "stage-title", "data-stage": str(lbl.number)})

    for w in layout.wires:
        if w.a == w.b:
            continue
        add(elm.Line().at(w.a).to(w.b), {"class": "wire", "data-net": w.net})

    for p in layout.parts:
        sym = {ElementKind.RESISTOR: elm.ResistorIEEE if hasattr(elm, "ResistorIEEE") else elm.Resistor,
               ElementKind.CAPACITOR: elm.Capacitor, ElementKind.INDUCTOR: elm.Inductor2}[p.kind]
        e = sym().at(p.start).to(p.end)
        text = part_label(p.ref, p.value)
        if abs(p.start[1] - p.end[1]) < 1e-9:
            e.label(text, loc="top", fontsize=FONT_SIZE, rotate=False)
        else:
            e.label(text, loc="bottom", fontsize=FONT_SIZE, rotate=False, halign="left", valign="center",
                    ofst=(0.0, 0.3))
        add(e, {"class": "part", "data-ref": p.ref, "data-kind": p.kind.value, "data-value": repr(p.value),
                "pins": [p.start, p.end], "data-nodes": " ".join(p.nodes)})

    for u in layout.opamps:
        top = max(u.y_minus, u.y_plus)
        e = elm.Opamp(leads=True, sign=False).right().anchor("in1").at((u.pin_x, top))
        sign_x = 0.625 + 0.3
        e.label("−", loc="in1" if u.y_minus > u.y_plus else "in2", ofst=(sign_x, 0), halign="center",
                valign="center", fontsize=FONT_SIZE + 2)
        e.label("+", loc="in1" if u.y_plus > u.y_minus else "in2", ofst=(sign_x, 0), halign="center",
                valign="center", fontsize=FONT_SIZE + 2)
        e.label(u.ref, loc="center", ofst=(-0.15, 0), halign="center", valign="center", fontsize=FONT_SIZE)
        add(e, {"class": "opamp", "data-ref": u.ref, "data-nodes": " ".join(u.nodes),
                "pins": [(u.pin_x, u.y_plus), (u.pin_x, u.y_minus), u.out], "data-pin-names": "+ - out"})

    for g in layout.grounds:
        add(elm.Ground().theta(0).at(g.at), {"class": "ground", "pins": [g.at]})

    for d in layout.dots:
        add(elm.Dot(radius=0.09).at(d), {"class": "junction", "pins": [d]})

    for p in layout.ports:
        if p.terminal:
            e = elm.Dot(open=True, radius=0.12).at(p.at)
            e.label(p.net, loc="left" if p.side == "left" else "right", fontsize=FONT_SIZE,
                    halign="right" if p.side == "left" else "left", valign="center",
                    ofst=(-0.15 if p.side == "left" else 0.15, 0))
            add(e, {"class": "port", "data-net": p.net, "pins": [p.at]})
        else:
            e = elm.Label().at((p.at[0], p.at[1] + 0.2)).label(p.net, halign="center", valign="bottom",
                                                               fontsize=FONT_SIZE, color="#1d3557")
            add(e, {"class": "netlabel", "data-net": p.net, "pins": [p.at]})

    drawing = _GroupedDrawing(groups)
    drawing.config(fontsize=FONT_SIZE, font="sans-serif", inches_per_unit=INCHES_PER_UNIT, lw=1.6, margin=0.9)
    for element, _ in groups:
        drawing.add(element)
    svg = drawing.get_imagedata("svg").decode("utf-8")
    return _finish(svg, title)


def _finish(svg: str, title: str) -> str:
    """Add an accessible title and a white background; keep the document standalone."""
    ET.register_namespace("", "http://www.w3.org/2000/svg")
    ET.register_namespace("xlink", "http://www.w3.org/1999/xlink")
    root = ET.fromstring(svg)
    root.set("role", "img")
    root.set("class", "rolloff-schematic")
    t = ET.Element("{http://www.w3.org/2000/svg}title")
    t.text = title
    root.insert(0, t)
    root.set("style", "background-color:#ffffff")
    return ET.tostring(root, encoding="unicode")


def _grouped_drawing_class():
    import schemdraw

    class Grouped(schemdraw.Drawing):
        """A schemdraw drawing that wraps each element's SVG output in a ``<g>`` with attributes."""

        def __init__(self, groups):
            super().__init__(canvas="svg", show=False)
            self._attrs = {id(e): a for e, a in groups}

        def _drawelements(self):  # schemdraw's hook that draws every element on self.fig
            fig = self.fig
            for element in self.elements:
                before = len(fig.svgelements)
                element._draw(fig)
                new = fig.svgelements[before:]
                del fig.svgelements[before:]
                attrs = dict(self._attrs.get(id(element), {}))
                g = ET.Element("g")
                pins = attrs.pop("pins", None)
                for k, v in attrs.items():
                    g.set(k, v)
                if pins is not None:
                    pts = [fig.xform(x, y) for x, y in pins]
                    g.set("data-pins", " ".join(f"{_num(px)},{_num(py)}" for px, py in pts))
                for _, child in sorted(new, key=lambda t: t[0]):
                    g.append(child)
                fig.svgelements.append((min((z for z, _ in new), default=2), g))

    return Grouped


def _num(v: float) -> str:
    return f"{float(v):.3f}".rstrip("0").rstrip(".")


class _GroupedDrawing:
    """Lazily built subclass of ``schemdraw.Drawing`` (schemdraw is imported on first use)."""

    _cls = None

    def __new__(cls, groups):
        if cls._cls is None:
            cls._cls = _grouped_drawing_class()
        return cls._cls(groups)


__all__ = ["SchematicError", "StageLabel", "draw_schematic", "layout_filter", "part_label"]
