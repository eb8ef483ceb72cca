"""The documented pattern of quantity strings and the parser agree: same language, both ways.

The OpenAPI document publishes one ``pattern`` (and ``maxLength``) per quantity
field; a generated client or a fuzzer trusts it. Every string it matches must
parse to a finite number (bounds apart, which JSON Schema applies to numbers
only), and every string the parser takes must match it.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service import create_app
from service.api.fields import Quantity
from service.units import MAX_QUANTITY_LENGTH, UNITS, QuantityError, parse_quantity, quantity_language, quantity_pattern

UNIT_CHOICES = [None, *UNITS]
# Characters that make up quantities, their near misses (K, meg, tab, other scripts' digits) and noise.
ALPHABET = "0123456789" * 3 + ".eE+-  kKMGTmunpfazyµμR" + "ΩohmsHzFV" + "\t４٤۵٫," + "gx_"


def _accepts(text: str, unit) -> bool:
    try:
        value = parse_quantity(text, unit)
    except QuantityError:
        return False
    assert math.isfinite(value)
    return True


@pytest.mark.parametrize("unit", UNIT_CHOICES)
@settings(max_examples=300, deadline=None)
@given(data=st.data())
def test_every_string_the_pattern_matches_parses(unit, data):
    text = data.draw(st.from_regex(re.compile(f"^{quantity_language(unit)}$"), fullmatch=True))
    if len(text) <= MAX_QUANTITY_LENGTH:
        assert _accepts(text, unit), text
    else:  # the document's maxLength refuses it too
        assert not _accepts(text, unit), text


@pytest.mark.parametrize("unit", UNIT_CHOICES)
@settings(max_examples=400, deadline=None)
@given(text=st.text(alphabet=ALPHABET, min_size=0, max_size=12))
def test_the_parser_accepts_exactly_what_the_pattern_matches(unit, text):
    documented = re.fullmatch(quantity_pattern((unit,)), text) is not None and len(text) <= MAX_QUANTITY_LENGTH
    assert _accepts(text, unit) == documented, text


@pytest.mark.parametrize("text, unit", [
    ("４.７k", "ohm"), ("٤k7", "ohm"), ("1e3k", "Hz"), ("4.7e3k", None), (" 4.7k", None), ("4.7k ", None),
    ("4.7\tk", None), ("1e999", None), ("1" * 65, None), ("4.7kHz", "F"), ("2R2", "F"),
])
def test_near_misses_are_refused_by_both(text, unit):
    assert re.fullmatch(quantity_pattern((unit,)), text) is None or len(text) > MAX_QUANTITY_LENGTH
    assert not _accepts(text, unit)


def _quantity_fields(schema, seen=None):
    """Every Quantity field reachable from a marshmallow schema (nested schemas and lists included)."""
    import marshmallow as ma

    seen = set() if seen is None else seen
    if id(schema) in seen:
        return
    seen.add(id(schema))
    for field in schema.fields.values():
        inner = field
        while isinstance(inner, ma.fields.List):
            inner = inner.inner
        if isinstance(inner, Quantity):
            yield inner
        elif isinstance(inner, ma.fields.Nested) and isinstance(inner.schema, ma.Schema):
            yield from _quantity_fields(inner.schema, seen)


def test_every_documented_quantity_pattern_is_the_parsers_grammar():
    spec = json.loads((Path(__file__).resolve().parents[2] / "openapi" / "openapi.json").read_text())
    patterns = set()

    def walk(node):
        if isinstance(node, dict):
            for form in node.get("oneOf", []):
                if isinstance(form, dict) and form.get("type") == "string" and "pattern" in form \
                        and "SI-prefixed" in form.get("description", ""):
                    patterns.add(form["pattern"])
                    assert form["maxLength"] == MAX_QUANTITY_LENGTH
            for v in node.values():
                walk(v)
        elif isinstance(node, list):
            for v in node:
                walk(v)

    walk(spec)
    app = create_app({"TESTING": True})
    schemas = app.extensions["rolloff_api"].spec.components.schemas
    assert patterns
    from marshmallow import class_registry

    grammars = set()
    for classes in list(class_registry._registry.values()):
        for cls in classes:
            try:
                schema = cls()
            except TypeError:
                continue
            grammars |= {quantity_pattern(f.units or (None,)) for f in _quantity_fields(schema)}
    assert schemas  # the document was built
    assert patterns <= grammars, patterns - grammars
