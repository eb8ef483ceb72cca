"""Figures of merit of a frequency response and of a step response.

Frequency metrics are taken on the dense internal grid of
:func:`service.response.refine.analysis_grid_hz`, independent of the display
grid; peaks and extremes are refined by a bracketed minimisation and every
crossing by Brent's root finding on the exact response.

Definitions (documented public behaviour)
-----------------------------------------
passband_gain_db
    The largest gain inside the passband when passband edges are known; else
    the DC gain (lowpass, bandstop), the high-frequency limit (highpass) or
    the peak gain (bandpass).
f3db_hz
    Where the gain is 10*log10(2) = 3.0103 dB (half power) below
    ``passband_gain_db``: one frequency (lowpass: first crossing above DC;
    highpass: last crossing below the high-frequency passband) or
    ``[low, high]`` (bandpass: either side of the peak; bandstop: either
    side of the stopband).
passband_ripple_db
    Largest minus smallest gain over the passband (needs passband edges).
group_delay_s
    At DC (lowpass, bandstop), at the geometric band centre (bandpass) or at
    the passband edge (highpass, whose delay tends to 0 as f -> inf).
group_delay_variation_s
    Largest minus smallest group delay over the passband (given edges, else
    [0, f3db], [f3db, inf), [f3db_low, f3db_high], or both bandstop passbands).
Step metrics
    With a final value y_f = H(0) != 0 (lowpass, bandstop): overshoot
    100*(max y/y_f - 1) (0 when there is none), rise time between the first
    crossings of 10 % and 90 % of y_f (0 when the step jumps past 90 % at
    t = 0), settling time as the last instant |y/y_f - 1| exceeds 1 % or
    0.1 %. With y_f = 0 (highpass, bandpass) overshoot and rise time are
    undefined (None, with a reason), and settling is the last instant |y|
    exceeds 1 % (0.1 %) of the largest |y|.

References
----------
.. [1] K. Ogata, *Modern Control Engineering*, 5th ed., Prentice Hall, 2010,
   sec. 5-3 (transient-response specifications: rise, peak, overshoot,
   settling).
.. [2] A. B. Williams, F. J. Taylor, *Electronic Filter Design Handbook*,
   4th ed., McGraw-Hill, 2006, sec. 2.1-2.3 (cutoff, ripple, group delay).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import Callable

import numpy as np

from service.approximation.types import ResponseType
from service.response.refine import GAIN_TOLERANCE_DB, crossing, refine_extrema, zoom_minimize

HALF_POWER_DB = 10.0 * math.log10(2.0)
#: A peak no higher than the DC (or high-frequency) gain by more than this is
#: rounding of a maximally flat response and is reported at DC (or infinity).
PEAK_FLATNESS_DB = 1e-9


@dataclass
class ResponseMetrics:
    """Named figures of a response; a None value has its reason in ``unavailable``.

    Units: dB, Hz, s, percent as the field names say.
    """

    passband_gain_db: float | None = None
    f3db_hz: float | list[float] | None = None
    passband_ripple_db: float | None = None
    attenuation_db: list[dict] = field(default_factory=list)
    peak_gain_db: float | None = None
    peak_frequency_hz: float | None = None
    group_delay_s: float | None = None
    group_delay_variation_s: float | None = None
    overshoot_pct: float | None = None
    rise_time_s: float | None = None
    settling_time_1pct_s: float | None = None
    settling_time_01pct_s: float | None = None
    unavailable: dict[str, str] = field(default_factory=dict)

    def as_dict(self) -> dict:
        return {f.name: getattr(self, f.name) for f in fields(self)}


def _log_crossing(func: Callable[[np.ndarray], np.ndarray], level: float, a: float, b: float) -> float:
    """Frequency in [a, b] (Hz, > 0) where func == level, in log-frequency."""
    g = lambda u: float(func(np.array([math.exp(u)]))[0] - level)  # noqa: E731
    return math.exp(crossing(g, math.log(a), math.log(b)))


def infer_response_type(g0_db: float, ginf_db: float, peak_db: float) -> ResponseType:
    """Response type from the DC, high-frequency and peak gains (dB).

    Both ends within 3 dB of the peak: bandstop; both ends more than 3 dB
    below: bandpass; otherwise whichever end is higher.
    """
    lo_pass = g0_db >= peak_db - HALF_POWER_DB
    hi_pass = ginf_db >= peak_db - HALF_POWER_DB
    if lo_pass and hi_pass:
        return ResponseType.BANDSTOP
    if not lo_pass and not hi_pass:
        return ResponseType.BANDPASS
    return ResponseType.LOWPASS if g0_db >= ginf_db else ResponseType.HIGHPASS


def extremes(func, requests, grid: np.ndarray, tolerance: float | None = None) -> list[tuple[float, float]]:
    """Refined extremes of ``func`` on several intervals, in one bracketed search.

    Parameters
    ----------
    func : callable
        Vectorised function of frequency (Hz, >= 0).
    requests : sequence of (a, b, maximum)
        Interval [a, b] in Hz (b may be inf or exceed the grid: it then stops
        at the grid's end) and whether the largest (True) or smallest value
        is wanted.
    grid : ndarray (G,)
        Dense analysis grid (Hz, sorted, > 0) sampling the intervals.
    tolerance : float, optional
        Rounding level of ``func`` (its units), see
        :func:`service.response.refine.refine_extrema`.

    Returns
    -------
    list of (f_hz, value)
        Where each extreme lies and its value (f = 0 when it is at DC).
    """
    samples, curves = [], []
    for a, b, maximum in requests:
        g = grid[(grid > a) & (grid < b)]
        g = np.concatenate([[a] if a > 0 else [], g, [b] if math.isfinite(b) else [grid[-1]]])
        samples.append(g)
    sizes = np.cumsum([g.size for g in samples])[:-1]
    values = np.split(np.asarray(func(np.concatenate(samples)), dtype=float), sizes) if samples else []
    for (a, b, maximum), g, v in zip(requests, samples, values):
        curves.append((g, v, -1.0 if maximum else 1.0))
    found = refine_extrema(func, curves, log_axis=True, tolerance=tolerance)
    if any(a == 0.0 for a, _, _ in requests):
        v0 = float(func(np.zeros(1))[0])
    out = []
    for (a, b, maximum), (f, v) in zip(requests, found):
        if a == 0.0 and ((v0 > v) if maximum else (v0 < v)):
            f, v = 0.0, v0
        out.append((f, v))
    return out


def _extreme(func, a: float, b: float, grid: np.ndarray, maximum: bool) -> tuple[float, float]:
    """Refined extreme (f, value) of func on [a, b] (b may exceed the grid)."""
    return extremes(func, [(a, b, maximum)], grid)[0]


def delay_variation(delay_s, passbands, grid: np.ndarray) -> float:
    """Largest minus smallest group delay (s) over the passbands (each clipped at the grid's end)."""
    top = grid[-1]
    ext = extremes(delay_s, [(a, min(b, top), mx) for a, b in passbands for mx in (True, False)], grid)
    return float(max(v for _, v in ext[0::2]) - min(v for _, v in ext[1::2]))


def frequency_metrics(gain_db: Callable, delay_s: Callable, grid: np.ndarray, g0_db: float, ginf_db: float,
                      response_type: ResponseType | None, passbands: list[tuple[float, float]] | None,
                      attenuation_at_hz=()) -> tuple[ResponseMetrics, ResponseType]:
    """Frequency-domain metrics (see the module notes for the definitions).

    Parameters
    ----------
    gain_db, delay_s : callable
        Vectorised gain (dB) and group delay (s) of frequency (Hz, >= 0).
    grid : ndarray (G,)
        Dense internal analysis grid (Hz, sorted, > 0).
    g0_db, ginf_db : float
        Gains (dB) at DC and as f -> inf.
    response_type : ResponseType or None
        None: inferred (:func:`infer_response_type`).
    passbands : list of (start_hz, stop_hz) or None
        Passband intervals (stop may be inf).
    attenuation_at_hz : sequence of float
        Frequencies (Hz) where the loss below ``passband_gain_db`` is reported.

    Returns
    -------
    (ResponseMetrics, ResponseType)
    """
    m = ResponseMetrics()
    gdb = gain_db(grid)
    # peak
    kp = int(np.argmax(gdb))
    if g0_db >= gdb[kp] - PEAK_FLATNESS_DB:
        # flat to rounding (a maximally flat response): the peak is at DC
        m.peak_gain_db, m.peak_frequency_hz = max(g0_db, float(gdb[kp])), 0.0
    elif ginf_db >= gdb[kp] - PEAK_FLATNESS_DB:
        m.peak_gain_db = ginf_db
        m.unavailable["peak_frequency_hz"] = "the gain is largest as the frequency tends to infinity"
    else:
        lo = grid[max(kp - 1, 0)]
        hi = grid[min(kp + 1, grid.size - 1)]
        neg = lambda u: -gain_db(np.exp(u))  # noqa: E731
        x, v = zoom_minimize(neg, np.array([math.log(lo)]), np.array([math.log(hi)]))
        m.peak_gain_db, m.peak_frequency_hz = float(-v[0]), float(math.exp(x[0]))
    rt = ResponseType(response_type) if response_type is not None else infer_response_type(
        g0_db, ginf_db, m.peak_gain_db)

    # passband reference gain
    pass_max = pass_min = None
    if passbands:
        ext = extremes(gain_db, [(a, b, mx) for a, b in passbands for mx in (True, False)], grid,
                       tolerance=GAIN_TOLERANCE_DB)
        pass_max = max(v for _, v in ext[0::2])
        pass_min = min(v for _, v in ext[1::2])
        ref = pass_max
    elif rt in (ResponseType.LOWPASS, ResponseType.BANDSTOP):
        ref = g0_db
    elif rt is ResponseType.HIGHPASS:
        ref = ginf_db
    else:
        ref = m.peak_gain_db
    m.passband_gain_db = float(ref)

    # half-power frequencies
    level = ref - HALF_POWER_DB
    below = gdb < level
    f3: float | list[float] | None = None
    reason = None
    if rt is ResponseType.LOWPASS:
        idx = np.nonzero(below)[0]
        if idx.size == 0:
            reason = "the gain never falls 3 dB below the passband gain"
        elif idx[0] == 0:
            reason = "the gain is already 3 dB down at the lowest analysed frequency"
        else:
            f3 = _log_crossing(gain_db, level, grid[idx[0] - 1], grid[idx[0]])
    elif rt is ResponseType.HIGHPASS:
        idx = np.nonzero(below)[0]
        if idx.size == 0:
            reason = "the gain never falls 3 dB below the passband gain"
        elif idx[-1] == grid.size - 1:
            reason = "the gain is still 3 dB down at the highest analysed frequency"
        else:
            f3 = _log_crossing(gain_db, level, grid[idx[-1]], grid[idx[-1] + 1])
    elif rt is ResponseType.BANDPASS:
        kc = kp if m.peak_frequency_hz else int(np.argmax(gdb))
        lo_idx = np.nonzero(below[:kc])[0]
        hi_idx = np.nonzero(below[kc:])[0] + kc
        if lo_idx.size == 0 or hi_idx.size == 0:
            reason = "the gain does not fall 3 dB below the passband gain on both sides of the peak"
        else:
            a = lo_idx[-1]
            b = hi_idx[0]
            f3 = [_log_crossing(gain_db, level, grid[a], grid[a + 1]),
                  _log_crossing(gain_db, level, grid[b - 1], grid[b])]
    else:
        idx = np.nonzero(below)[0]
        if idx.size == 0:
            reason = "the gain never falls 3 dB below the passband gain"
        elif idx[0] == 0 or idx[-1] == grid.size - 1:
            reason = "the stopband reaches the end of the analysed frequencies"
        else:
            f3 = [_log_crossing(gain_db, level, grid[idx[0] - 1], grid[idx[0]]),
                  _log_crossing(gain_db, level, grid[idx[-1]], grid[idx[-1] + 1])]
    m.f3db_hz = f3
    if reason:
        m.unavailable["f3db_hz"] = reason

    # passband intervals for ripple / delay variation
    pbs = passbands
    if pbs:
        m.passband_ripple_db = float(pass_max - pass_min)
    else:
        m.unavailable["passband_ripple_db"] = "needs the passband edges (passband_hz)"
        if f3 is not None:
            if rt is ResponseType.LOWPASS:
                pbs = [(0.0, f3)]
            elif rt is ResponseType.HIGHPASS:
                pbs = [(f3, math.inf)]
            elif rt is ResponseType.BANDPASS:
                pbs = [(f3[0], f3[1])]
            else:
                pbs = [(0.0, f3[0]), (f3[1], math.inf)]

    # attenuation at requested frequencies
    att = np.asarray(list(attenuation_at_hz), dtype=float)
    if att.size:
        loss = ref - gain_db(att)
        m.attenuation_db = [{"frequency_hz": float(f), "loss_db": float(v)} for f, v in zip(att, loss)]

    # group delay
    if rt in (ResponseType.LOWPASS, ResponseType.BANDSTOP):
        f_gd = 0.0
    elif rt is ResponseType.BANDPASS:
        band = pbs[0] if pbs else None
        f_gd = math.sqrt(band[0] * band[1]) if band else None
    else:
        f_gd = pbs[0][0] if pbs else None
    if f_gd is None:
        m.unavailable["group_delay_s"] = "needs the passband edges or a half-power frequency"
    else:
        m.group_delay_s = float(delay_s(np.array([f_gd]))[0])
    if pbs:
        m.group_delay_variation_s = delay_variation(delay_s, pbs, grid)
    else:
        m.unavailable["group_delay_variation_s"] = "needs the passband edges or a half-power frequency"
    return m, rt


def step_metrics(sim, m: ResponseMetrics) -> None:
    """Fill the step-response metrics of ``m`` from a :class:`StateSpaceResponse`.

    Every crossing is refined by multisection root finding and the overshoot
    peak by a nested bracket search, both on the exact continuous response
    (:meth:`StateSpaceResponse.refine_roots`, ``refine_peak``), so they do not
    depend on the time step.
    """
    t, y = sim.time_s, sim.step
    yf = sim.final_value
    peak_abs = float(np.max(np.abs(y)))
    has_final = abs(yf) > 1e-9 * max(peak_abs, 1e-300)
    n = t.size
    if has_final:
        r = y / yf
        ref = yf
    else:
        why = "the step response settles to 0 (no DC gain), so it has no final value to overshoot or rise to"
        m.unavailable["overshoot_pct"] = why
        m.unavailable["rise_time_s"] = why
        r = y / peak_abs
        ref = peak_abs

    # crossings: (level, kind) with kind "first_up" (first r >= level) or
    # "settle" (last |r - target| > tol)
    target = 1.0 if has_final else 0.0
    err = np.abs(r - target)
    names, lo, hi, levels, kinds, direct = [], [], [], [], [], {}
    if has_final:
        for name, lev in (("t10", 0.1), ("t90", 0.9)):
            idx = np.nonzero(r >= lev)[0]
            if idx.size == 0:
                direct[name] = None
            elif idx[0] == 0:
                direct[name] = 0.0
            else:
                i = int(idx[0])
                names.append(name); lo.append(t[i - 1]); hi.append(t[i]); levels.append(lev); kinds.append(0)
    for name, tol in (("settling_time_1pct_s", 0.01), ("settling_time_01pct_s", 0.001)):
        out = np.nonzero(err > tol)[0]
        if out.size == 0:
            direct[name] = 0.0
        elif out[-1] == n - 1:
            direct[name] = None
        else:
            i = int(out[-1])
            names.append(name); lo.append(t[i]); hi.append(t[i + 1]); levels.append(tol); kinds.append(1)
    if names:
        lev = np.array(levels)[:, None]
        kind = np.array(kinds)[:, None]

        def g(v):
            v = v / ref
            return np.where(kind == 0, v, np.abs(v - target)) - lev

        roots = sim.refine_roots(np.searchsorted(t, np.array(lo)), g)
        direct.update(zip(names, roots.tolist()))
    for name in ("settling_time_1pct_s", "settling_time_01pct_s"):
        v = direct.get(name)
        if v is None:
            m.unavailable[name] = "the step response has not settled within the time span"
        setattr(m, name, v)
    if not has_final:
        return
    if direct.get("t10") is None or direct.get("t90") is None:
        m.unavailable["rise_time_s"] = "the step response does not reach 90 % within the time span"
    else:
        m.rise_time_s = float(direct["t90"] - direct["t10"])
    k = int(np.argmax(r))
    if r[k] > 1.0:
        peak = sim.refine_peak(k, sign=1.0 if yf > 0 else -1.0) / abs(yf)
        m.overshoot_pct = float(max(peak, r[k]) - 1.0) * 100.0
    else:
        m.overshoot_pct = 0.0
