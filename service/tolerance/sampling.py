"""Part values of every Monte Carlo trial: distributions, temperature, op-amp GBW.

Every random number of a request is drawn up front from one
``numpy.random.Generator(PCG64(seed))`` in a fixed order, so the values of
trial ``i`` do not depend on how the trials are later split into chunks or
spread over processes:

1. one deviate per varied passive part, ``trials`` at a time, parts in the
   order of the design document (stage by stage, components as listed);
2. with a temperature range: one temperature-coefficient deviate per passive
   part (same order), then one board temperature per trial;
3. with a GBW spread: one deviate per op-amp that has a ``gbw_hz``
   (document order).

Models (stated, so a reader can check them)
-------------------------------------------
``uniform``
    ``x = x0 (1 + t u)``, ``u`` uniform on [-1, 1]: the value stays within
    the tolerance ``t``.
``gaussian``
    ``x = x0 (1 + t z / 3)``, ``z`` standard normal truncated at +-6 (a
    value never leaves +-2 t): the tolerance is read as the 3-sigma bound
    (common practice for manufacturers' tolerance bands; no source).
Temperature
    One temperature per board, uniform over ``[min_c, max_c]``; each part
    drifts by ``alpha (T - 25 C)`` with its coefficient ``alpha`` drawn
    uniformly within ``+-tempco`` (the data-sheet figure is a bound, the
    actual coefficient of a part is unknown within it).  Defaults, ppm/degC
    (common practice, from memory): thin-film resistor +-25; C0G/NP0 0 +-30;
    X7R, whose data-sheet figure is +-15 % over -55...125 C, as the linear
    bound 0.15/100 K = +-1500; X5R (+-15 % over -55...85 C) +-1875; film
    (polypropylene, polyester) +-200; a capacitor with no dielectric given
    as C0G.  X7R's real drift is curved and voltage dependent; the linear
    bound reaches its +-15 % only at the range ends.
Op-amp GBW
    ``gbw = gbw0 (1 + s v)`` with the distribution of kind ``opamp``
    (``v`` as ``u`` or ``z/3`` above), ``s`` the relative spread.  Op-amps
    without ``gbw_hz`` are ideal and stay so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from service.tolerance.errors import InvalidDistribution, InvalidTolerance

DISTRIBUTIONS = ("uniform", "gaussian")
KINDS = ("resistor", "capacitor", "opamp")
#: Gaussian tolerance is read as 3 sigma (common practice, no source).
GAUSSIAN_SIGMAS = 3.0
#: Standard normal deviates are truncated here, so no value can turn negative.
GAUSSIAN_TRUNCATION = 6.0
#: Reference temperature of part values and temperature coefficients, degC.
REFERENCE_TEMPERATURE_C = 25.0
#: Default tolerances of parts the document gives none for (relative).
DEFAULT_TOLERANCE = {"resistor": 0.01, "capacitor": 0.05}
#: Default temperature coefficient bounds, ppm/degC (common practice, from memory).
DEFAULT_TEMPCO_PPM_PER_C = {
    "resistor": 25.0,
    "C0G": 30.0, "NP0": 30.0,
    "X7R": 1500.0, "X5R": 1875.0,
    "FILM": 200.0, "PP": 200.0, "PET": 200.0,
    "capacitor": 30.0,
}
#: Largest accepted relative tolerance or GBW spread.
MAX_TOLERANCE = 0.5
#: Widest accepted temperature range ends, degC.
TEMPERATURE_LIMITS_C = (-273.15, 500.0)


@dataclass(frozen=True)
class VariedPart:
    """One value that varies from trial to trial.

    Attributes
    ----------
    ref : str
        Reference (``"R3"``, ``"U2"``).
    kind : str
        ``"resistor"``, ``"capacitor"`` or ``"opamp"``.
    key : str
        Circuit value key: the ref, or ``"U2.gbw_hz"`` for an op-amp.
    stage : int
        Stage index (0-based, cascade order).
    role : str
        Role in the stage's topology (``"R1"``, ``"C2"``, ``"U1"``).
    nominal : float
        Value at 25 degC (ohm, F, or Hz for GBW).
    tolerance : float
        Relative tolerance bound (or GBW spread).
    distribution : str
    dielectric : str or None
    tempco_ppm_per_c : float
        Temperature coefficient bound, ppm/degC (0 for op-amps).
    """

    ref: str
    kind: str
    key: str
    stage: int
    role: str
    nominal: float
    tolerance: float
    distribution: str
    dielectric: str | None = None
    tempco_ppm_per_c: float = 0.0


def resolve_distribution(distribution) -> dict[str, str]:
    """``"uniform"``, ``"gaussian"`` or ``{kind: name}`` -> a name for every kind.

    Kinds missing from a mapping are ``"gaussian"``.

    Raises
    ------
    InvalidDistribution
    """
    if isinstance(distribution, str):
        if distribution not in DISTRIBUTIONS:
            raise InvalidDistribution(
                f"distribution must be one of {', '.join(DISTRIBUTIONS)} or a mapping of part kind to one, "
                f"got {distribution!r}", field="distribution")
        return {k: distribution for k in KINDS}
    if not isinstance(distribution, Mapping):
        raise InvalidDistribution("distribution must be a name or a mapping of part kind to a name",
                                  field="distribution")
    out = {k: "gaussian" for k in KINDS}
    for kind, name in distribution.items():
        if kind not in KINDS:
            raise InvalidDistribution(f"distribution has an unknown part kind {kind!r}: expected "
                                      f"{', '.join(KINDS)}", field=f"distribution.{kind}")
        if name not in DISTRIBUTIONS:
            raise InvalidDistribution(f"distribution.{kind} must be one of {', '.join(DISTRIBUTIONS)}, got {name!r}",
                                      field=f"distribution.{kind}")
        out[kind] = name
    return out


def resolve_temperature(temperature) -> tuple[float, float] | None:
    """``{"min_c", "max_c"}`` -> ``(min_c, max_c)`` in degC, or None."""
    if temperature is None:
        return None
    if not isinstance(temperature, Mapping) or set(temperature) - {"min_c", "max_c"}:
        raise InvalidTolerance("temperature must be an object with min_c and max_c (degC)", field="temperature")
    try:
        lo, hi = float(temperature["min_c"]), float(temperature["max_c"])
    except (KeyError, TypeError, ValueError):
        raise InvalidTolerance("temperature needs numbers min_c and max_c (degC)", field="temperature") from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo > hi:
        raise InvalidTolerance("temperature.min_c must not exceed temperature.max_c", field="temperature.min_c")
    if lo < TEMPERATURE_LIMITS_C[0] or hi > TEMPERATURE_LIMITS_C[1]:
        raise InvalidTolerance(f"temperature must lie within {TEMPERATURE_LIMITS_C[0]} and "
                               f"{TEMPERATURE_LIMITS_C[1]} degC", field="temperature")
    return lo, hi


def _check_fraction(value, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InvalidTolerance(f"{field} must be a number", field=field)
    v = float(value)
    if not 0.0 <= v <= MAX_TOLERANCE:
        raise InvalidTolerance(f"{field} must be a relative tolerance between 0 and {MAX_TOLERANCE}, got {value!r}",
                               field=field)
    return v


def _tempco(comp, overrides: Mapping[str, float]) -> float:
    if comp.ref in overrides:
        return overrides[comp.ref]
    if comp.kind == "resistor":
        return overrides.get("resistor", DEFAULT_TEMPCO_PPM_PER_C["resistor"])
    d = (comp.dielectric or "").upper()
    for key in (d, "capacitor"):
        if key in overrides:
            return overrides[key]
    return DEFAULT_TEMPCO_PPM_PER_C.get(d, DEFAULT_TEMPCO_PPM_PER_C["capacitor"])


def varied_parts(plans, draw_order, distribution: dict[str, str], tempco_ppm_per_c=None,
                 gbw_spread: float | None = None) -> list[VariedPart]:
    """The parts that vary, in the fixed draw order (see the module notes).

    Parameters
    ----------
    plans : list of StagePlan
        The design's stages.
    draw_order : sequence of str
        Refs of the passive parts in document order (fixes the draw order); unlisted parts follow.
    distribution : dict of str to str
        From :func:`resolve_distribution`.
    tempco_ppm_per_c : mapping or None
        Overrides by ref (``"C3"``), dielectric (``"X7R"``) or kind
        (``"resistor"``, ``"capacitor"``), ppm/degC (>= 0).
    gbw_spread : float or None
        Relative op-amp GBW spread.
    """
    by_ref = {}
    for k, plan in enumerate(plans):
        for c in plan.components:
            by_ref[c.ref] = (k, c)
    order = [r for r in draw_order if r in by_ref]
    order += [r for r in by_ref if r not in order]
    known_dielectrics = {(c.dielectric or "").upper() for _, c in by_ref.values() if c.kind == "capacitor"}
    overrides: dict[str, float] = {}
    for key, val in dict(tempco_ppm_per_c or {}).items():
        field = f"tempco_ppm_per_c.{key}"
        if isinstance(val, bool) or not isinstance(val, (int, float)) or not math.isfinite(val) or val < 0:
            raise InvalidTolerance(f"{field} must be a non-negative number of ppm/degC", field=field)
        norm = key if key in by_ref or key in ("resistor", "capacitor") else str(key).upper()
        if not (norm in by_ref or norm in ("resistor", "capacitor") or norm in DEFAULT_TEMPCO_PPM_PER_C
                or norm in known_dielectrics):
            raise InvalidTolerance(f"{field}: {key!r} is neither a part ref of the design, a dielectric nor "
                                   "a part kind (resistor, capacitor)", field=field)
        overrides[norm] = float(val)
    parts = []
    for ref in order:
        k, c = by_ref[ref]
        tol = DEFAULT_TOLERANCE[c.kind] if c.tolerance is None else c.tolerance
        tol = _check_fraction(tol, f"design.stages[{k}].components.{ref}.tolerance")
        parts.append(VariedPart(ref=ref, kind=c.kind, key=ref, stage=k, role=c.role, nominal=float(c.value),
                                tolerance=tol, distribution=distribution[c.kind],
                                dielectric=c.dielectric if c.kind == "capacitor" else None,
                                tempco_ppm_per_c=_tempco(c, overrides)))
    if gbw_spread is not None:
        spread = _check_fraction(gbw_spread, "gbw_spread")
        ops = [(k, u) for k, plan in enumerate(plans) for u in plan.opamps if u.gbw_hz is not None]
        if not ops:
            raise InvalidTolerance("gbw_spread needs op-amps with gbw_hz; every op-amp of this design is ideal",
                                   field="gbw_spread")
        for k, u in ops:
            parts.append(VariedPart(ref=u.ref, kind="opamp", key=f"{u.ref}.gbw_hz", stage=k, role=u.role,
                                    nominal=float(u.gbw_hz), tolerance=spread, distribution=distribution["opamp"]))
    return parts


def _deviates(rng: np.random.Generator, name: str, n: int) -> np.ndarray:
    """Deviates in units of the tolerance: uniform on [-1, 1] or N(0, 1/3) truncated at +-2."""
    if name == "uniform":
        return rng.uniform(-1.0, 1.0, n)
    z = rng.standard_normal(n)
    np.clip(z, -GAUSSIAN_TRUNCATION, GAUSSIAN_TRUNCATION, out=z)
    return z / GAUSSIAN_SIGMAS


@dataclass
class Samples:
    """All sampled values of a request.

    Attributes
    ----------
    values : dict of str to ndarray, shape (T,), float64
        Circuit value key -> value per trial (ohm, F, Hz).
    temperature_c : ndarray, shape (T,) or None
        Board temperature per trial, degC.
    """

    values: dict[str, np.ndarray]
    temperature_c: np.ndarray | None

    def slice(self, sl: slice) -> dict[str, np.ndarray]:
        return {k: v[sl] for k, v in self.values.items()}


def draw(parts: list[VariedPart], trials: int, seed: int, temperature: tuple[float, float] | None) -> Samples:
    """Draw every trial's values up front (fixed order: see the module notes).

    Returns
    -------
    Samples
    """
    rng = np.random.Generator(np.random.PCG64(seed))
    passive = [p for p in parts if p.kind != "opamp"]
    opamps = [p for p in parts if p.kind == "opamp"]
    values: dict[str, np.ndarray] = {}
    for p in passive:
        values[p.key] = p.nominal * (1.0 + p.tolerance * _deviates(rng, p.distribution, trials))
    temp = None
    if temperature is not None:
        coef = [rng.uniform(-1.0, 1.0, trials) * (p.tempco_ppm_per_c * 1e-6) for p in passive]
        temp = rng.uniform(temperature[0], temperature[1], trials)
        dt = temp - REFERENCE_TEMPERATURE_C
        for p, a in zip(passive, coef):
            values[p.key] *= 1.0 + a * dt
    for p in opamps:
        values[p.key] = p.nominal * (1.0 + p.tolerance * _deviates(rng, p.distribution, trials))
    for p in parts:
        if not np.all(values[p.key] > 0):
            raise InvalidTolerance(f"{p.ref}: its temperature coefficient ({p.tempco_ppm_per_c:g} ppm/degC) over the "
                                   "temperature range drives the value to zero or below",
                                   field=f"tempco_ppm_per_c.{p.ref}")
    return Samples(values, temp)


__all__ = ["VariedPart", "Samples", "draw", "varied_parts", "resolve_distribution", "resolve_temperature",
           "DEFAULT_TOLERANCE", "DEFAULT_TEMPCO_PPM_PER_C", "GAUSSIAN_SIGMAS", "DISTRIBUTIONS"]
