"""What the caller can buy: preferred-value series or an explicit stock list.

A :class:`PartsPolicy` holds one :class:`KindPolicy` per part kind
(``resistors``, ``capacitors``).  A kind is described either by an IEC 60063
series with a value range, a tolerance and (capacitors) a dielectric, or by an
explicit stock list of :class:`StockPart` entries from a component database,
which then replaces the series for that kind.  :func:`resolve_kind` turns a
policy into the sorted array of values the value search may use
(:class:`Allowed`), with the stock entry behind each value so a BOM line can
carry its ``part_id`` back.

References
----------
.. [1] IEC 60063:2015, "Preferred number series for resistors and capacitors".
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from service.components import SERIES, UnknownSeries, normalize_series, series_values_in_range
from service.realization.errors import NoUsableParts, RealizationError, UnknownPartKind

#: Part kinds a policy may describe, with the public key of each in ``parts``.
KIND_KEYS: dict[str, str] = {"resistor": "resistors", "capacitor": "capacitors"}

#: Dielectrics whose capacitance moves with voltage and temperature (class 2/3 ceramics).
HIGH_K_DIELECTRICS: frozenset[str] = frozenset({"X7R", "X5R", "Y5V", "Z5U"})


@dataclass(frozen=True)
class StockPart:
    """One part in a caller's stock list.

    Attributes
    ----------
    value : float
        Nominal value in SI base units (ohm or F), > 0.
    tolerance : float
        Relative tolerance (0.01 = 1 %).
    dielectric : str or None
        Capacitor dielectric (``"C0G"``, ``"X7R"``, ``"film"`` ...).
    part_id : str or None
        The caller's identifier, returned on the BOM line.
    """

    value: float
    tolerance: float
    dielectric: str | None = None
    part_id: str | None = None


@dataclass(frozen=True)
class KindPolicy:
    """How parts of one kind may be chosen.

    Attributes
    ----------
    series : str or None
        IEC 60063 series name ``"E3"`` ... ``"E192"`` [1]_; None takes the
        kind's default (resistors E96, capacitors E12); ignored when ``stock`` is given.
    min_value, max_value : float or None
        Allowed value range in ohm or F; None takes the kind's default
        (resistors 1 kohm - 1 Mohm, capacitors 100 pF - 10 uF).
    tolerance : float or None
        Relative tolerance of series parts; None takes the kind's default (R 1 %, C 5 %).
    dielectric : str or None
        Dielectric of series capacitors (None: ``"C0G"``).
    stock : tuple of StockPart or None
        Explicit stock list; when given it replaces the series for this kind.
    """

    series: str | None = None
    min_value: float | None = None
    max_value: float | None = None
    tolerance: float | None = None
    dielectric: str | None = None
    stock: tuple[StockPart, ...] | None = None


_DEFAULTS = {
    "resistor": dict(series="E96", min_value=1e3, max_value=1e6, tolerance=0.01, dielectric=None),
    "capacitor": dict(series="E12", min_value=100e-12, max_value=10e-6, tolerance=0.05, dielectric="C0G"),
}


@dataclass(frozen=True)
class PartsPolicy:
    """Parts the design may use, one :class:`KindPolicy` per kind.

    The defaults are E96 1 % resistors from 1 kohm to 1 Mohm and E12 5 % C0G
    capacitors from 100 pF to 10 uF.
    """

    resistors: KindPolicy = field(default_factory=KindPolicy)
    capacitors: KindPolicy = field(default_factory=KindPolicy)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any] | None) -> "PartsPolicy":
        """Build a policy from plain values (the ``parts`` field of a request).

        ``data`` maps ``"resistors"`` / ``"capacitors"`` to dicts with the
        :class:`KindPolicy` fields (``stock`` a list of dicts with the
        :class:`StockPart` fields).  An unknown kind raises
        :class:`RealizationError` with ``field="parts.<key>"``.
        """
        if data is None:
            return cls()
        if isinstance(data, PartsPolicy):
            return data
        kinds = {}
        for key, value in dict(data).items():
            if key not in KIND_KEYS.values():
                raise UnknownPartKind(
                    f"unknown part kind {key!r}: expected one of {', '.join(KIND_KEYS.values())}",
                    field=f"parts.{key}",
                )
            kinds[key] = _kind_from_dict(value, key)
        return cls(**kinds)

    def kind(self, kind: str) -> KindPolicy:
        """The policy of ``kind`` (``"resistor"`` or ``"capacitor"``)."""
        if kind not in KIND_KEYS:
            raise UnknownPartKind(f"unknown part kind {kind!r}: expected resistor or capacitor", field="parts")
        return getattr(self, KIND_KEYS[kind])


def _kind_from_dict(value: Any, key: str) -> KindPolicy:
    if isinstance(value, KindPolicy):
        return value
    if value is None:
        return KindPolicy()
    value = dict(value)
    stock = value.pop("stock", None)
    allowed = {"series", "min_value", "max_value", "tolerance", "dielectric"}
    unknown = set(value) - allowed
    if unknown:
        name = sorted(unknown)[0]
        raise RealizationError(f"unknown field {name!r} in parts.{key}", field=f"parts.{key}.{name}")
    if stock is not None:
        entries = []
        for i, entry in enumerate(stock):
            if isinstance(entry, StockPart):
                entries.append(entry)
                continue
            entry = dict(entry)
            if "kind" in entry:
                entry_kind = entry.pop("kind")
                if entry_kind != key[:-1]:
                    raise UnknownPartKind(
                        f"stock entry of kind {entry_kind!r} in the {key} list",
                        field=f"parts.{key}.stock[{i}].kind",
                    )
            try:
                entries.append(StockPart(**entry))
            except TypeError as exc:
                raise RealizationError(f"bad stock entry: {exc}", field=f"parts.{key}.stock[{i}]") from None
        stock = tuple(entries)
    return KindPolicy(stock=stock, **value)


@dataclass(frozen=True)
class Allowed:
    """The values one part kind may take, ascending, with what stands behind each.

    Attributes
    ----------
    kind : str
        ``"resistor"`` or ``"capacitor"``.
    values : ndarray, shape (M,), float64
        Allowed values (ohm or F), strictly ascending.
    tolerance : ndarray, shape (M,)
        Relative tolerance of each value.
    dielectric : tuple of (str or None), length M
    part_id : tuple of (str or None), length M
        Stock identifier of each value (None for series values).
    series : str or None
        The series name when the values come from a series, None for stock.
    low, high : float
        The value range (ohm or F) the caller allows.
    """

    kind: str
    values: np.ndarray
    tolerance: np.ndarray
    dielectric: tuple
    part_id: tuple
    series: str | None
    low: float
    high: float

    @property
    def log_values(self) -> np.ndarray:
        """``log(values)``, shape (M,) (natural log, for snapping by ratio)."""
        cached = self.__dict__.get("_log_values")
        if cached is None:
            cached = np.log(self.values)
            object.__setattr__(self, "_log_values", cached)
        return cached

    def index_of(self, values: np.ndarray) -> np.ndarray:
        """Index of each of ``values`` (already snapped) in :attr:`values`, shape like ``values``."""
        idx = np.searchsorted(self.values, values)
        idx = np.clip(idx, 0, self.values.size - 1)
        lower = np.clip(idx - 1, 0, self.values.size - 1)
        pick_lower = np.abs(np.log(self.values[lower] / values)) < np.abs(np.log(self.values[idx] / values))
        return np.where(pick_lower, lower, idx)


def resolve_kind(policy: PartsPolicy, kind: str) -> Allowed:
    """The allowed values of ``kind`` under ``policy``.

    Raises
    ------
    RealizationError
        Unknown series (``field="parts.<kind>s.series"``), a range no series
        value falls in, an inverted range, or a stock list with no usable
        entry (positive finite value, dielectric given for capacitors is not
        required).
    """
    key = KIND_KEYS[kind]
    kp = policy.kind(kind)
    defaults = _DEFAULTS[kind]
    low = defaults["min_value"] if kp.min_value is None else float(kp.min_value)
    high = defaults["max_value"] if kp.max_value is None else float(kp.max_value)
    tol = defaults["tolerance"] if kp.tolerance is None else float(kp.tolerance)
    diel = (kp.dielectric or defaults["dielectric"]) if kind == "capacitor" else None
    if kp.stock is not None:
        usable = [p for p in kp.stock if np.isfinite(p.value) and p.value > 0 and low <= p.value <= high]
        if kp.min_value is None and kp.max_value is None:
            usable = [p for p in kp.stock if np.isfinite(p.value) and p.value > 0]
        if not usable:
            raise NoUsableParts(
                f"the {kind} stock list has no usable entry (a positive value"
                + ("" if kp.min_value is None and kp.max_value is None else f" within {low:g} to {high:g}")
                + f"); the design needs {kind}s",
                field=f"parts.{key}.stock",
            )
        # One entry per value: the tightest tolerance wins a tie.
        usable.sort(key=lambda p: (p.value, p.tolerance))
        chosen: list[StockPart] = []
        for p in usable:
            if chosen and np.isclose(chosen[-1].value, p.value, rtol=1e-9, atol=0.0):
                continue
            chosen.append(p)
        values = np.array([p.value for p in chosen], dtype=float)
        return Allowed(
            kind=kind,
            values=values,
            tolerance=np.array([p.tolerance for p in chosen], dtype=float),
            dielectric=tuple((p.dielectric if kind == "capacitor" else None) for p in chosen),
            part_id=tuple(p.part_id for p in chosen),
            series=None,
            low=float(values[0]) if kp.min_value is None else low,
            high=float(values[-1]) if kp.max_value is None else high,
        )
    try:
        series = normalize_series(defaults["series"] if kp.series is None else kp.series)
    except UnknownSeries:
        raise RealizationError(
            f"unknown series {kp.series!r} for {key}: expected one of {', '.join(SERIES)} (IEC 60063)",
            field=f"parts.{key}.series",
        ) from None
    if not (np.isfinite(low) and np.isfinite(high) and 0 < low <= high):
        raise NoUsableParts(
            f"the {kind} range {low:g} to {high:g} is empty or not positive",
            field=f"parts.{key}.min_value",
        )
    values = np.asarray(series_values_in_range(series, low, high), dtype=float)
    if values.size == 0:
        raise NoUsableParts(
            f"no {series} value falls in the {kind} range {low:g} to {high:g}",
            field=f"parts.{key}",
        )
    m = values.size
    return Allowed(
        kind=kind,
        values=values,
        tolerance=np.full(m, tol),
        dielectric=(diel,) * m,
        part_id=(None,) * m,
        series=series,
        low=low,
        high=high,
    )
