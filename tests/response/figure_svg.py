"""Reading the SVG figures back in tests: texts, named groups, marker positions; PNG screenshots (Agg)."""

from __future__ import annotations

import os
import xml.etree.ElementTree as ET

SVG = "{http://www.w3.org/2000/svg}"
XLINK = "{http://www.w3.org/1999/xlink}"
ARTIFACTS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "artifacts")


def tree(svg: bytes) -> ET.Element:
    """The parsed SVG document (matplotlib writes plain XML)."""
    return ET.fromstring(svg)


def groups(root: ET.Element) -> dict[str, ET.Element]:
    """Every ``<g>`` with an ``id``, by id."""
    return {g.get("id"): g for g in root.iter(f"{SVG}g") if g.get("id")}


def texts(element: ET.Element) -> list[str]:
    """The text of every ``<text>`` under ``element`` (text is written as text: svg.fonttype none)."""
    return ["".join(t.itertext()).strip() for t in element.iter(f"{SVG}text")]


def marker_points(group: ET.Element) -> list[tuple[float, float]]:
    """The (x, y) points (pt, y down) of the markers a Line2D group draws (``<use x= y=>``)."""
    return [(float(u.get("x")), float(u.get("y"))) for u in group.iter(f"{SVG}use")]


def svg_point(fig, ax, x: float, y: float) -> tuple[float, float]:
    """Where data (x, y) of ``ax`` lands in the SVG of ``fig``: points (1/72 in), y measured down."""
    px, py = ax.transData.transform((x, y))
    scale = 72.0 / fig.dpi
    return px * scale, fig.get_figheight() * 72.0 - py * scale


def save_png(fig, name: str) -> str:
    """Render ``fig`` to ``artifacts/<name>.png`` with Agg (for a person to look at; git ignores the folder)."""
    os.makedirs(ARTIFACTS, exist_ok=True)
    path = os.path.join(ARTIFACTS, f"{name}.png")
    fig.savefig(path, format="png", dpi=fig.dpi, facecolor="white")
    return path
