"""SI-prefixed quantities: parsing from text and formatting to engineering notation.

Accepted spellings (all case-sensitive, since SI prefixes are: ``m`` is milli,
``M`` is mega):

- a plain number: ``"4700"``, ``"4.7e3"``, ``"-2.5"``;
- a number with an SI prefix and/or a unit: ``"4.7k"``, ``"10n"``, ``"2.2u"``,
  ``"2.2µ"``, ``"1.5M"``, ``"10kHz"``, ``"4.7 nF"``, ``"100 ohm"``, ``"1kΩ"``;
- a letter code of IEC 60062 (resistors and capacitors), where the prefix
  letter stands in place of the decimal point: ``"4k7"`` (4.7 k), ``"2R2"``
  (2.2, with ``R`` as the decimal marker of a resistance), ``"R47"``,
  ``"4n7"`` (4.7 n), ``"1M5"``. IEC 60062 writes kilo as ``K``; both ``k``
  and ``K`` are read as kilo in a letter code and nowhere else.

Prefixes: y z a f p n u µ m k M G T (10^-24 ... 10^12).
Units: Hz, Ω or ohm, F, H, s, V — a unit written in the text must be the unit
of the field being read.

Digits are ASCII 0-9 (other scripts' digits, such as full-width "４", are
refused); one ASCII space may separate the number from its prefix or unit,
and nothing surrounds the text; an exponent and a prefix are never combined
("1e3k" is refused); a positive exponent has at most two digits, a negative
one three; at most 64 characters. :func:`quantity_language` is this grammar as
a regular expression: the OpenAPI document publishes it as the ``pattern`` of
every quantity field, and :func:`parse_quantity` accepts exactly the strings
it matches.

References
----------
.. [1] BIPM, "The International System of Units (SI)", 9th ed., 2019, sec. 3 (prefixes).
.. [2] IEC 60062:2016, "Marking codes for resistors and capacitors", sec. 4.
"""

from __future__ import annotations

import math
import re

from service.errors import InvalidParameter

PREFIXES: dict[str, int] = {
    "y": -24, "z": -21, "a": -18, "f": -15, "p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6,
    "m": -3, "k": 3, "M": 6, "G": 9, "T": 12,
}

#: Canonical unit symbol -> accepted spellings.
UNITS: dict[str, tuple[str, ...]] = {
    "Hz": ("Hz",),
    "ohm": ("Ω", "ohm", "Ohm", "ohms", "Ohms"),
    "F": ("F",),
    "H": ("H",),
    "s": ("s",),
    "V": ("V",),
}
_UNIT_OF_SPELLING = {sp: unit for unit, spellings in UNITS.items() for sp in spellings}
_UNIT_NAMES = {"Hz": "frequency (Hz)", "ohm": "resistance (Ω)", "F": "capacitance (F)",
               "H": "inductance (H)", "s": "time (s)", "V": "voltage (V)"}

#: Longest quantity string accepted (characters); also the documented ``maxLength``.
MAX_QUANTITY_LENGTH = 64

_PREFIX_CHARS = "yzafpnuµμmkMGT"
# ASCII digits only: Python's \d also matches other scripts' digits ("４", "٤"), which are refused.
_MANTISSA = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)"
# A positive exponent has at most two digits, a negative one three: with MAX_QUANTITY_LENGTH characters
# every accepted string is a finite double (|x| < 1e163), so the documented pattern alone says what parses.
_EXPONENT = r"[eE](?:-[0-9]{1,3}|\+?[0-9]{1,2})"


def _alternation(words) -> str:
    return "|".join(re.escape(w) for w in sorted(words, key=len, reverse=True))


def quantity_language(unit: str | None) -> str:
    """The regular expression (unanchored, portable to ECMA-262) of what :func:`parse_quantity` accepts.

    Parameters
    ----------
    unit : str or None
        Canonical unit of the field; None: no unit may be written.

    Returns
    -------
    str
        Three forms: a number with an exponent and an optional unit (``"1e3"``,
        ``"1e3 Hz"``); a number with an optional SI prefix and/or unit
        (``"4.7k"``, ``"4.7 nF"``); an IEC 60062 letter code with an optional
        unit (``"4k7"``, ``"2R2"`` for resistances). One ASCII space may
        separate a number from its prefix or unit; nothing surrounds the text.
    """
    if unit is not None and unit not in UNITS:
        raise ValueError(f"unknown unit {unit!r}")
    prefix = f"[{_PREFIX_CHARS}]"
    codes = "RKk" + _PREFIX_CHARS if unit in (None, "ohm") else "Kk" + _PREFIX_CHARS
    if unit is None:
        exp_form = f"{_MANTISSA}{_EXPONENT}"
        dec_form = f"{_MANTISSA}(?: ?{prefix})?"
        letter = f"[0-9]*[{codes}][0-9]+"
    else:
        u = f"(?:{_alternation(UNITS[unit])})"
        exp_form = f"{_MANTISSA}{_EXPONENT}(?: ?{u})?"
        dec_form = f"{_MANTISSA}(?: ?(?:{prefix}{u}?|{u}))?"
        letter = f"[0-9]*[{codes}][0-9]+(?: ?{u})?"
    return f"(?:{exp_form}|{dec_form}|{letter})"


def quantity_pattern(units: tuple[str | None, ...]) -> str:
    """Anchored pattern of a field that accepts any of ``units`` (the union of their languages)."""
    forms = [quantity_language(u) for u in (units or (None,))]
    return "^(?:" + "|".join(forms) + ")$"


_ACCEPT = {u: re.compile(f"^{quantity_language(u)}$") for u in (None, *UNITS)}
# Reading an accepted string apart (acceptance is decided by _ACCEPT alone).
_UNIT_ALT = _alternation(_UNIT_OF_SPELLING)
_DECIMAL_RE = re.compile(
    rf"^(?P<num>{_MANTISSA}(?:{_EXPONENT})?) ?(?P<prefix>[{_PREFIX_CHARS}])?(?P<unit>{_UNIT_ALT})?$"
)
_LETTER_RE = re.compile(rf"^(?P<int>[0-9]*)(?P<code>[RKk{_PREFIX_CHARS}])(?P<frac>[0-9]+) ?(?P<unit>{_UNIT_ALT})?$")


class QuantityError(InvalidParameter):
    """A quantity string is malformed, ambiguous or of the wrong unit."""


def _expected(unit: str | None) -> str:
    what = f"a {_UNIT_NAMES[unit]}" if unit else "a quantity"
    sym = "Ω" if unit == "ohm" else (unit or "")
    return (f"expected {what}: a number, optionally with an SI prefix (y z a f p n u µ m k M G T, "
            f"case-sensitive) and the unit{(' ' + sym) if sym else ''}, e.g. \"4.7k\", \"10n\""
            + (", or an IEC 60062 code such as \"4k7\"" if unit in ("ohm", "F", None) else ""))


def _why_not(text: str, unit: str | None) -> str:
    """Why ``text`` is not in the language of ``unit``: the most specific reason found."""
    if len(text) > MAX_QUANTITY_LENGTH:
        return f"a quantity has at most {MAX_QUANTITY_LENGTH} characters, got {len(text)}; {_expected(unit)}"
    if any(ch.isdigit() and not ch.isascii() for ch in text):
        return f"cannot read {text!r}: write digits as ASCII 0-9; {_expected(unit)}"
    if text != text.strip():
        return f"cannot read {text!r}: no spaces before or after the quantity; {_expected(unit)}"
    if re.match(rf"^{_MANTISSA}{_EXPONENT} ?[{_PREFIX_CHARS}]", text):
        return f"cannot read {text!r}: use an exponent or an SI prefix, not both; {_expected(unit)}"
    if re.match(rf"^{_MANTISSA}[eE]\+?[0-9]{{3,}}", text):
        return f"cannot read {text!r}: a positive exponent has at most two digits; {_expected(unit)}"
    if unit not in (None, "ohm") and re.match(r"^[0-9]*R[0-9]+", text):
        return f"{text!r}: the letter R marks the decimal point of a resistance only; {_expected(unit)}"
    for other, rx in _ACCEPT.items():
        found = [sp for sp in UNITS.get(other, ()) if text.endswith(sp)]
        if other not in (None, unit) and found and rx.match(text):
            return f"{text!r} has unit {max(found, key=len)!r}, but {_expected(unit)}"
    hint = ""
    if re.match(rf"^{_MANTISSA} ?K", text):
        hint = " (K is not an SI prefix: write k for kilo)"
    elif re.match(rf"^{_MANTISSA} ?(meg|Meg|MEG)", text):
        hint = " (write M for mega)"
    return f"cannot read {text!r} as a quantity{hint}; {_expected(unit)}"


def parse_quantity(text: str, unit: str | None = None) -> float:
    """Parse one quantity string to a float in SI base units.

    Parameters
    ----------
    text : str
        See the module docstring for what is accepted; exactly the strings
        matched by :func:`quantity_language` (``unit``), which is also the
        pattern the OpenAPI document publishes.
    unit : str, optional
        Canonical unit of the field (``"Hz"``, ``"ohm"``, ``"F"``, ``"H"``,
        ``"s"``, ``"V"``); a unit in ``text`` must equal it. ``None`` accepts
        no unit in the text.

    Returns
    -------
    float
        Finite value in the base unit (``"4.7k"`` -> 4700.0).

    Raises
    ------
    QuantityError
        Malformed, ambiguous (``"10K"``: K is not an SI prefix; ``"1meg"``),
        wrong-unit, non-ASCII digits or over-long input, with a message saying
        what was expected.
    """
    if not isinstance(text, str):
        raise QuantityError(_expected(unit))
    if unit is not None and unit not in UNITS:
        raise ValueError(f"unknown unit {unit!r}")
    if len(text) > MAX_QUANTITY_LENGTH or not _ACCEPT[unit].match(text):
        raise QuantityError(_why_not(text, unit))
    m = _DECIMAL_RE.match(text)
    if m:
        prefix = m.group("prefix")
        value = _scale(m.group("num"), PREFIXES[prefix]) if prefix else float(m.group("num"))
        return _finite(value, text, unit)
    m = _LETTER_RE.match(text)
    code = m.group("code")
    exponent = 0 if code == "R" else 3 if code in ("k", "K") else PREFIXES[code]
    number = f"{m.group('int') or '0'}.{m.group('frac')}"
    return _finite(_scale(number, exponent), text, unit)


def _scale(number: str, exponent: int) -> float:
    """``float(number) * 10**exponent`` computed in decimal so "4.7k" is exactly 4700.0."""
    return float(f"{number}e{exponent}")


def _finite(value: float, text: str, unit: str | None) -> float:
    if not math.isfinite(value):
        raise QuantityError(f"{text!r} is not a finite number; {_expected(unit)}")
    return value


_ENGINEERING = [(12, "T"), (9, "G"), (6, "M"), (3, "k"), (0, ""), (-3, "m"), (-6, "u"),
                (-9, "n"), (-12, "p"), (-15, "f"), (-18, "a"), (-21, "z"), (-24, "y")]


def format_quantity(value: float, unit: str = "", *, significant: int = 4, micro: str = "u") -> str:
    """Engineering notation with an SI prefix: 4700 -> ``"4.7k"``, 1e-8 -> ``"10n"``.

    Parameters
    ----------
    value : float
        Finite value in the base unit.
    unit : str
        Appended after the prefix (``"Hz"``, ``"Ω"``, ``"F"``); empty for none.
    significant : int
        Significant digits kept (1-17); trailing zeros are dropped.
    micro : str
        Symbol used for 10^-6 (``"u"`` or ``"µ"``).

    Returns
    -------
    str
        ``parse_quantity(format_quantity(x, significant=17))`` returns ``x``.
    """
    if not math.isfinite(value):
        raise ValueError("cannot format a non-finite value")
    if value == 0:
        return f"0{unit}"
    digits = max(1, min(int(significant), 17))
    sci = f"{abs(value):.{digits - 1}e}"          # "d.ddde+XX": the rounded value, exactly as text
    mantissa_digits, exp_text = sci.split("e")
    exponent = int(exp_text)
    exponent3 = (exponent // 3) * 3
    sign = "-" if value < 0 else ""
    if not -24 <= exponent3 <= 12:  # beyond the prefixes: plain scientific notation
        return f"{sign}{float(sci):.{digits}g}{unit}"
    prefix = dict(_ENGINEERING)[exponent3]
    if prefix == "u":
        prefix = micro
    ds = mantissa_digits.replace(".", "")
    point = 1 + exponent - exponent3                # 1, 2 or 3 digits before the point
    ds = ds.ljust(point, "0")
    text = ds[:point] + ("." + ds[point:] if ds[point:] else "")
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return f"{sign}{text}{prefix}{unit}"
