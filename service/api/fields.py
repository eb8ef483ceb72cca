"""marshmallow fields of the service: quantities with SI prefixes, and strict numbers."""

from __future__ import annotations

import math
from typing import Any

import marshmallow as ma

from service.units import MAX_QUANTITY_LENGTH, QuantityError, parse_quantity, quantity_pattern

_UNIT_SYMBOL = {"Hz": "Hz", "ohm": "Ω", "F": "F", "H": "H", "s": "s", "V": "V"}


def _string_pattern(units: tuple[str, ...]) -> str:
    """The documented pattern of a quantity string: exactly what :func:`service.units.parse_quantity` accepts."""
    return quantity_pattern(tuple(units) or (None,))


def finite_float(value: int | float) -> float:
    """A JSON number as a float; +-inf for an integer beyond the range of a double (no OverflowError)."""
    try:
        return float(value)
    except OverflowError:
        return math.inf if value > 0 else -math.inf


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
        "special": "Not a finite number: NaN, Infinity and numbers beyond the range of a double (about 1.8e308) "
                   "are not permitted.",
    }

    def __init__(self, unit: str | tuple[str, ...] | None = None, **kwargs: Any):
        self.units: tuple[str, ...] = (unit,) if isinstance(unit, str) else tuple(unit or ())
        kwargs.setdefault("allow_nan", False)
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, bool):
            raise self.make_error("invalid")
        if isinstance(value, str):
            if len(value) > MAX_QUANTITY_LENGTH:
                raise ma.ValidationError(f"A quantity string has at most {MAX_QUANTITY_LENGTH} characters.")
            errors = []
            for unit in self.units or (None,):
                try:
                    return parse_quantity(value, unit)
                except QuantityError as exc:
                    errors.append(exc.message)
            raise ma.ValidationError(errors[0])
        if isinstance(value, (int, float)):
            result = finite_float(value)
            if not math.isfinite(result):
                raise self.make_error("special")
            return result
        raise self.make_error("invalid")

    def openapi_properties(self) -> dict[str, Any]:
        """OpenAPI 3.1 description of the accepted JSON forms."""
        symbols = ", ".join(_UNIT_SYMBOL[u] for u in self.units)
        forms = [
            {"type": "number"},
            {"type": "string", "pattern": _string_pattern(self.units), "maxLength": MAX_QUANTITY_LENGTH,
             "description": "SI-prefixed quantity" + (f" with optional unit {symbols}" if symbols else "")},
        ]
        if self.allow_none:
            forms.append({"type": "null"})
        return {"oneOf": forms}


class FullMatch(ma.validate.Regexp):
    """``Regexp`` that must match the whole string (``$`` alone lets a trailing newline through)."""

    def __call__(self, value):
        if not isinstance(value, str) or self.regex.fullmatch(value) is None:
            raise ma.ValidationError(self._format_error(value))
        return value


#: A part reference: a SPICE element name (a letter, then letters, digits and _ . : # + - [ ]), e.g. R7, C3, U1.
PART_REF = FullMatch(r"^[A-Za-z][A-Za-z0-9_.:#+\-\[\]]*$",
                     error="A part reference starts with a letter and holds only letters, digits and _ . : # + - [ ] "
                           "(a SPICE element name, e.g. R7); got {input!r}.")


class StrictInteger(ma.fields.Integer):
    """An integer that rejects 1.5 (instead of truncating it) and booleans."""

    def __init__(self, **kwargs: Any):
        kwargs.setdefault("strict", True)
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, bool):
            raise self.make_error("invalid")
        if isinstance(value, str) and not (value.isascii() and value.strip() == value):
            raise ma.ValidationError("Not a valid integer: write ASCII digits 0-9, without spaces.")
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


def _exclusive_bounds(self, field, ret=None, **kwargs):
    """``Range(min_inclusive=False)`` as ``exclusiveMinimum`` (OpenAPI 3.1), not apispec's inclusive ``minimum``."""
    out: dict[str, Any] = {}
    for v in field.validators:
        if not isinstance(v, ma.validate.Range):
            continue
        if v.min is not None and not v.min_inclusive and ret is not None and "minimum" in ret:
            ret.pop("minimum")
            out["exclusiveMinimum"] = v.min
        if v.max is not None and not v.max_inclusive and ret is not None and "maximum" in ret:
            ret.pop("maximum")
            out["exclusiveMaximum"] = v.max
    return out


def register_openapi_fields(plugin) -> None:
    """Teach apispec how to describe :class:`Quantity` and exclusive bounds (call after the plugin is initialized)."""
    plugin.converter.add_attribute_function(_quantity2properties)
    plugin.converter.add_attribute_function(_exclusive_bounds)
