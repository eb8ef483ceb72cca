"""Result records of a response analysis, with their table and figure forms."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.approximation.types import ResponseType
from service.response.verification import Verdict
from service.response.metrics import ResponseMetrics
from service.response.figure_inputs import FigureSubject, PassbandDetail


def _clean(x):
    """Plain JSON value: floats (NaN/inf -> None), lists, dicts."""
    if isinstance(x, np.ndarray):
        return [_clean(v) for v in x.tolist()]
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, dict):
        return {k: _clean(v) for k, v in x.items()}
    if isinstance(x, (float, np.floating)):
        v = float(x)
        return v if math.isfinite(v) else None
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


@dataclass(frozen=True)
class TimeResponse:
    """A sampled time response.

    Attributes
    ----------
    time_s : ndarray of float64, shape (N,)
    value : ndarray of float64, shape (N,)
        Output per unit input step (step), or per unit area (impulse, 1/s).
    dirac_weight : float
        Impulse response only: weight of the delta at t = 0 (the direct
        feedthrough H(inf)); 0 for a step response.
    """

    time_s: np.ndarray
    value: np.ndarray
    dirac_weight: float = 0.0

    def as_dict(self) -> dict:
        return _clean({"time_s": self.time_s, "value": self.value, "dirac_weight": self.dirac_weight})


@dataclass
class ResponseResult:
    """Frequency and time response of a system, its metrics and its mask check.

    Attributes
    ----------
    response_type : ResponseType
        Given or inferred.
    frequency_hz : ndarray (F,) Hz
    magnitude_db : ndarray (F,) dB (floored at -400 dB at exact zeros)
    phase_deg : ndarray (F,) degrees, unwrapped
    group_delay_s : ndarray (F,) s
    step, impulse : TimeResponse or None
    metrics : ResponseMetrics
    verdict : Verdict or None
        The verification against the requirement or mask (``mask_result`` in the reply).
    notes : list of str
        Anything the caller should know (e.g. why the time response is missing).
    passbands_hz : tuple of (float, float) or None
        The passband intervals (Hz; an open band ends at ``inf``) the ripple and delay metrics were read on.
    subject : FigureSubject or None
        The filter and the design, for the figure's title (set by the workflow).
    detail : PassbandDetail or None
        The passband sampled densely, for the figure's passband detail (set by the workflow for a figure).
    """

    response_type: ResponseType
    frequency_hz: np.ndarray
    magnitude_db: np.ndarray
    phase_deg: np.ndarray
    group_delay_s: np.ndarray
    step: TimeResponse | None
    impulse: TimeResponse | None
    metrics: ResponseMetrics
    verdict: Verdict | None = None
    notes: list[str] = field(default_factory=list)
    passbands_hz: tuple[tuple[float, float], ...] | None = None
    subject: FigureSubject | None = None
    detail: PassbandDetail | None = None

    def as_dict(self) -> dict:
        """Plain-JSON form with the public field names."""
        return _clean({
            "response_type": self.response_type.value,
            "frequency_hz": self.frequency_hz,
            "magnitude_db": self.magnitude_db,
            "phase_deg": self.phase_deg,
            "group_delay_s": self.group_delay_s,
            "step": None if self.step is None else {"time_s": self.step.time_s, "value": self.step.value},
            "impulse": None if self.impulse is None else self.impulse.as_dict(),
            "metrics": self.metrics.as_dict(),
            "mask_result": None if self.verdict is None else self.verdict.as_dict(),
            "notes": list(self.notes),
        })

    def table(self, kind: str = "frequency") -> dict[str, np.ndarray]:
        """Columns for CSV: ``kind="frequency"`` a row per frequency, ``"time"`` a row per time point.

        Returns
        -------
        dict (ordered) of column name -> 1-D ndarray, all of one length.
        """
        if kind == "frequency":
            return {"frequency_hz": self.frequency_hz, "magnitude_db": self.magnitude_db,
                    "phase_deg": self.phase_deg, "group_delay_s": self.group_delay_s}
        if kind == "time":
            if self.step is None:
                return {"time_s": np.zeros(0), "step": np.zeros(0), "impulse": np.zeros(0)}
            cols = {"time_s": self.step.time_s, "step": self.step.value}
            if self.impulse is not None:
                cols["impulse"] = self.impulse.value
            return cols
        from service.response.errors import InvalidGrid

        raise InvalidGrid("table kind must be 'frequency' or 'time'", field="format")

    def svg(self) -> bytes:
        """SVG figure: magnitude with the mask and the verdict, passband detail, group delay, phase, step response."""
        from service.response.plotting import response_figure_svg

        return response_figure_svg(self)
