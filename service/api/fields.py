"""marshmallow fields of the service: quantities with SI prefixes, and strict numbers."""

from __future__ import annotations

import math
from typing import Any

import marshmallow as ma

from service.units import QuantityError, parse_quantity

_UNIT_SYMBOL = {"Hz": "Hz", "ohm": "Ω", "F": "F", "H": "H", "s": "s", "V": "V"}

# What the string branch accepts, for the OpenAPI document: a decimal or
# scientific number, an optional SI prefix, an optional unit.
_NUMBER_PATTERN = r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?"


def _string_pattern(units: tuple[str, ...]) -> str:
    spellings = []
    for unit in units:
        spellings += {"Hz": ["Hz"], "ohm": ["Ω", "ohm"], "F": ["F"], "H": ["H"], "s": ["s"], "V": ["V"]}[unit]
    unit_alt = "|".join(spellings)
    decimal = rf"{_NUMBER_PATTERN} ?[yzafpnuµmkMGT]?({unit_alt})?" if unit_alt else rf"{_NUMBER_PATTERN} ?[yzafpnuµmkMGT]?"
    letter = r"\d*[RkKpnuµm]\d+" if set(units) & {"ohm", "F"} else None
    return f"^({decimal}|{letter})$" if letter else f"^({decimal})$"


class Quantity(ma.fields.Float):
    """A JSON number, or a string with an SI prefix and optional unit (``"4.7k"``, ``"10kHz"``).

    Deserializes to a finite float in the SI base unit. NaN, Infinity and
    booleans are rejected with a message saying what was expected.

    Parameters
    ----------
    unit : str or tuple of str, optional
        Canonical unit(s) a string may carry: ``"Hz"``, ``"ohm"``, ``"F"``,
        ``"H"``, ``"s"``, ``"V"``; None for a dimensionless quantity.
    """

    default_error_messages = {
        "invalid": "Not a valid number.",
        "special": "Special numeric values (NaN, Infinity) are not permitted.",
    }

    def __init__(self, unit: str | tuple[str, ...] | None = None, **kwargs: Any):
        self.units: tuple[str, ...] = (unit,) if isinstance(unit, str) else tuple(unit or ())
        kwargs.setdefault("allow_nan", False)
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, bool):
            raise self.make_error("invalid")
        if isinstance(value, str):
            errors = []
            for unit in self.units or (None,):
                try:
                    return parse_quantity(value, unit)
                except QuantityError as exc:
                    errors.append(exc.message)
            raise ma.ValidationError(errors[0])
        if isinstance(value, (int, float)):
            result = float(value) if abs(value) < 1e309 else math.inf
            if not math.isfinite(result):
                raise self.make_error("special")
            return result
        raise self.make_error("invalid")

    def openapi_properties(self) -> dict[str, Any]:
        """OpenAPI 3.1 description of the accepted JSON forms."""
        symbols = ", ".join(_UNIT_SYMBOL[u] for u in self.units)
        forms = [
            {"type": "number"},
            {"type": "string", "pattern": _string_pattern(self.units), "maxLength": 64,
             "description": "SI-prefixed quantity" + (f" with optional unit {symbols}" if symbols else "")},
        ]
        if self.allow_none:
            forms.append({"type": "null"})
        return {"oneOf": forms}


class StrictInteger(ma.fields.Integer):
    """An integer that rejects 1.5 (instead of truncating it) and booleans."""

    def __init__(self, **kwargs: Any):
        kwargs.setdefault("strict", True)
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, bool):
            raise self.make_error("invalid")
        if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
            value = int(value)
        return super()._deserialize(value, attr, data, **kwargs)


class StrictFloat(Quantity):
    """A plain dimensionless number (JSON number or numeric string), finite."""


def _quantity2properties(self, field, ret=None, **kwargs):
    if hasattr(field, "openapi_properties"):
        props = field.openapi_properties()
        ret = ret or {}
        ret.pop("type", None)
        return props
    return {}


def register_openapi_fields(plugin) -> None:
    """Teach apispec how to describe :class:`Quantity` (call after the plugin is initialized)."""
    plugin.converter.add_attribute_function(_quantity2properties)
