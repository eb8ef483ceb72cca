"""Headroom: the signal level at every op-amp output against its output range, and which clips first.

For a sine of peak ``V_in`` at the filter input, the output of op-amp ``k``
swings ``V_in |H_k(f)|`` about its DC level, ``H_k`` the transfer from the
input to that output (the circuit engine, :func:`service.circuit.prepare_ac`).
It stays linear while the swing fits between its DC level and the nearer
end of its output range: ``limit_k = min(high - dc, dc - low)``.  The input
at which it clips is ``limit_k / max_f |H_k|``; the op-amp with the smallest
such input clips first, and the filter's largest undistorted output is that
input times the output's peak gain (common practice: the intermediate
levels of a cascade, Schaumann and Van Valkenburg, *Design of Analog
Filters*, 2001, ch. 6, on dynamic range, from memory).

Peaks are taken on the caller's grid and refined by zooming twice around
each sampled maximum (41 points over two grid steps each time).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from service.circuit import Circuit, ElementKind, prepare_ac
from service.response.errors import InvalidLevel

ZOOM_POINTS = 41
ZOOMS = 2


@dataclass(frozen=True)
class OpAmpLevel:
    """Signal level at one op-amp output.

    Attributes
    ----------
    ref : str
    stage : int or None
        Stage number (from 1); None outside the stages.
    node : str
    peak_gain : float
        ``max_f |H_k(f)|`` from the filter input, V/V.
    peak_frequency_hz : float
    peak_v : float
        Peak swing at the analysed input level, V.
    dc_v : float
        DC level of the output, V.
    low_v, high_v : float or None
        Output range, V (None: not known).
    limit_v : float or None
        Largest peak swing about ``dc_v`` within the range, V.
    headroom_db : float or None
        ``20 log10(limit_v / peak_v)``: negative when it clips.
    clip_input_v : float or None
        Input peak (V) at which this output reaches its range.
    """

    ref: str
    stage: int | None
    node: str
    peak_gain: float
    peak_frequency_hz: float
    peak_v: float
    dc_v: float
    low_v: float | None
    high_v: float | None
    limit_v: float | None
    headroom_db: float | None
    clip_input_v: float | None

    def as_dict(self) -> dict:
        """Plain JSON values (a non-finite figure, e.g. no headroom at all, as None)."""
        return {k: _json(getattr(self, k)) for k in ("ref", "stage", "node", "peak_gain", "peak_frequency_hz",
                                                     "peak_v", "dc_v", "low_v", "high_v", "limit_v", "headroom_db",
                                                     "clip_input_v")}


def _json(x):
    return None if isinstance(x, float) and not math.isfinite(x) else x


@dataclass(frozen=True)
class HeadroomReport:
    """Levels of every op-amp output (see the module notes).

    Attributes
    ----------
    input_peak_v : float
        Input sine peak analysed, V.
    frequency_hz : ndarray, shape (F,)
    levels_v : ndarray, shape (K, F)
        Peak swing of each op-amp output over frequency at ``input_peak_v``, V.
    opamps : tuple of OpAmpLevel, length K
        In circuit order.
    first_clip : str or None
        Ref of the op-amp that clips at the lowest input; None when no range is known.
    clip_input_v : float or None
        That input peak, V.
    output_peak_gain : float
        ``max_f |H(f)|`` at the filter output, V/V.
    max_output_v : float or None
        Largest undistorted output peak, ``clip_input_v * output_peak_gain``, V.
    clips_before_output : bool
        Whether an op-amp other than the one driving the output clips first.
    warnings : tuple of str
    """

    input_peak_v: float
    frequency_hz: np.ndarray
    levels_v: np.ndarray
    opamps: tuple[OpAmpLevel, ...]
    first_clip: str | None
    clip_input_v: float | None
    output_peak_gain: float
    max_output_v: float | None
    clips_before_output: bool
    warnings: tuple[str, ...] = field(default_factory=tuple)

    def as_dict(self) -> dict:
        return {
            "input_peak_v": self.input_peak_v, "frequency_hz": self.frequency_hz.tolist(),
            "levels_v": self.levels_v.tolist(), "opamps": [o.as_dict() for o in self.opamps],
            "first_clip": self.first_clip, "clip_input_v": self.clip_input_v,
            "output_peak_gain": self.output_peak_gain, "max_output_v": self.max_output_v,
            "clips_before_output": self.clips_before_output, "warnings": list(self.warnings),
        }


def _peak(prepared, grid: np.ndarray, coarse: np.ndarray) -> tuple[float, float]:
    """Largest |H| and its frequency, refined around the sampled maximum."""
    k = int(np.argmax(coarse))
    peak, fpk = float(coarse[k]), float(grid[k])
    if grid.size < 2 or peak == 0:
        return peak, fpk
    lo = grid[max(k - 1, 0)]
    hi = grid[min(k + 1, grid.size - 1)]
    for _ in range(ZOOMS):
        fine = np.geomspace(max(lo, 1e-300), hi, ZOOM_POINTS) if lo > 0 else np.linspace(lo, hi, ZOOM_POINTS)
        m = np.abs(prepared.on_grid(fine).response()[0])
        j = int(np.argmax(m))
        if m[j] > peak:
            peak, fpk = float(m[j]), float(fine[j])
        lo, hi = fine[max(j - 1, 0)], fine[min(j + 1, fine.size - 1)]
    return peak, fpk


def _level(value, name: str) -> float | None:
    if value is None:
        return None
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise InvalidLevel(f"{name} must be a positive peak voltage (V), got {value!r}", field=name)
    return v


def analyze_headroom(circuit: Circuit, frequency_hz, *, limits: Mapping[str, tuple[float | None, float | None]],
                     dc_v: Mapping[str, float] | None = None, stage_of: Mapping[str, int | None] | None = None,
                     input_peak_v: float | None = None, output_peak_v: float | None = None,
                     input_bias_v: float = 0.0, rails: tuple[float, float] | None = None,
                     output: str = "out") -> HeadroomReport:
    """Signal level of every op-amp output against its range.

    Parameters
    ----------
    circuit : Circuit
        Single trial; ``VIN`` the input, op-amp outputs the nodes analysed.
    frequency_hz : array_like, shape (F,)
        Ascending grid, Hz (>= 0).
    limits : mapping of str to (low, high)
        Op-amp ref -> absolute output range, V (either end None: unbounded).
    dc_v : mapping of str to float, optional
        Op-amp ref -> DC output level, V (default 0).
    stage_of : mapping of str to int or None, optional
        Op-amp ref -> stage number (from 1).
    input_peak_v, output_peak_v : float
        Exactly one: the input sine's peak (V), or the filter output's peak
        at its peak-gain frequency (V; the input is derived).
    input_bias_v : float
        DC level the input swings about, V.
    rails : (v_neg, v_pos), optional
        Supply rails, V: the input must swing within them.
    output : str
        The filter's output node.

    Returns
    -------
    HeadroomReport

    Raises
    ------
    InvalidLevel
        No or both levels, a level out of range or an input beyond the rails
        (``field="input_peak_v"`` or ``"output_peak_v"``).
    """
    if (input_peak_v is None) == (output_peak_v is None):
        raise InvalidLevel("give exactly one of input_peak_v and output_peak_v", field="input_peak_v")
    input_peak_v = _level(input_peak_v, "input_peak_v")
    output_peak_v = _level(output_peak_v, "output_peak_v")
    grid = np.asarray(frequency_hz, dtype=float)
    if grid.ndim != 1 or grid.size == 0 or not np.all(np.isfinite(grid)) or np.any(grid < 0) \
            or np.any(np.diff(grid) <= 0):
        raise InvalidLevel("frequency_hz must be an ascending list of non-negative frequencies (Hz)",
                           field="frequency_hz")
    if circuit.trials != 1:
        raise InvalidLevel("the headroom analysis is for a single-trial circuit", field="circuit")
    dc_v = dict(dc_v or {})
    stage_of = dict(stage_of or {})
    prepared_out = prepare_ac(circuit, grid, output)
    h_out = np.abs(prepared_out.response()[0])
    out_gain, _ = _peak(prepared_out, grid, h_out)
    if output_peak_v is not None:
        if out_gain <= 0:
            raise InvalidLevel("the filter's output gain is zero: give input_peak_v", field="output_peak_v")
        input_peak_v = output_peak_v / out_gain
    if rails is not None:
        v_neg, v_pos = rails
        if input_bias_v + input_peak_v > v_pos or input_bias_v - input_peak_v < v_neg:
            name = "input_peak_v" if output_peak_v is None else "output_peak_v"
            raise InvalidLevel(
                f"an input of {input_peak_v:.4g} V peak about {input_bias_v:g} V swings beyond the rails "
                f"[{v_neg:g}, {v_pos:g}] V", field=name)
    rows, levels = [], []
    driver = None
    for el in circuit.elements:
        if el.kind is not ElementKind.OPAMP:
            continue
        node = el.nodes[2]
        if node == output:
            driver = el.name
        prepared = prepare_ac(circuit, grid, node)
        h = np.abs(prepared.response()[0])
        gain, fpk = _peak(prepared, grid, h)
        levels.append(input_peak_v * h)
        lo, hi = limits.get(el.name, (None, None))
        dc = float(dc_v.get(el.name, 0.0))
        limit = None
        if lo is not None or hi is not None:
            limit = min(x for x in ((hi - dc) if hi is not None else math.inf,
                                    (dc - lo) if lo is not None else math.inf))
            limit = max(limit, 0.0)
        peak_v = input_peak_v * gain
        headroom = None
        clip = None
        if limit is not None and gain > 0:
            headroom = 20 * math.log10(limit / peak_v) if limit > 0 else -math.inf
            clip = limit / gain
        rows.append(OpAmpLevel(el.name, stage_of.get(el.name), node, gain, fpk, peak_v, dc, lo, hi, limit,
                               headroom, clip))
    clipping = [r for r in rows if r.clip_input_v is not None]
    first = min(clipping, key=lambda r: (r.clip_input_v, r.ref)) if clipping else None
    warnings = []
    for r in rows:
        if r.headroom_db is not None and r.headroom_db < 0:
            where = f"stage {r.stage}" if r.stage is not None else "outside the stages"
            warnings.append(f"{r.ref} ({where}) clips: {r.peak_v:.4g} V peak at {r.peak_frequency_hz:.4g} Hz "
                            f"against {r.limit_v:.4g} V of range")
    before = bool(first is not None and first.ref != driver)
    if before:
        where = f"stage {first.stage}" if first.stage is not None else "outside the stages"
        warnings.append(f"{first.ref} ({where}) clips before the output does, at an input of "
                        f"{first.clip_input_v:.4g} V peak")
    return HeadroomReport(
        input_peak_v=float(input_peak_v), frequency_hz=grid.copy(),
        levels_v=np.array(levels) if levels else np.zeros((0, grid.size)), opamps=tuple(rows),
        first_clip=first.ref if first else None, clip_input_v=first.clip_input_v if first else None,
        output_peak_gain=float(out_gain), max_output_v=first.clip_input_v * out_gain if first else None,
        clips_before_output=before, warnings=tuple(warnings))


__all__ = ["HeadroomReport", "OpAmpLevel", "analyze_headroom"]
