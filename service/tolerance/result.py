"""The result of a tolerance run: JSON reply, per-frequency table, SVG figure."""

from __future__ import annotations

import io
import math
from dataclasses import dataclass, field

import numpy as np

from service.tolerance.statistics import PERCENTILE_NAMES

WIDTH_IN, HEIGHT_IN, DPI = 8.0, 5.0, 100


def _finite(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _floats(values) -> list[float]:
    """Python floats of a 1-D array, converted in C (``ndarray.tolist``), not one by one."""
    return np.asarray(values, dtype=np.float64).tolist()


def _named(rows: np.ndarray) -> dict[str, list[float]]:
    rows = np.asarray(rows, dtype=np.float64)
    return {name: rows[i].tolist() for i, name in enumerate(PERCENTILE_NAMES)}


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
        """Magnitude envelope with the mask, as an SVG document (bytes).

        Bands: min-max, 0.135-99.865 % and 2.5-97.5 %, the median and the
        nominal; the mask's forbidden regions shaded relative to the nominal
        reference gain.  matplotlib (Agg) is imported here only.
        """
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure

        f = np.asarray(self.frequency_hz, dtype=float)
        pos = f > 0
        log_x = bool(pos.sum() > 1 and f[pos][-1] / f[pos][0] > 20)
        keep = pos if log_x else np.ones(f.shape, dtype=bool)
        x = f[keep]
        m = self.magnitude_db[:, keep]
        fig = Figure(figsize=(WIDTH_IN, HEIGHT_IN), dpi=DPI, layout="constrained")
        FigureCanvasAgg(fig)
        ax = fig.subplots()
        ax.fill_between(x, m[0], m[6], color="tab:blue", alpha=0.15, lw=0, label="min - max")
        ax.fill_between(x, m[1], m[5], color="tab:blue", alpha=0.25, lw=0, label="0.135 - 99.865 %")
        ax.fill_between(x, m[2], m[4], color="tab:blue", alpha=0.4, lw=0, label="2.5 - 97.5 %")
        ax.plot(x, m[3], color="tab:blue", lw=1.2, label="median")
        ax.plot(x, self.nominal_magnitude_db[keep], color="k", lw=0.8, ls="--", label="nominal")
        top = float(np.max(m[6])) if m.size else 0.0
        y_lo = max(float(np.min(m[0])) if m.size else -100.0, top - 140.0)
        if self.criteria is not None and x.size:
            from service.response.plotting import _draw_limits

            ref = self.notes.get("nominal_reference_gain_db", 0.0)
            if self.criteria.reference_gain_db is not None:
                ref = self.criteria.reference_gain_db
            _draw_limits(ax, self.criteria.limits, ref, float(x[0]), float(x[-1]), y_lo - 10)
        if log_x:
            ax.set_xscale("log")
        ax.set_ylim(y_lo - 5, top + 5)
        ax.set_xlabel("frequency (Hz)")
        ax.set_ylabel("magnitude (dB)")
        title = f"Monte Carlo, {self.trial_count} trials"
        if self.yield_ is not None:
            title += f", yield {100 * self.yield_['fraction']:.1f} %"
        ax.set_title(title)
        ax.grid(True, which="both", lw=0.3, alpha=0.5)
        ax.legend(loc="lower left", fontsize=8)
        buf = io.BytesIO()
        fig.savefig(buf, format="svg", metadata={"Date": None})
        return buf.getvalue()


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
