"""The one entry point of a response analysis: :func:`analyze`."""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from service.approximation.types import ResponseType
from service.response import zpk as _zpk
from service.response.errors import InvalidMask
from service.response.grids import (AUTOMATIC_TIME_POINTS, DEFAULT_MAX_FREQUENCY_POINTS, DEFAULT_MAX_TIME_POINTS,
                                    TimeGrid, resolve_frequencies)
from service.response.verification import Band, Verdict
from service.response.metrics import ResponseMetrics, frequency_metrics, step_metrics
from service.response.refine import analysis_grid_hz
from service.response.result import ResponseResult, TimeResponse
from service.response.systems import CircuitSystem, ZpkSystem, as_system
from service.response.timeresp import automatic_span, simulate


def _passbands_from(passband_hz, rt: ResponseType | None, obj: Any, verdict: Verdict | None):
    """Passband intervals (Hz) from explicit edges, the verdict's passband segments or the approximation's edges."""
    if passband_hz is not None:
        arr = np.atleast_1d(np.asarray(passband_hz, dtype=float)).ravel()
        if not np.all(np.isfinite(arr)) or np.any(arr <= 0) or arr.size not in (1, 2):
            raise InvalidMask("passband_hz must be one positive frequency or a pair (Hz)", field="passband_hz")
        if rt is None:
            raise InvalidMask("passband_hz needs response_type", field="response_type")
        if rt in (ResponseType.LOWPASS, ResponseType.HIGHPASS):
            if arr.size != 1:
                raise InvalidMask("passband_hz must be a single number for this response type",
                                  field="passband_hz")
            return [(0.0, float(arr[0]))] if rt is ResponseType.LOWPASS else [(float(arr[0]), math.inf)]
        if arr.size != 2 or not arr[0] < arr[1]:
            raise InvalidMask("passband_hz must be an increasing pair [low, high] for this response type",
                              field="passband_hz")
        lo, hi = float(arr[0]), float(arr[1])
        return [(lo, hi)] if rt is ResponseType.BANDPASS else [(0.0, lo), (hi, math.inf)]
    if verdict is not None and verdict.segments:
        bands = [(s.limit.start_hz, s.checked_to_hz) for s in verdict.segments if s.limit.band is Band.PASSBAND]
        if bands:
            return bands
    edges = getattr(obj, "edges", None)
    if edges and rt is not None:
        pf = sorted(float(e.frequency_hz) for e in edges if str(getattr(e, "band", "")).startswith("pass"))
        if pf:
            return _passbands_from(pf if len(pf) > 1 else pf[0], rt, None, None)
    return None


def analyze(system: Any, frequencies, *, time: TimeGrid | None = None, verdict: Verdict | None = None,
            response_type: ResponseType | str | None = None, passband_hz=None,
            attenuation_at_hz: Sequence[float] = (), max_points: int = DEFAULT_MAX_FREQUENCY_POINTS,
            max_time_points: int = DEFAULT_MAX_TIME_POINTS,
            automatic_time_points: int = AUTOMATIC_TIME_POINTS) -> ResponseResult:
    """Frequency and time response, metrics and mask check of a filter.

    Parameters
    ----------
    system : ZpkSystem, CircuitSystem, approximation or list of Section
        An approximation (anything with ``zeros``, ``poles`` in rad/s and
        ``gain``) also lends its ``response`` and passband ``edges``.
    frequencies : FrequencyGrid or sequence of float
        Display grid (Hz); explicit lists strictly increasing, >= 0.
    time : TimeGrid, optional
        Time grid; None: automatic (see :class:`TimeGrid`).
    verdict : Verdict, optional
        The system's verification against its requirement or mask
        (:mod:`service.response.verification`), carried into the result and its figure.
    response_type : ResponseType or str, optional
        None: from the approximation, else inferred from the response.
    passband_hz : float or (float, float), optional
        Passband edge(s) (Hz) for the ripple and delay-variation metrics;
        default from the mask or the approximation's edges.
    attenuation_at_hz : sequence of float
        Frequencies (Hz) at which to report the loss (dB) below the passband gain.
    max_points, max_time_points : int
        Configured limits (``ROLLOFF_MAX_FREQUENCY_POINTS``,
        ``ROLLOFF_MAX_TIME_POINTS``).
    automatic_time_points : int
        Cap of the automatic time grid.

    Returns
    -------
    ResponseResult

    Raises
    ------
    InvalidGrid, InvalidMask, ImproperSystem, LimitExceeded
    """
    obj = system
    sysm = as_system(system)
    if response_type is None and getattr(obj, "response", None) is not None:
        response_type = obj.response
    rt_given = ResponseType(response_type) if response_type is not None else None
    f = resolve_frequencies(frequencies, max_points)
    att = np.atleast_1d(np.asarray(attenuation_at_hz, dtype=float)).ravel()
    if att.size and (not np.all(np.isfinite(att)) or np.any(att < 0)):
        raise InvalidMask("attenuation_at_hz must be finite frequencies >= 0 (Hz)", field="attenuation_at_hz")
    notes: list[str] = []

    # display arrays
    h = sysm.evaluate(f)
    mag = _zpk.magnitude_db(h)
    zpk = sysm.zpk()
    if isinstance(sysm, ZpkSystem):
        ph = sysm.phase(f)
    else:
        ph = sysm.phase(f, h)
    gd = sysm.group_delay(f)

    # the exact response as a function for metrics
    def gain_db(fr):
        return _zpk.magnitude_db(sysm.evaluate(np.asarray(fr, dtype=float)))

    if zpk is not None:
        z, p, k = zpk
        grid = analysis_grid_hz(z, p, extra_hz=np.concatenate([att, f[f > 0]]) if f.size < 50 else att)
        g0 = float(_zpk.magnitude_db(np.array([_zpk.dc_gain(z, p, k)]))[0]) if isinstance(sysm, ZpkSystem) \
            else float(gain_db(np.zeros(1))[0])
        ginf_lin = _zpk.hf_gain(z, p, k)
        ginf = float(_zpk.magnitude_db(np.array([ginf_lin]))[0])
    else:
        z = p = None
        lo = max(f[f > 0].min() if np.any(f > 0) else 1.0, 1e-6)
        grid = np.geomspace(lo / 10, max(f.max(), lo) * 10, 2000)
        g0 = float(gain_db(np.zeros(1))[0])
        ginf = float(gain_db(grid[-1:])[0])
        notes.append("no exact transfer function: metrics use a log grid around the requested frequencies")

    passbands = _passbands_from(passband_hz, rt_given, obj, verdict)
    metrics, rt = frequency_metrics(gain_db, sysm.group_delay, grid, g0, ginf, rt_given, passbands, att)

    step = impulse = None
    if zpk is None:
        notes.append("time response unavailable: the circuit engine gave no transfer function")
        for name in ("overshoot_pct", "rise_time_s", "settling_time_1pct_s", "settling_time_01pct_s"):
            metrics.unavailable[name] = "no exact transfer function of the circuit"
    elif np.any(np.asarray(p).real >= 0) or np.asarray(z).size > np.asarray(p).size:
        notes.append("time response unavailable: the transfer function is unstable or improper")
        for name in ("overshoot_pct", "rise_time_s", "settling_time_1pct_s", "settling_time_01pct_s"):
            metrics.unavailable[name] = "the transfer function is unstable or improper"
    else:
        tgrid = time if time is not None else TimeGrid()
        stop, dt = automatic_span(p)
        t = tgrid.times(stop, dt, max_time_points, automatic_time_points)
        sim = simulate(z, p, k, t)
        sim.final_value = float(np.real(_zpk.dc_gain(z, p, k)))
        step = TimeResponse(sim.time_s, sim.step)
        impulse = TimeResponse(sim.time_s, sim.impulse, sim.dirac_weight)
        step_metrics(sim, metrics)
    return ResponseResult(rt, f, mag, np.degrees(ph), gd, step, impulse, metrics, verdict, notes,
                          passbands_hz=None if not passbands else tuple((float(a), float(b)) for a, b in passbands))
