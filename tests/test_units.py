"""Quantity parsing and formatting (service/units.py)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, strategies as st

from service.units import QuantityError, format_quantity, parse_quantity


@pytest.mark.parametrize("text, unit, expected", [
    # source: BIPM, The International System of Units (SI), 9th ed., table 7 (prefixes)
    ("4.7k", "ohm", 4.7e3), ("10n", "F", 10e-9), ("2.2u", "F", 2.2e-6), ("2.2µ", "F", 2.2e-6),
    ("2.2μ", "F", 2.2e-6), ("1.5M", "ohm", 1.5e6), ("10kHz", "Hz", 1e4), ("4.7nF", "F", 4.7e-9),
    ("4.7 nF", "F", 4.7e-9), ("100 ohm", "ohm", 100.0), ("1kΩ", "ohm", 1e3), ("1m", "s", 1e-3),
    ("1M", "Hz", 1e6), ("3p3", "F", 3.3e-12), ("1e3", "Hz", 1e3), ("-2.5", None, -2.5), (".5k", None, 500.0),
    ("1y", None, 1e-24), ("1z", None, 1e-21), ("1a", None, 1e-18), ("1f", None, 1e-15), ("1T", None, 1e12),
    ("1G", None, 1e9), ("10ms", "s", 0.01), ("5V", "V", 5.0), ("10mH", "H", 0.01),
    # source: IEC 60062:2016, "Marking codes for resistors and capacitors", sec. 4 (letter codes)
    ("4k7", "ohm", 4.7e3), ("4K7", "ohm", 4.7e3), ("2R2", "ohm", 2.2), ("R47", "ohm", 0.47),
    ("1M5", "ohm", 1.5e6), ("4n7", "F", 4.7e-9), ("6µ8", "F", 6.8e-6), ("0R5", "ohm", 0.5),
])
def test_parse_accepts(text, unit, expected):
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize("text, unit, hint", [
    ("10K", "ohm", "K is not an SI prefix"),     # kilo is lower-case k
    ("1meg", "ohm", "M for mega"),
    ("4.7nF", "Hz", "unit 'F'"),                 # unit must match the field
    ("10kHz", None, "unit 'Hz'"),
    ("2R2", "F", "resistance only"),
    ("nan", None, "cannot read"), ("NaN", "Hz", "cannot read"), ("inf", "Hz", "cannot read"),
    ("Infinity", None, "cannot read"), ("1e999", None, "at most two digits"), ("", "Hz", "cannot read"),
    ("k", None, "cannot read"), ("1.5k7", "ohm", "cannot read"), ("4k7k", "ohm", "cannot read"),
    ("1kk", None, "cannot read"), ("1 k Hz", "Hz", "cannot read"), ("0x10", None, "cannot read"),
    ("1,5k", None, "cannot read"), ("4.7e3k", None, "not both"), ("1e3k", "Hz", "not both"),
    ("４.７k", "ohm", "ASCII 0-9"), ("٤k7", "ohm", "ASCII 0-9"), (" 4.7k", None, "no spaces"),
    ("4.7k ", None, "no spaces"), ("4.7\tk", None, "cannot read"), ("1" * 65, None, "at most 64 characters"),
])
def test_parse_rejects_with_a_message_saying_what_was_expected(text, unit, hint):
    with pytest.raises(QuantityError) as info:
        parse_quantity(text, unit)
    assert hint in str(info.value)
    assert "expected" in str(info.value)


def test_parse_rejects_non_strings():
    with pytest.raises(QuantityError):
        parse_quantity(4.7, None)  # type: ignore[arg-type]


@pytest.mark.parametrize("value, text", [
    (4700.0, "4.7k"), (1e-8, "10n"), (2.2e-6, "2.2u"), (1.5e6, "1.5M"), (0.001, "1m"),
    (999.99, "1k"), (123456789.0, "123.5M"), (0.0, "0"), (-4.7e-9, "-4.7n"), (1e-30, "1e-30"),
])
def test_format_engineering_notation(value, text):
    assert format_quantity(value) == text


finite = st.floats(allow_nan=False, allow_infinity=False, min_value=-1e30, max_value=1e30)


@given(finite, st.sampled_from(["", "Hz", "F", "Ω", "H", "s", "V"]))
def test_round_trip_exact_with_full_precision(value, unit):
    canonical = {"": None, "Hz": "Hz", "F": "F", "Ω": "ohm", "H": "H", "s": "s", "V": "V"}[unit]
    assert parse_quantity(format_quantity(value, unit, significant=17), canonical) == value


@given(st.floats(min_value=1e-24, max_value=1e15), st.integers(min_value=1, max_value=16))
def test_round_trip_within_the_digits_kept(value, digits):
    back = parse_quantity(format_quantity(value, significant=digits))
    assert math.isclose(back, value, rel_tol=0.5 * 10 ** (1 - digits) * 1.0000001)


@given(st.integers(min_value=1, max_value=999), st.integers(min_value=0, max_value=9),
       st.sampled_from(["p", "n", "u", "k", "M"]))
def test_letter_code_equals_decimal_form(whole, tenth, prefix):
    assert parse_quantity(f"{whole}{prefix}{tenth}") == parse_quantity(f"{whole}.{tenth}{prefix}")
