"""A design document's schematic: the document's circuit, drawn.

Kept apart from the views: a view that offers ``format=svg`` calls
:func:`schematic_svg` with the design document it has (designed or
evaluated) and returns the text.  The circuit is the one the engine solves
(:func:`service.realization.analysis.cascade_circuit` of the document's
stages, element names = refs), so the drawing cannot drift from the
analysis.
"""

from __future__ import annotations

from service.circuit.schematic import StageLabel, draw_schematic


def stage_labels(plans) -> list[StageLabel]:
    """One label per stage plan: number from 1, section figures, nodes as the cascade names them, refs."""
    labels = []
    node = "in"
    for k, plan in enumerate(plans, start=1):
        out = "out" if k == len(plans) else f"out{k}"
        sec = plan.section
        refs = tuple(c.ref for c in plan.components) + tuple(u.ref for u in plan.opamps)
        labels.append(StageLabel(number=k, kind=sec.kind.value, f0_hz=sec.f0_hz, q=sec.q, input_node=node,
                                 output_node=out, refs=refs, fz_hz=sec.fz_hz))
        node = out
    return labels


def schematic_svg(document, stage: int | None = None) -> str:
    """SVG text of a :class:`~service.workflows.DesignDocument`'s whole filter, or of stage number ``stage`` (from 1).

    Raises
    ------
    DocumentError, RealizationError
        The document cannot be read (``field`` names the entry, relative to the document).
    SchematicError
        ``stage`` is not a stage of the design (``field="stage"``).
    """
    from service.realization.analysis import cascade_circuit

    plans = document.plans()
    circuit = cascade_circuit(plans, ideal=True, title="filter")
    family = None if document.family is None else document.family.value
    response = None if document.response is None else document.response.value
    what = " ".join(str(x) for x in (family, response) if x) or "filter"
    scope = f"stage {stage}" if stage is not None else f"{len(plans)} stage{'s' if len(plans) != 1 else ''}"
    return draw_schematic(circuit, stage_labels(plans), stage=stage, title=f"Schematic of the {what}, {scope}")
