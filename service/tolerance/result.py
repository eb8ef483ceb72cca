"""The result of a tolerance run: JSON reply, per-frequency table, SVG figure."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.tolerance.statistics import PERCENTILE_NAMES
from service.values import FloatValues


def _finite(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _floats(values) -> FloatValues:
    """Python floats of a 1-D array, converted in C (``ndarray.tolist``), not one by one."""
    return FloatValues.of(values)


def _named(rows: np.ndarray) -> dict[str, FloatValues]:
    rows = np.asarray(rows, dtype=np.float64)
    return {name: FloatValues.of(rows[i]) for i, name in enumerate(PERCENTILE_NAMES)}


@dataclass
class ToleranceResult:
    """Monte Carlo, sensitivity, worst case and yield of one design.

    Attributes
    ----------
    frequency_hz : ndarray (F,)
        The caller's grid, Hz.
    magnitude_db, phase_deg, group_delay_s : ndarray (7, F)
        Percentiles per frequency, rows in the order of
        :data:`service.tolerance.statistics.PERCENTILES` (dB, degrees
        unwrapped, seconds).
    nominal_magnitude_db : ndarray (F,)
        The nominal design's magnitude, dB.
    metrics : dict
        ``f3db_hz`` (or ``f3db_low_hz``/``f3db_high_hz``),
        ``passband_ripple_db``, ``attenuation_db`` (keyed by stopband-edge
        frequency), ``stages`` (list of ``{f0_hz, q}``): each a summary
        ``{count, mean, std, min, p0.135, ..., max}``.
    yield_ : dict
        ``{fraction, ci95_low, ci95_high, trials, passed, failures_by_criterion}``
        (public name ``yield``); None without a mask.
    sensitivity : list of dict
    worst_case : list of dict
    trials : list of dict
        The first ``include_trials`` trials.
    distribution : dict
        Distribution per part kind.
    seed : int
    temperature : dict or None
    criteria : Criteria or None
        The requirement each trial was verified against (``mask`` in the reply).
    notes : dict
        How figures were computed (methods, tile size, frequency blocks).
    subject : FigureSubject or None
        The filter and the design, for the figure's title (set by the workflow for a figure).
    nominal_verdict : Verdict or None
        The nominal design verified against ``criteria`` (set by the workflow for a figure: where a
        segment's worst point is when no trial's was located).
    """

    frequency_hz: np.ndarray
    magnitude_db: np.ndarray
    phase_deg: np.ndarray
    group_delay_s: np.ndarray
    nominal_magnitude_db: np.ndarray
    metrics: dict
    yield_: dict | None
    sensitivity: list
    worst_case: list
    trials: list
    distribution: dict
    seed: int
    temperature: dict | None
    trial_count: int
    criteria: object = None
    notes: dict = field(default_factory=dict)
    subject: object = None
    nominal_verdict: object = None

    def as_dict(self) -> dict:
        """The JSON reply (plain Python values; None for a figure a trial set lacks)."""
        return {
            "frequency_hz": _floats(self.frequency_hz),
            "magnitude_db_percentiles": _named(self.magnitude_db),
            "phase_deg_percentiles": _named(self.phase_deg),
            "group_delay_s_percentiles": _named(self.group_delay_s),
            "nominal_magnitude_db": _floats(self.nominal_magnitude_db),
            "metrics": self.metrics,
            "yield": self.yield_,
            "sensitivity": self.sensitivity,
            "worst_case": self.worst_case,
            "trials": self.trials,
            "trial_count": self.trial_count,
            "distribution": dict(self.distribution),
            "seed": self.seed,
            "temperature": self.temperature,
            "mask": None if self.criteria is None else _criteria_json(self.criteria),
            "notes": dict(self.notes),
        }

    def table(self) -> dict[str, np.ndarray]:
        """Ordered columns (name -> 1-D float64 array, one row per frequency).

        ``frequency_hz``, ``nominal_magnitude_db``, then
        ``magnitude_db_<p>``, ``phase_deg_<p>``, ``group_delay_s_<p>`` for
        every percentile name ``<p>`` (``min``, ``p0.135``, ... ``max``).
        """
        cols = {"frequency_hz": np.asarray(self.frequency_hz, dtype=float),
                "nominal_magnitude_db": np.asarray(self.nominal_magnitude_db, dtype=float)}
        for prefix, rows in (("magnitude_db", self.magnitude_db), ("phase_deg", self.phase_deg),
                             ("group_delay_s", self.group_delay_s)):
            for i, name in enumerate(PERCENTILE_NAMES):
                cols[f"{prefix}_{name}"] = np.asarray(rows[i], dtype=float)
        return cols

    def svg(self) -> bytes:
        """The envelope figure (see :func:`service.tolerance.plotting.tolerance_figure`) as an SVG document."""
        from service.tolerance.plotting import tolerance_figure_svg

        return tolerance_figure_svg(self)


def _criteria_json(criteria) -> dict:
    """The verified segments (and delay limit) as plain JSON; open ends as null."""
    return {
        "segments": [{"band": lim.band.value, "start_hz": lim.start_hz,
                      "stop_hz": lim.stop_hz if math.isfinite(lim.stop_hz) else None, "limit_db": lim.limit_db,
                      "open_end": lim.open_end} for lim in criteria.limits],
        "group_delay": None if criteria.delay is None else {"stop_hz": criteria.delay.stop_hz,
                                                            "max_deviation_pct": criteria.delay.max_deviation_pct},
        "reference_gain_db": criteria.reference_gain_db,
    }


__all__ = ["ToleranceResult"]
