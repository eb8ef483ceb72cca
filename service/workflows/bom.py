"""The bill of materials people order from: one line per distinct part, with its quantity and refs.

:func:`bom_lines` rolls a design's parts up by what is bought -- kind, value,
tolerance, dielectric and the caller's ``part_id`` (for an op-amp also its
gain-bandwidth product and slew rate, which say which part it is) -- counts
them and lists their refs (in natural order: R2 before R10). Lines are sorted
by kind in the order of their reference letters (capacitors C, resistors R,
op-amps U, then any other kind), then by value. Each value is given in its SI
base unit, exactly, and in engineering notation (``"10.7k"``, ``"2.2n"``;
ASCII ``u`` for micro), which :func:`service.units.parse_quantity` reads back.

One owner for the JSON reply (``bom_lines`` of the design document) and the
CSV download (:func:`bom_table`): both come from the same :class:`BomLine`\\ s.
The per-ref ``bom`` of the document stays beside it for existing callers.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

from service.units import format_quantity

#: Kinds in BOM order (their reference letters C, R, U); other kinds follow in alphabetical order.
KIND_ORDER = ("capacitor", "resistor", "opamp")
#: SI base unit of each kind's value.
UNITS = {"resistor": "ohm", "capacitor": "F", "inductor": "H"}
#: Significant digits of the engineering-notation value (enough for any part value of a series or stock).
VALUE_DIGITS = 6
#: Columns of the CSV download, in order.
COLUMNS = ("kind", "quantity", "refs", "value", "value_text", "unit", "tolerance", "dielectric", "part_id",
           "gbw_hz", "slew_v_per_us")


@dataclass(frozen=True)
class BomLine:
    """One line of the bill of materials.

    Attributes
    ----------
    kind : str
        ``resistor``, ``capacitor``, ``opamp`` (or another kind a design adds).
    quantity : int
        How many parts of this line the board carries (``len(refs)``).
    refs : tuple of str
        Their references, in natural order.
    value : float or None
        Value in the SI base unit (ohm, F); None for op-amps.
    value_text : str or None
        ``value`` in engineering notation without unit (``"10.7k"``).
    unit : str or None
        ``ohm`` or ``F``; None for op-amps.
    tolerance : float or None
        Relative tolerance (0.01 = 1 %).
    dielectric : str or None
        Capacitors only.
    part_id : str or None
        The caller's part number, as given in the stock or the op-amp.
    gbw_hz : float or None
        Op-amps: gain-bandwidth product (Hz); None for an ideal op-amp.
    slew_v_per_us : float or None
        Op-amps: slew rate (V/us), when given.
    """

    kind: str
    quantity: int
    refs: tuple[str, ...]
    value: float | None
    value_text: str | None
    unit: str | None
    tolerance: float | None
    dielectric: str | None
    part_id: str | None
    gbw_hz: float | None = None
    slew_v_per_us: float | None = None

    def as_dict(self) -> dict:
        """The JSON form (refs as a list)."""
        return {"kind": self.kind, "quantity": self.quantity, "refs": list(self.refs), "value": self.value,
                "value_text": self.value_text, "unit": self.unit, "tolerance": self.tolerance,
                "dielectric": self.dielectric, "part_id": self.part_id, "gbw_hz": self.gbw_hz,
                "slew_v_per_us": self.slew_v_per_us}


def natural_key(ref: str) -> tuple:
    """Sort key of a reference: letters, then numbers by value (``R2`` before ``R10``)."""
    return tuple((0, int(t), "") if t.isdigit() else (1, 0, t) for t in re.findall(r"\d+|\D+", ref))


def _kind_rank(kind: str) -> tuple[int, str]:
    return (KIND_ORDER.index(kind), "") if kind in KIND_ORDER else (len(KIND_ORDER), kind)


def _finite(x: Any) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _sort_key(line: BomLine) -> tuple:
    none_last = lambda v: (v is None, v if v is not None else 0)  # noqa: E731
    return (_kind_rank(line.kind), none_last(line.value), none_last(line.gbw_hz), none_last(line.tolerance),
            line.dielectric or "", line.part_id or "", natural_key(line.refs[0]))


def roll_up(rows: Iterable[Mapping[str, Any]], opamps: Mapping[str, Any] | None = None) -> list[BomLine]:
    """Roll per-ref BOM rows up into lines (see the module notes).

    Parameters
    ----------
    rows : iterable of mapping
        One row per ref: ``{ref, kind, value, tolerance, dielectric, part_id}`` (op-amp rows may also carry
        ``gbw_hz`` and ``slew_v_per_us``), as :class:`service.realization.Design` lists them.
    opamps : mapping of str to object, optional
        Op-amps by ref (anything with ``gbw_hz`` and ``slew_v_per_us`` attributes): their figures, for op-amp
        rows that do not carry them.

    Returns
    -------
    list of BomLine
        Sorted by kind, then value; ``sum(line.quantity) == len(rows)``.
    """
    opamps = opamps or {}
    groups: dict[tuple, list[str]] = {}
    for row in rows:
        kind = str(row["kind"])
        gbw = slew = None
        if kind == "opamp":
            use = opamps.get(row["ref"])
            gbw = _finite(row.get("gbw_hz", getattr(use, "gbw_hz", None)))
            slew = _finite(row.get("slew_v_per_us", getattr(use, "slew_v_per_us", None)))
        key = (kind, _finite(row.get("value")), _finite(row.get("tolerance")),
               row.get("dielectric") if kind == "capacitor" else None, row.get("part_id"), gbw, slew)
        groups.setdefault(key, []).append(str(row["ref"]))
    lines = []
    for (kind, value, tolerance, dielectric, part_id, gbw, slew), refs in groups.items():
        unit = UNITS.get(kind)
        lines.append(BomLine(
            kind=kind, quantity=len(refs), refs=tuple(sorted(refs, key=natural_key)), value=value,
            value_text=None if value is None else format_quantity(value, significant=VALUE_DIGITS),
            unit=unit if value is not None else None, tolerance=tolerance, dielectric=dielectric, part_id=part_id,
            gbw_hz=gbw, slew_v_per_us=slew))
    return sorted(lines, key=_sort_key)


def bom_lines(design) -> list[BomLine]:
    """The BOM lines of a realized design (:class:`service.realization.Design`): its ``bom`` rows rolled up,
    op-amp figures from its stages' op-amps."""
    opamps = {u.ref: u for plan in getattr(design, "plans", ()) for u in plan.opamps}
    return roll_up(design.bom, opamps)


def bom_table(lines: Iterable[BomLine]) -> dict[str, list]:
    """CSV columns (:data:`COLUMNS`) of BOM lines: one row per line, refs separated by spaces."""
    lines = list(lines)
    table = {c: [getattr(line, c) for line in lines] for c in COLUMNS}
    table["refs"] = [" ".join(line.refs) for line in lines]
    return table


__all__ = ["BomLine", "bom_lines", "bom_table", "roll_up", "natural_key", "COLUMNS", "KIND_ORDER"]
