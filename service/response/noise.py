"""Noise of a filter circuit: density, integrated noise, contributions, SNR and dynamic range.

Takes a :class:`service.circuit.Circuit` whose op-amps carry their noise
(:class:`service.circuit.OpAmpSources`) and reports, from the circuit
engine's per-source output densities (:func:`service.circuit.noise_spectra`):

- the output noise density (V/sqrt(Hz)) on the caller's grid, and the
  input-referred density (output density over ``|H(f)|``);
- the RMS noise integrated over a band, on its own logarithmic grid
  (:data:`INTEGRATION_POINTS_PER_DECADE`), each source integrated as a power
  law between grid points, exact where the density is a power of frequency
  (the rule SPICE's ``.noise`` uses for its totals; for the piecewise
  power-law integral see e.g. the ngspice manual, sec. 15.3.5 ``.noise``,
  and Rohrer et al. [1]_);
- every part's and every stage's share of the integrated output noise,
  largest first; the input-referred RMS (output RMS over the reference
  gain, the largest ``|H|`` on the analysis grids);
- given a full-scale output level, the signal-to-noise ratio of a
  full-scale sine; given the largest output before any op-amp clips
  (:mod:`service.response.headroom`), the dynamic range.

Uncorrelated sources add in power.  Levels are peak volts of a sine; its RMS
is ``peak / sqrt(2)``.

References
----------
.. [1] R. Rohrer, L. Nagel, R. Meyer, L. Weber, "Computationally efficient
   electronic-circuit noise calculations", IEEE J. Solid-State Circuits
   SC-6(4), 1971.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from service.circuit import DEFAULT_TEMPERATURE_K, Circuit, NoiseKind, noise_spectra
from service.response.errors import InvalidLevel

INTEGRATION_POINTS_PER_DECADE = 200
"""Points per decade of the integration grid (power-law rule between points)."""

MIN_INTEGRATION_POINTS = 33
"""Fewest points of the integration grid, however narrow the band."""

MAX_TEMPERATURE_K = 1000.0
"""Highest temperature accepted, K (far above any part's rating)."""


@dataclass(frozen=True)
class NoiseContribution:
    """One part's, source's or stage's share of the integrated output noise.

    Attributes
    ----------
    name : str
        Part ref (``"R3"``, ``"U2"``), source (``"U2.en"``), or ``"stage 2"``.
    kind : str
        ``"resistor"``, ``"opamp"``, one of :class:`service.circuit.NoiseKind`
        for a source, or ``"stage"``.
    stage : int or None
        Stage number (from 1); None for parts outside the stages (bias network).
    rms_v : float
        Output noise of this contribution alone, integrated over the band, V RMS.
    share : float
        Fraction of the total output noise power (0-1).
    """

    name: str
    kind: str
    stage: int | None
    rms_v: float
    share: float

    def as_dict(self) -> dict:
        return {"name": self.name, "kind": self.kind, "stage": self.stage, "rms_v": self.rms_v,
                "share": self.share}


@dataclass(frozen=True)
class NoiseReport:
    """Noise of a circuit (see the module notes).

    Attributes
    ----------
    frequency_hz : ndarray, shape (F,)
        The caller's grid, Hz.
    output_density_v_rthz, input_density_v_rthz : ndarray, shape (F,)
        Output noise density and input-referred density, V/sqrt(Hz).
    band_hz : (float, float)
        Integration band, Hz.
    temperature_k : float
    output_rms_v, input_rms_v : float
        Integrated output noise and input-referred noise, V RMS.
    reference_gain : float
        ``max |H|`` (V/V) the input-referred RMS is divided by.
    parts, sources, stages : tuple of NoiseContribution
        Largest first.
    full_scale_v, snr_db : float or None
        Full-scale output (V peak) and the SNR of a full-scale sine (dB).
    max_output_v, dynamic_range_db : float or None
        Largest output (V peak) before an op-amp clips and the ratio of its
        RMS to the output noise (dB).
    notes : tuple of str
    """

    frequency_hz: np.ndarray
    output_density_v_rthz: np.ndarray
    input_density_v_rthz: np.ndarray
    band_hz: tuple[float, float]
    temperature_k: float
    output_rms_v: float
    input_rms_v: float
    reference_gain: float
    parts: tuple[NoiseContribution, ...]
    sources: tuple[NoiseContribution, ...]
    stages: tuple[NoiseContribution, ...]
    full_scale_v: float | None = None
    snr_db: float | None = None
    max_output_v: float | None = None
    dynamic_range_db: float | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)

    def as_dict(self) -> dict:
        """Plain JSON values (arrays as lists)."""
        return {
            "frequency_hz": self.frequency_hz.tolist(),
            "output_density_v_rthz": self.output_density_v_rthz.tolist(),
            "input_density_v_rthz": [x if math.isfinite(x) else None for x in self.input_density_v_rthz.tolist()],
            "band_hz": list(self.band_hz),
            "temperature_k": self.temperature_k,
            "output_rms_v": self.output_rms_v,
            "input_rms_v": self.input_rms_v if math.isfinite(self.input_rms_v) else None,
            "reference_gain": self.reference_gain,
            "parts": [c.as_dict() for c in self.parts],
            "sources": [c.as_dict() for c in self.sources],
            "stages": [c.as_dict() for c in self.stages],
            "full_scale_v": self.full_scale_v,
            "snr_db": self.snr_db,
            "max_output_v": self.max_output_v,
            "dynamic_range_db": self.dynamic_range_db,
            "notes": list(self.notes),
        }


def integrate_power_law(frequency_hz: np.ndarray, psd: np.ndarray) -> np.ndarray:
    """Integral of a density over frequency, each interval a power law ``S(f) = S0 (f/f0)^a``.

    Parameters
    ----------
    frequency_hz : ndarray, shape (F,)
        Ascending, > 0, Hz.
    psd : ndarray, shape (..., F)
        Density (e.g. V^2/Hz), >= 0.

    Returns
    -------
    ndarray, shape (...)
        The integral (e.g. V^2).  An interval where the density is zero at
        an end is integrated by the trapezoid rule.
    """
    f = np.asarray(frequency_hz, dtype=float)
    s = np.asarray(psd, dtype=float)
    if f.size < 2:
        return np.zeros(s.shape[:-1])
    f0 = f[:-1]
    lr = np.log(f[1:] / f0)
    s0, s1 = s[..., :-1], s[..., 1:]
    pos = (s0 > 0) & (s1 > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.where(pos, np.log(np.where(pos, s1 / np.where(pos, s0, 1.0), 1.0)) + lr, 0.0)   # (a + 1) * lr
        phi = np.where(np.abs(x) > 1e-12, np.expm1(x) / np.where(x == 0, 1.0, x), 1.0 + x / 2)
    seg = np.where(pos, s0 * f0 * lr * phi, 0.5 * (s0 + s1) * (f[1:] - f0))
    return seg.sum(axis=-1)


def integration_grid(band_hz: tuple[float, float], points_per_decade: int = INTEGRATION_POINTS_PER_DECADE
                     ) -> np.ndarray:
    """Log-spaced grid over ``band_hz`` (both ends included), Hz, shape (N,)."""
    lo, hi = band_hz
    n = max(MIN_INTEGRATION_POINTS, int(math.ceil(math.log10(hi / lo) * points_per_decade)) + 1)
    g = np.logspace(math.log10(lo), math.log10(hi), n)
    g[0], g[-1] = lo, hi
    return g


def check_band(band_hz, field_name: str = "noise.band_hz") -> tuple[float, float]:
    """``(lo, hi)`` with ``0 < lo < hi`` finite, Hz; :class:`InvalidLevel` otherwise."""
    try:
        lo, hi = (float(x) for x in band_hz)
    except (TypeError, ValueError):
        raise InvalidLevel(f"{field_name} must be a pair [low, high] of frequencies in Hz", field=field_name) from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise InvalidLevel(f"{field_name} must satisfy 0 < low < high (Hz), got [{lo!r}, {hi!r}]", field=field_name)
    return lo, hi


def _positive(value, name: str, *, upper: float = math.inf) -> float | None:
    if value is None:
        return None
    v = float(value)
    if not (math.isfinite(v) and 0 < v <= upper):
        raise InvalidLevel(f"{name} must be a positive number{'' if upper == math.inf else f' up to {upper:g}'}, "
                           f"got {value!r}", field=name)
    return v


def _ranked(items: list[NoiseContribution]) -> tuple[NoiseContribution, ...]:
    return tuple(sorted(items, key=lambda c: (-c.rms_v, c.name)))


def analyze_noise(circuit: Circuit, frequency_hz, band_hz, *, output: str = "out",
                  temperature_k: float = DEFAULT_TEMPERATURE_K, stage_of: Mapping[str, int] | None = None,
                  full_scale_v: float | None = None, max_output_v: float | None = None,
                  points_per_decade: int = INTEGRATION_POINTS_PER_DECADE, method: str = "auto") -> NoiseReport:
    """Noise report of one circuit (one trial).

    Parameters
    ----------
    circuit : Circuit
        Single-trial circuit; op-amp noise in each op-amp's ``sources``.
    frequency_hz : array_like, shape (F,)
        Grid of the reported densities, Hz (> 0).
    band_hz : (float, float)
        Integration band, Hz (``0 < low < high``).
    output : str
        Output node.
    temperature_k : float
        K (0 < T <= :data:`MAX_TEMPERATURE_K`); default 300.15 K (27 degC).
    stage_of : mapping of str to int, optional
        Element ref -> stage number (from 1), for the per-stage shares.
    full_scale_v : float, optional
        Full-scale output, V peak, for the SNR.
    max_output_v : float, optional
        Largest output before clipping, V peak, for the dynamic range.
    points_per_decade : int
        Density of the integration grid.
    method : str
        Solver of :func:`service.circuit.noise_spectra`.

    Returns
    -------
    NoiseReport

    Raises
    ------
    InvalidLevel
        Band, temperature or levels out of range (``field`` names it).
    CircuitError
        Invalid circuit or grid.
    """
    lo, hi = check_band(band_hz)
    t_k = _positive(temperature_k, "noise.temperature_k", upper=MAX_TEMPERATURE_K)
    full_scale_v = _positive(full_scale_v, "noise.full_scale_v")
    max_output_v = _positive(max_output_v, "noise.max_output_v")
    if not isinstance(points_per_decade, (int, np.integer)) or not 10 <= points_per_decade <= 2000:
        raise InvalidLevel("points_per_decade must be an integer from 10 to 2000", field="noise.points_per_decade")
    if circuit.trials != 1:
        raise InvalidLevel("the noise report is for a single-trial circuit", field="circuit")
    f_show = np.asarray(frequency_hz, dtype=float)
    if f_show.ndim != 1 or f_show.size == 0 or not np.all(np.isfinite(f_show)) or np.any(f_show <= 0):
        raise InvalidLevel("frequency_hz must be a non-empty list of positive frequencies (Hz)",
                           field="noise.frequency_hz")
    f_int = integration_grid((lo, hi), int(points_per_decade))
    res = noise_spectra(circuit, np.concatenate([f_show, f_int]), output, temperature_k=t_k, method=method)
    dens, gain = res.density[0], np.abs(res.gain[0])
    nf = f_show.size
    show_total = dens[:, :nf].sum(axis=0)
    power = integrate_power_law(f_int, dens[:, nf:])                     # (S,) V^2
    total = float(power.sum())
    out_rms = math.sqrt(total)
    ref_gain = float(np.max(gain))
    with np.errstate(divide="ignore", invalid="ignore"):
        in_density = np.where(gain[:nf] > 0, np.sqrt(show_total) / gain[:nf], np.inf)
    stage_of = dict(stage_of or {})

    def share(p: float) -> float:
        return p / total if total > 0 else 0.0

    sources, per_part, part_kind = [], {}, {}
    for src, p in zip(res.sources, power):
        sources.append(NoiseContribution(src.name, src.kind.value, stage_of.get(src.element), math.sqrt(p),
                                         share(p)))
        per_part[src.element] = per_part.get(src.element, 0.0) + float(p)
        part_kind[src.element] = "resistor" if src.kind is NoiseKind.RESISTOR_THERMAL else "opamp"
    parts = [NoiseContribution(ref, part_kind[ref], stage_of.get(ref), math.sqrt(p), share(p))
             for ref, p in per_part.items()]
    per_stage: dict[int | None, float] = {}
    for ref, p in per_part.items():
        per_stage[stage_of.get(ref)] = per_stage.get(stage_of.get(ref), 0.0) + p
    stages = [NoiseContribution(f"stage {k}" if k is not None else "outside the stages", "stage", k,
                                math.sqrt(p), share(p)) for k, p in per_stage.items()]
    notes = []
    if not any(s.kind is not NoiseKind.RESISTOR_THERMAL for s in res.sources):
        notes.append("no op-amp noise figures given: only the resistors' thermal noise is counted")
    snr = dr = None
    if out_rms > 0 and full_scale_v is not None:
        snr = 20 * math.log10(full_scale_v / math.sqrt(2) / out_rms)
    if out_rms > 0 and max_output_v is not None:
        dr = 20 * math.log10(max_output_v / math.sqrt(2) / out_rms)
    return NoiseReport(
        frequency_hz=f_show.copy(), output_density_v_rthz=np.sqrt(show_total), input_density_v_rthz=in_density,
        band_hz=(lo, hi), temperature_k=t_k, output_rms_v=out_rms,
        input_rms_v=out_rms / ref_gain if ref_gain > 0 else math.inf, reference_gain=ref_gain,
        parts=_ranked(parts), sources=_ranked(sources), stages=_ranked(stages),
        full_scale_v=full_scale_v, snr_db=snr, max_output_v=max_output_v, dynamic_range_db=dr,
        notes=tuple(notes))


__all__ = ["NoiseContribution", "NoiseReport", "analyze_noise", "check_band", "integrate_power_law",
           "integration_grid", "INTEGRATION_POINTS_PER_DECADE"]
