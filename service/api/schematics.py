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


def schematic_svg(document: dict, stage: int | None = None) -> str:
    """SVG text of the document's whole filter, or of stage number ``stage`` (from 1).

    Raises
    ------
    RealizationError
        The document's stages cannot be read (``field`` names the entry, relative to the document).
    SchematicError
        ``stage`` is not a stage of the design (``field="stage"``).
    """
    from service.realization import RealizationError
    from service.realization.analysis import cascade_circuit
    from service.realization.document import plans_from_document

    try:
        plans, _ = plans_from_document(document)
    except RealizationError as exc:   # fields relative to the document, as /v1/designs/evaluate names them
        if exc.field and exc.field.startswith("design."):
            exc.field = exc.field[len("design."):]
        raise
    circuit = cascade_circuit(plans, ideal=True, title="filter")
    family = document.get("family")
    response = document.get("response")
    what = " ".join(str(x) for x in (family, response) if x) or "filter"
    scope = f"stage {stage}" if stage is not None else f"{len(plans)} stage{'s' if len(plans) != 1 else ''}"
    return draw_schematic(circuit, stage_labels(plans), stage=stage, title=f"Schematic of the {what}, {scope}")
