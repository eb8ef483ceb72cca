"""Checks at the public entry: types, ranges, and the sense of a requirement.

Every failure raises with ``field=`` the public field name.
"""

from __future__ import annotations

import numbers
from enum import Enum

import numpy as np

from .enums import CutoffAt, Excess, SectionOrder
from .errors import ApproximationError, InfeasibleRequirement
from .types import Family, ResponseType

MIN_FREQUENCY_HZ = 1e-3
MAX_FREQUENCY_HZ = 1e10
MIN_RIPPLE_DB = 0.001
MAX_RIPPLE_DB = 3.0
MAX_ATTENUATION_DB = 150.0
BAND_RESPONSES = (ResponseType.BANDPASS, ResponseType.BANDSTOP)


def _as_enum(value, enum: type[Enum], field: str):
    if isinstance(value, enum):
        return value
    try:
        return enum(value)
    except (ValueError, TypeError):
        allowed = ", ".join(repr(e.value) for e in enum)
        raise ApproximationError(f"{field} must be one of {allowed}, got {value!r}",
                                 field=field) from None


def as_family(value) -> Family:
    return _as_enum(value, Family, "family")


def as_response(value) -> ResponseType:
    return _as_enum(value, ResponseType, "response")


def as_cutoff_at(value) -> CutoffAt:
    return _as_enum(value, CutoffAt, "cutoff_at")


def as_excess(value) -> Excess:
    return _as_enum(value, Excess, "excess")


def as_section_order(value) -> SectionOrder:
    return _as_enum(value, SectionOrder, "section_order")


def real_number(value, field: str) -> float:
    """A finite real number (not a bool, not a string)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ApproximationError(f"{field} must be a number, got {value!r}", field=field)
    x = float(value)
    if not np.isfinite(x):
        raise ApproximationError(f"{field} must be finite, got {value!r}", field=field)
    return x


def integer(value, field: str) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise ApproximationError(f"{field} must be an integer, got {value!r}", field=field)
    return int(value)


def frequency(value, field: str) -> float:
    f = real_number(value, field)
    if not (MIN_FREQUENCY_HZ <= f <= MAX_FREQUENCY_HZ):
        raise ApproximationError(
            f"{field} must lie between {MIN_FREQUENCY_HZ:g} Hz and {MAX_FREQUENCY_HZ:g} Hz, got {f:g}",
            field=field)
    return f


def band_edges(value, response: ResponseType, field: str) -> float | tuple[float, float]:
    """A single frequency (lowpass, highpass) or an ascending pair (band responses), Hz."""
    if response in BAND_RESPONSES:
        if isinstance(value, (str, bytes)) or not hasattr(value, "__len__") or len(value) != 2:
            raise ApproximationError(
                f"{field} must be a pair [low, high] in Hz for a {response.value} response",
                field=field)
        lo = frequency(value[0], field)
        hi = frequency(value[1], field)
        if not lo < hi:
            raise ApproximationError(f"{field} must be ascending: low < high, got [{lo:g}, {hi:g}]",
                                     field=field)
        return lo, hi
    if hasattr(value, "__len__") and not isinstance(value, (str, bytes)):
        raise ApproximationError(
            f"{field} must be a single frequency in Hz for a {response.value} response", field=field)
    return frequency(value, field)


def ripple(value, field: str = "passband_ripple_db") -> float:
    r = real_number(value, field)
    if not (MIN_RIPPLE_DB <= r <= MAX_RIPPLE_DB):
        raise ApproximationError(
            f"{field} must lie between {MIN_RIPPLE_DB:g} dB and {MAX_RIPPLE_DB:g} dB, got {r:g}",
            field=field)
    return r


def attenuation(value, field: str = "stopband_attenuation_db") -> float:
    a = real_number(value, field)
    if not (0.0 < a <= MAX_ATTENUATION_DB):
        raise ApproximationError(
            f"{field} must be above 0 dB and at most {MAX_ATTENUATION_DB:g} dB, got {a:g}",
            field=field)
    return a


def check_nesting(response: ResponseType, passband, stopband) -> None:
    """The stopband must lie outside the passband (lowpass/highpass/bandpass) or inside it (bandstop)."""
    if response is ResponseType.LOWPASS and not stopband > passband:
        raise InfeasibleRequirement(
            f"lowpass: stopband_hz ({stopband:g}) must lie above passband_hz ({passband:g})",
            field="stopband_hz")
    if response is ResponseType.HIGHPASS and not stopband < passband:
        raise InfeasibleRequirement(
            f"highpass: stopband_hz ({stopband:g}) must lie below passband_hz ({passband:g})",
            field="stopband_hz")
    if response is ResponseType.BANDPASS:
        (p1, p2), (s1, s2) = passband, stopband
        if not (s1 < p1 and p2 < s2):
            raise InfeasibleRequirement(
                f"bandpass: the stopband edges [{s1:g}, {s2:g}] must lie outside the passband "
                f"[{p1:g}, {p2:g}] (stopband low < passband low and passband high < stopband high)",
                field="stopband_hz")
    if response is ResponseType.BANDSTOP:
        (p1, p2), (s1, s2) = passband, stopband
        if not (p1 < s1 and s2 < p2):
            raise InfeasibleRequirement(
                f"bandstop: the stopband [{s1:g}, {s2:g}] must lie inside the passband edges "
                f"[{p1:g}, {p2:g}] (passband low < stopband low and stopband high < passband high)",
                field="stopband_hz")
