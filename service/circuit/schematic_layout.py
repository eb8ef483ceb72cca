"""Place a circuit's elements on a grid for a schematic: geometry only, no drawing.

The layout is derived from the netlist graph alone, so any topology built
from resistors, capacitors, inductors and op-amps is drawn without a
template of its own:

1. **Columns.** Every node other than ground becomes a vertical bus line at
   its own x.  Nodes are ordered by breadth-first signal depth from the
   input, subject to two rules: an op-amp's inputs stand left of its output,
   and the stage output is last.  Each op-amp stands in the slot just left of
   the node it drives.
2. **Rows.** Each part between two nodes is a horizontal run at an integer
   row (row 0 is the main signal line, pitch :data:`PITCH`) from one bus to
   the other, with its symbol in a gap between columns.  Rows are chosen
   greedily, shortest runs first, by a cost that counts wire crossings and
   distance from the main line; a run never overlaps another run or passes
   through an op-amp.  Op-amp inputs whose node lies elsewhere reach it by a
   "dog-leg": a stub left of the pin, a vertical to a free row above (the
   upper input) or below (the lower input), then a horizontal run to the bus.
3. **Ground.** Parts to ground hang below everything, under their node's
   bus, each with its own ground symbol; a grounded op-amp input gets a
   ground symbol at its pin.
4. **Junctions.** A dot marks every point where three or more wire arms of
   one node meet (the usual drafting rule: wires that cross without a dot
   are not connected).

Coordinates are in schematic units (x right, y up).  The result is plain
data (:class:`StageLayout`) that :mod:`service.circuit.schematic` renders.

References
----------
.. [1] IEEE Std 315-1975, "Graphic Symbols for Electrical and Electronics
   Diagrams", sec. 3 (connection dots; crossings without a dot are not
   connected).
.. [2] K. Sugiyama, S. Tagawa, M. Toda, "Methods for visual understanding of
   hierarchical system structures", IEEE Trans. SMC-11(2), 1981 (layered
   layout: layers by depth, then crossing reduction).
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass, field

from .errors import CircuitError
from .netlist import GROUND, Circuit, Element, ElementKind

#: Vertical distance between rows, in schematic units (= the op-amp's input spacing).
PITCH = 1.25
#: Width of the gap between two node columns that holds a horizontal part.
GAP = 3.0
#: Length of a horizontal or vertical two-terminal symbol with its short leads.
PART_LENGTH = 2.0
#: Op-amp symbol (inputs to output, with leads) and the room around it.
OPAMP_WIDTH = 3.415
OPAMP_HALF_HEIGHT = 1.25
OPAMP_LEFT = 1.2           # column -> op-amp input pins (holds the dog-legs)
DOGLEG = 0.5               # dog-leg vertical this far left of the pins
OPAMP_RIGHT = 0.8          # op-amp output -> its node's column
#: Hanging parts to ground: horizontal spacing and the room a label needs right of the symbol.
HANG_STEP = 1.9
HANG_LABEL = 1.7
GROUND_DEPTH = 0.64
PORT_LEAD = 1.0

TWO_TERMINAL = (ElementKind.RESISTOR, ElementKind.CAPACITOR, ElementKind.INDUCTOR)
_EPS = 1e-9
_BELOW = 1e3      # stands for "below every row" while rows are chosen


class SchematicError(CircuitError):
    """A circuit (or a stage of it) cannot be drawn: an element kind without a symbol, a missing node."""


Point = tuple[float, float]


@dataclass(frozen=True)
class PlacedPart:
    """A two-terminal part from ``start`` (node ``nodes[0]``) to ``end`` (node ``nodes[1]``)."""

    ref: str
    kind: ElementKind
    value: float
    nodes: tuple[str, str]
    start: Point
    end: Point


@dataclass(frozen=True)
class PlacedOpAmp:
    """An op-amp: inverting input on top, non-inverting below, output right.

    ``pin_x`` is the x of both input pins; ``y_minus``/``y_plus`` their y;
    ``out`` the output pin.  ``nodes`` is ``(plus, minus, output)``.
    """

    ref: str
    nodes: tuple[str, str, str]
    pin_x: float
    y_minus: float
    y_plus: float
    flipped: bool

    @property
    def center(self) -> Point:
        return (self.pin_x + OPAMP_WIDTH / 2, (self.y_minus + self.y_plus) / 2)

    @property
    def out(self) -> Point:
        return (self.pin_x + OPAMP_WIDTH, (self.y_minus + self.y_plus) / 2)


@dataclass(frozen=True)
class PlacedWire:
    """One straight wire segment of node ``net``."""

    net: str
    a: Point
    b: Point


@dataclass(frozen=True)
class PlacedGround:
    """A ground symbol whose connection point is ``at``."""

    at: Point


@dataclass(frozen=True)
class PlacedPort:
    """A named node: ``terminal`` (open circle, the stage's input or output) or ``label`` (text on a wire)."""

    net: str
    at: Point
    side: str          # "left" or "right": where the text goes
    terminal: bool


@dataclass
class StageLayout:
    """Everything one stage (or a whole filter) draws, in schematic units."""

    parts: list[PlacedPart] = field(default_factory=list)
    opamps: list[PlacedOpAmp] = field(default_factory=list)
    wires: list[PlacedWire] = field(default_factory=list)
    grounds: list[PlacedGround] = field(default_factory=list)
    ports: list[PlacedPort] = field(default_factory=list)
    dots: list[Point] = field(default_factory=list)

    def bbox(self) -> tuple[float, float, float, float]:
        """``(xmin, ymin, xmax, ymax)`` of the drawn geometry (labels included roughly)."""
        xs: list[float] = []
        ys: list[float] = []
        for p in self.parts:
            xs += [p.start[0], p.end[0]]
            ys += [p.start[1], p.end[1]]
            if p.start[1] == p.end[1]:
                ys.append(p.start[1] + 0.75)
            else:
                xs.append(max(p.start[0], p.end[0]) + HANG_LABEL)
        for u in self.opamps:
            xs += [u.pin_x - DOGLEG, u.out[0]]
            ys += [u.center[1] - OPAMP_HALF_HEIGHT, u.center[1] + OPAMP_HALF_HEIGHT]
        for w in self.wires:
            xs += [w.a[0], w.b[0]]
            ys += [w.a[1], w.b[1]]
        for g in self.grounds:
            ys.append(g.at[1] - GROUND_DEPTH)
        for p in self.ports:
            xs.append(p.at[0] + (-0.9 if p.side == "left" else 0.9))
        return min(xs), min(ys), max(xs), max(ys)

    def shifted(self, dx: float, dy: float = 0.0) -> "StageLayout":
        """A copy moved by ``(dx, dy)``."""
        def mv(p: Point) -> Point:
            return (p[0] + dx, p[1] + dy)
        return StageLayout(
            parts=[PlacedPart(p.ref, p.kind, p.value, p.nodes, mv(p.start), mv(p.end)) for p in self.parts],
            opamps=[PlacedOpAmp(u.ref, u.nodes, u.pin_x + dx, u.y_minus + dy, u.y_plus + dy, u.flipped)
                    for u in self.opamps],
            wires=[PlacedWire(w.net, mv(w.a), mv(w.b)) for w in self.wires],
            grounds=[PlacedGround(mv(g.at)) for g in self.grounds],
            ports=[PlacedPort(p.net, mv(p.at), p.side, p.terminal) for p in self.ports],
            dots=[mv(d) for d in self.dots],
        )


# --------------------------------------------------------------------------- the stage's elements


def stage_elements(circuit: Circuit, refs) -> list[Element]:
    """The elements named ``refs`` (in circuit order); :class:`SchematicError` for an unknown name."""
    by_name = {el.name: el for el in circuit.elements}
    missing = [r for r in refs if r not in by_name]
    if missing:
        raise SchematicError(f"the circuit has no element named {', '.join(missing)}", field="stages")
    wanted = set(refs)
    out = [el for el in circuit.elements if el.name in wanted]
    for el in out:
        if el.kind not in TWO_TERMINAL and el.kind is not ElementKind.OPAMP:
            raise SchematicError(f"{el.name}: no schematic symbol for a {el.kind.value} element", field="stages")
    return out


# --------------------------------------------------------------------------- 1. columns


def _column_order(elements: list[Element], input_node: str, output_node: str) -> list[str]:
    """Nodes (ground excluded) left to right: signal depth, op-amp inputs before outputs, output last."""
    nets: dict[str, int] = {}
    for el in elements:
        for n in el.nodes:
            if n != GROUND:
                nets.setdefault(n, len(nets))
    for n in (input_node, output_node):
        if n not in nets:
            raise SchematicError(f"node {n!r} is not a node of the stage's elements", field="stages")
    adj: dict[str, list[str]] = {n: [] for n in nets}
    before: dict[str, set[str]] = {n: set() for n in nets}
    for el in elements:
        if el.kind is ElementKind.OPAMP:
            plus, minus, out = el.nodes
            for i in (plus, minus):
                if i != GROUND and i != out:
                    adj[i].append(out)
                    before[out].add(i)
        else:
            a, b = el.nodes
            if a != GROUND and b != GROUND:
                adj[a].append(b)
                adj[b].append(a)
    driven = {el.nodes[2] for el in elements if el.kind is ElementKind.OPAMP}
    # Signal depth: a node an op-amp drives is reached through that op-amp only, not through the
    # parts that feed its output back.
    depth = {input_node: 0}
    queue = deque([input_node])
    while queue:
        n = queue.popleft()
        for m in adj[n]:
            if m not in depth and (m not in driven or n in before[m]):
                depth[m] = depth[n] + 1
                queue.append(m)
    unreached = max(depth.values()) + 1
    # An op-amp's input node stands just before the op-amp; other nodes by depth.
    rank = {n: float(depth.get(n, unreached)) for n in nets}
    rank[output_node] = math.inf
    for n in nets:
        fed = [out for out in driven if n in before[out]]
        if fed and n not in driven and n != input_node:
            rank[n] = min(float(depth.get(out, unreached)) if out != output_node else math.inf for out in fed) - 0.5

    def key(n: str):
        return (n == output_node, n != input_node, rank[n], depth.get(n, unreached), nets[n])

    order: list[str] = []
    left = set(nets)
    while left:
        ready = [n for n in left if not (before[n] & left) or n == input_node]
        if output_node in ready and len(left) > 1:
            ready.remove(output_node)
        pick = min(ready or left, key=key)      # a loop of op-amp constraints: break it by depth
        order.append(pick)
        left.remove(pick)
    return order


# --------------------------------------------------------------------------- 2. rows


@dataclass
class _Run:
    """A horizontal run occupying ``[x0, x1]`` at a row; ``nets`` it may touch at column x."""

    x0: float
    x1: float
    nets: frozenset


@dataclass
class _Vertical:
    x: float
    y0: float
    y1: float
    net: str


class _Grid:
    """Occupancy of rows, op-amp bodies, verticals and buses while runs are placed."""

    def __init__(self, columns: dict[str, float]):
        self.columns = columns                    # net -> x
        self.column_x = {x: n for n, x in columns.items()}
        self.rows: dict[int, list[_Run]] = {}
        self.blocks: list[tuple[float, float, float, float, str]] = []   # x0, x1, y0, y1, owner
        self.verticals: list[_Vertical] = []
        self.span: dict[str, list[float]] = {n: [] for n in columns}     # attachment ys per net

    # -- queries
    def run_free(self, row: int, x0: float, x1: float, nets: frozenset, owner: str | None = None) -> bool:
        y = row * PITCH
        for r in self.rows.get(row, ()):
            if r.x0 < x1 - _EPS and x0 < r.x1 - _EPS:
                return False
            for x in (r.x0, r.x1):
                if abs(x - x0) < _EPS or abs(x - x1) < _EPS:
                    net = self.column_x.get(x)
                    if net is None or net not in nets or net not in r.nets:
                        return False
        for bx0, bx1, by0, by1, who in self.blocks:
            if who != owner and by0 - 0.3 <= y <= by1 + 0.3 and x0 < bx1 and bx0 < x1:
                return False
        for v in self.verticals:
            # a run may cross another net's vertical, never end on it or touch its end
            if v.net in nets:
                continue
            if x0 - _EPS <= v.x <= x1 + _EPS and min(v.y0, v.y1) - _EPS <= y <= max(v.y0, v.y1) + _EPS:
                if abs(v.x - x0) < _EPS or abs(v.x - x1) < _EPS or abs(y - v.y0) < _EPS or abs(y - v.y1) < _EPS:
                    return False
        return True

    def crossings(self, row: int, x0: float, x1: float, ends: tuple[str, ...]) -> int:
        """Wires this run would cross, and runs that its end buses' extension would cross."""
        y = row * PITCH
        count = 0
        for net, x in self.columns.items():
            if x0 + _EPS < x < x1 - _EPS and net not in ends and self.span[net]:
                if min(self.span[net]) - _EPS <= y <= max(self.span[net]) + _EPS:
                    count += 1
        for v in self.verticals:
            if v.net not in ends and x0 < v.x < x1 and min(v.y0, v.y1) < y < max(v.y0, v.y1):
                count += 1
        for net in ends:
            if net not in self.columns:
                continue
            ys = self.span[net]
            lo, hi = (min(ys), max(ys)) if ys else (y, y)
            new_lo, new_hi = min(lo, y), max(hi, y)
            x = self.columns[net]
            for r_row, runs in self.rows.items():
                ry = r_row * PITCH
                if (new_lo - _EPS <= ry < lo - _EPS) or (hi + _EPS < ry <= new_hi + _EPS):
                    count += sum(1 for r in runs if r.x0 + _EPS < x < r.x1 - _EPS)
        return count

    # -- updates
    def add_run(self, row: int, x0: float, x1: float, nets: frozenset) -> None:
        self.rows.setdefault(row, []).append(_Run(x0, x1, nets))

    def attach(self, net: str, y: float) -> None:
        if net in self.span:
            self.span[net].append(y)


@dataclass
class _TwoTerminal:
    el: Element
    a: str
    b: str


def _placements(grid: _Grid, row: int, x0: float, x1: float, columns: list[float],
                opamp_spans: list[tuple[float, float]]) -> list[float]:
    """Centres where a horizontal symbol fits on ``row`` between ``x0`` and ``x1``, best first."""
    y = row * PITCH
    inner = [x for x in columns if x0 - _EPS <= x <= x1 + _EPS]
    cands = []
    for xa, xb in zip(inner, inner[1:]):
        inside = [s for s in opamp_spans if xa < s[0] and s[1] < xb]
        if inside:
            for s0, s1 in inside:
                cands.append((0, (s0 + s1) / 2 + DOGLEG / 2))
        elif xb - xa >= PART_LENGTH + 0.4:
            cands.append((1, (xa + xb) / 2))
    mid = (x0 + x1) / 2
    out = []
    for _, c in sorted(cands, key=lambda t: (t[0] != 1, abs(t[1] - mid))):
        lo, hi = c - PART_LENGTH / 2 - 0.1, c + PART_LENGTH / 2 + 0.1
        if any(lo <= v.x <= hi and min(v.y0, v.y1) - 0.6 <= y <= max(v.y0, v.y1) + 0.6 for v in grid.verticals):
            continue
        if any(b[0] < hi and lo < b[1] and b[2] - 0.5 <= y <= b[3] + 0.5 for b in grid.blocks):
            continue
        out.append(c)
    return out


def layout_stage(elements: list[Element], input_node: str, output_node: str) -> StageLayout:
    """Place one stage's elements (see the module notes).

    Parameters
    ----------
    elements : list of Element
        Resistors, capacitors, inductors and op-amps of the stage.
    input_node, output_node : str
        The stage's input and output nodes (drawn as terminals left and right).

    Returns
    -------
    StageLayout
        Input terminal at x = -PORT_LEAD, main signal line at y = 0.
    """
    order = _column_order(elements, input_node, output_node)
    opamps = [el for el in elements if el.kind is ElementKind.OPAMP]
    driver = {}
    for u in opamps:
        if u.nodes[2] in driver:
            raise SchematicError(f"{u.name} and {driver[u.nodes[2]].name} both drive node {u.nodes[2]!r}",
                                 field="stages")
        driver[u.nodes[2]] = u
    two = [_TwoTerminal(el, *el.nodes) for el in elements if el.kind in TWO_TERMINAL]
    hanging: dict[str, list[_TwoTerminal]] = {n: [] for n in order}
    for t in two:
        if t.b == GROUND:
            hanging[t.a].append(t)
        elif t.a == GROUND:
            hanging[t.b].append(t)

    # Column x positions and op-amp slots.
    columns: dict[str, float] = {}
    pin_x: dict[str, float] = {}
    x = 0.0
    for i, net in enumerate(order):
        if i:
            prev = order[i - 1]
            need_hang = (len(hanging[prev]) - 1) * HANG_STEP + HANG_LABEL + 0.6 if hanging[prev] else 0.0
            if net in driver:
                gap = OPAMP_LEFT + OPAMP_WIDTH + OPAMP_RIGHT
                gap = max(gap, need_hang)
                pin_x[driver[net].name] = x + gap - OPAMP_RIGHT - OPAMP_WIDTH
            else:
                gap = max(GAP, need_hang)
            x += gap
        columns[net] = x
    grid = _Grid(columns)
    layout = StageLayout()
    for net in order:
        if hanging[net]:
            grid.attach(net, -_BELOW)      # parts hang below everything: the bus will reach down there

    # Op-amps: grounded "+" -> inverting (- on row 0, + below); otherwise + on row 0 and - above,
    # or - below when the "-" node has its own part to ground (the usual non-inverting gain drawing).
    placed_u: dict[str, PlacedOpAmp] = {}
    for u in opamps:
        plus, minus, out = u.nodes
        px = pin_x.get(u.name)
        if px is None:   # its output is the stage input or precedes nothing: put it right of the last column
            raise SchematicError(f"{u.name}: cannot place an op-amp that drives the stage input", field="stages")
        if plus == GROUND:
            y_minus, y_plus, flipped = 0.0, -PITCH, False
        elif minus != out and hanging.get(minus):
            y_plus, y_minus, flipped = 0.0, -PITCH, True
        else:
            y_plus, y_minus, flipped = 0.0, PITCH, False
        pu = PlacedOpAmp(u.name, (plus, minus, out), px, y_minus, y_plus, flipped)
        placed_u[u.name] = pu
        lo = min(y_minus, y_plus) - PITCH / 2
        hi = max(y_minus, y_plus) + PITCH / 2
        if GROUND in (plus, minus):
            lo = min(y_minus, y_plus) - 0.4 - GROUND_DEPTH
        grid.blocks.append((px - DOGLEG - 0.3, px + OPAMP_WIDTH, lo, hi, u.name))
        layout.opamps.append(pu)
        # output straight to its column
        ox, oy = pu.out
        layout.wires.append(PlacedWire(out, (ox, oy), (columns[out], oy)))
        grid.attach(out, oy)

    # Ports: input at the left on row 0, output at the right on its driver's output row.
    xin = columns[input_node]
    layout.ports.append(PlacedPort(input_node, (xin - PORT_LEAD, 0.0), "left", True))
    layout.wires.append(PlacedWire(input_node, (xin - PORT_LEAD, 0.0), (xin, 0.0)))
    grid.add_run(0, xin - PORT_LEAD, xin, frozenset({input_node}))
    grid.attach(input_node, 0.0)
    y_out = placed_u[driver[output_node].name].out[1] if output_node in driver else 0.0
    xout = columns[output_node]
    layout.ports.append(PlacedPort(output_node, (xout + PORT_LEAD, y_out), "right", True))
    layout.wires.append(PlacedWire(output_node, (xout, y_out), (xout + PORT_LEAD, y_out)))
    grid.attach(output_node, y_out)
    if abs(y_out / PITCH - round(y_out / PITCH)) < _EPS:
        grid.add_run(round(y_out / PITCH), xout, xout + PORT_LEAD, frozenset({output_node}))

    col_xs = sorted(columns.values())
    opamp_spans = [(pu.pin_x, pu.pin_x + OPAMP_WIDTH) for pu in placed_u.values()]

    # Op-amp inputs first (they are the most constrained), then parts, shortest runs first.
    for u in opamps:
        pu = placed_u[u.name]
        for which, net, y_pin in (("+", pu.nodes[0], pu.y_plus), ("-", pu.nodes[1], pu.y_minus)):
            if net == GROUND:
                xd = pu.pin_x - DOGLEG
                layout.wires.append(PlacedWire(GROUND, (pu.pin_x, y_pin), (xd, y_pin)))
                layout.wires.append(PlacedWire(GROUND, (xd, y_pin), (xd, y_pin - 0.4)))
                layout.grounds.append(PlacedGround((xd, y_pin - 0.4)))
                continue
            _connect_pin(grid, layout, pu, net, y_pin)

    def span_len(t: _TwoTerminal) -> float:
        if GROUND in (t.a, t.b):
            return math.inf
        return abs(columns[t.a] - columns[t.b])

    for t in sorted((t for t in two if GROUND not in (t.a, t.b)), key=span_len):
        _place_part(grid, layout, t, columns, col_xs, opamp_spans)

    # Hanging parts below everything.
    _, ymin, _, _ = _provisional_bbox(layout)
    y_hang = ymin - 0.9
    for net in order:
        for i, t in enumerate(hanging[net]):
            xk = columns[net]
            xp = xk + i * HANG_STEP
            if i:
                layout.wires.append(PlacedWire(net, (xk + (i - 1) * HANG_STEP, y_hang), (xp, y_hang)))
            start, end = (xp, y_hang), (xp, y_hang - PART_LENGTH)
            nodes = (net, GROUND)
            if t.a == GROUND:
                start, end, nodes = end, start, (GROUND, net)
            layout.parts.append(PlacedPart(t.el.name, t.el.kind, _scalar(t.el.value), nodes, start, end))
            layout.grounds.append(PlacedGround((xp, y_hang - PART_LENGTH)))
        if hanging[net]:
            grid.span[net].remove(-_BELOW)
            grid.attach(net, y_hang)

    # Buses: one vertical per node over its attachments.
    for net, x in columns.items():
        ys = grid.span[net]
        if ys and max(ys) - min(ys) > _EPS:
            layout.wires.append(PlacedWire(net, (x, min(ys)), (x, max(ys))))
    layout.dots = junction_dots(layout)
    return layout


def _scalar(value) -> float:
    try:
        return float(value)
    except TypeError:
        return float(value[0])


def _provisional_bbox(layout: StageLayout):
    ys = [0.0]
    for w in layout.wires:
        ys += [w.a[1], w.b[1]]
    for p in layout.parts:
        ys += [p.start[1] - 0.3, p.end[1] - 0.3]
    for u in layout.opamps:
        ys.append(u.center[1] - OPAMP_HALF_HEIGHT)
    for g in layout.grounds:
        ys.append(g.at[1] - GROUND_DEPTH)
    return 0.0, min(ys), 0.0, max(ys)


def _row_candidates(first: int, direction: int, limit: int = 14) -> list[int]:
    return [first + direction * k for k in range(limit)]


def _connect_pin(grid: _Grid, layout: StageLayout, pu: PlacedOpAmp, net: str, y_pin: float) -> None:
    """Wire an op-amp input to its node's bus: straight if the row is free, else by a dog-leg."""
    xk = grid.columns[net]
    row_pin = round(y_pin / PITCH)
    nets = frozenset({net})
    if xk < pu.pin_x and grid.run_free(row_pin, xk, pu.pin_x, nets, owner=pu.ref) and \
            grid.crossings(row_pin, xk, pu.pin_x, (net,)) == 0:
        layout.wires.append(PlacedWire(net, (xk, y_pin), (pu.pin_x, y_pin)))
        grid.add_run(row_pin, xk, pu.pin_x, nets)
        grid.attach(net, y_pin)
        return
    upper = y_pin >= max(pu.y_plus, pu.y_minus) - _EPS
    xd = pu.pin_x - DOGLEG
    top = round((pu.center[1] + OPAMP_HALF_HEIGHT) / PITCH + 0.5)
    bottom = round((pu.center[1] - OPAMP_HALF_HEIGHT) / PITCH - 0.5)
    start, direction = (top, 1) if upper else (bottom, -1)
    x0, x1 = min(xk, xd), max(xk, xd)
    best = None
    for row in _row_candidates(start, direction):
        if not grid.run_free(row, x0, x1, nets):
            continue
        # the vertical must not end on another net's run
        y = row * PITCH
        cost = grid.crossings(row, x0, x1, (net,)) * 4 + abs(row - start)
        cost += sum(1 for r_row, runs in grid.rows.items()
                    if min(y, y_pin) < r_row * PITCH < max(y, y_pin)
                    for r in runs if r.x0 < xd < r.x1)
        if best is None or cost < best[0]:
            best = (cost, row)
        if cost == 0:
            break
    if best is None:
        raise SchematicError(f"{pu.ref}: no free row to wire its input to node {net!r}", field="stages")
    row = best[1]
    y = row * PITCH
    layout.wires.append(PlacedWire(net, (pu.pin_x, y_pin), (xd, y_pin)))
    layout.wires.append(PlacedWire(net, (xd, y_pin), (xd, y)))
    layout.wires.append(PlacedWire(net, (xd, y), (xk, y)))
    grid.verticals.append(_Vertical(xd, y_pin, y, net))
    grid.add_run(row, x0, x1, nets)
    grid.attach(net, y)


def _place_part(grid: _Grid, layout: StageLayout, t: _TwoTerminal, columns: dict[str, float],
                col_xs: list[float], opamp_spans) -> None:
    """A part between two nodes: a horizontal run on the cheapest free row with room for its symbol."""
    xa, xb = columns[t.a], columns[t.b]
    x0, x1 = min(xa, xb), max(xa, xb)
    nets = frozenset({t.a, t.b})
    best = None
    for row in [0, 1, -1, 2, -2, 3, -3, 4, -4, 5, -5, 6, -6, 7, -7, 8, -8, 9, 10, 11, 12]:
        if not grid.run_free(row, x0, x1, nets):
            continue
        spots = _placements(grid, row, x0, x1, col_xs, opamp_spans)
        if not spots:
            continue
        cost = grid.crossings(row, x0, x1, (t.a, t.b)) * 4 + abs(row) + (0.5 if row < 0 else 0.0)
        if best is None or cost < best[0]:
            best = (cost, row, spots[0])
        if cost <= 1 and row >= 0:
            break
    if best is None:
        raise SchematicError(f"{t.el.name}: no free row to draw it between {t.a!r} and {t.b!r}", field="stages")
    _, row, c = best
    y = row * PITCH
    s, e = c - PART_LENGTH / 2, c + PART_LENGTH / 2
    # the part runs from its first node's side to its second node's side
    left_net, right_net = (t.a, t.b) if xa <= xb else (t.b, t.a)
    layout.wires.append(PlacedWire(left_net, (x0, y), (s, y)))
    layout.wires.append(PlacedWire(right_net, (e, y), (x1, y)))
    start, end = ((s, y), (e, y)) if xa <= xb else ((e, y), (s, y))
    layout.parts.append(PlacedPart(t.el.name, t.el.kind, _scalar(t.el.value), (t.a, t.b), start, end))
    grid.add_run(row, x0, x1, nets)
    grid.attach(t.a, y)
    grid.attach(t.b, y)


# --------------------------------------------------------------------------- 4. junctions


def junction_dots(layout: StageLayout) -> list[Point]:
    """Points where three or more wire arms of one node meet (part and op-amp pins count as arms)."""
    def key(p: Point) -> tuple[float, float]:
        return (round(p[0], 6), round(p[1], 6))

    arms: dict[tuple[str, tuple[float, float]], int] = {}
    ends_by_net: dict[str, set] = {}
    for w in layout.wires:
        for p in (w.a, w.b):
            k = key(p)
            arms[(w.net, k)] = arms.get((w.net, k), 0) + 1
            ends_by_net.setdefault(w.net, set()).add(k)
    for p in layout.parts:
        for node, pt in zip(p.nodes, (p.start, p.end)):
            k = key(pt)
            arms[(node, k)] = arms.get((node, k), 0) + 1
            ends_by_net.setdefault(node, set()).add(k)
    for u in layout.opamps:
        for node, pt in ((u.nodes[0], (u.pin_x, u.y_plus)), (u.nodes[1], (u.pin_x, u.y_minus)), (u.nodes[2], u.out)):
            k = key(pt)
            arms[(node, k)] = arms.get((node, k), 0) + 1
    for w in layout.wires:
        for k in ends_by_net.get(w.net, ()):
            if _strictly_inside(k, w.a, w.b):
                arms[(w.net, k)] = arms.get((w.net, k), 0) + 2
    return sorted({k for (net, k), n in arms.items() if n >= 3})


def _strictly_inside(p, a, b) -> bool:
    (x, y), (ax, ay), (bx, by) = p, a, b
    if abs(ax - bx) < _EPS:
        return abs(x - ax) < 1e-6 and min(ay, by) + 1e-6 < y < max(ay, by) - 1e-6
    if abs(ay - by) < _EPS:
        return abs(y - ay) < 1e-6 and min(ax, bx) + 1e-6 < x < max(ax, bx) - 1e-6
    return False


__all__ = [
    "PITCH", "PlacedGround", "PlacedOpAmp", "PlacedPart", "PlacedPort", "PlacedWire", "SchematicError",
    "StageLayout", "junction_dots", "layout_stage", "stage_elements",
]
