"""Required op-amp gain-bandwidth product by a vectorized sweep of the macromodel.

A stage circuit is built once with a single-pole op-amp macromodel whose
``gbw_hz`` is an array (one value per trial).  The circuit engine assembles
its MNA matrices ``G + s*C`` for every trial at once; the poles of every trial
then come from one batched eigenvalue problem of the shifted pencil

    (G + s0*C)^-1 C x = mu x,      s = s0 - 1/mu,

with the real shift ``s0 = w0`` (no pole of a stable circuit lies there;
infinite poles map to ``mu = 0``) -- the shift-and-invert form of the
generalized eigenproblem (G. H. Golub and C. F. Van Loan, "Matrix
Computations", 4th ed., 2013, ch. 7; Y. Saad, "Numerical Methods for Large
Eigenvalue Problems", 2nd ed., 2011, ch. 4; both from memory).  The pole pair nearest
the stage's ideal-op-amp poles gives f0 and Q of each trial.

The sweep runs over a geometric grid around the rule-of-thumb figure, then
over a finer grid inside the bracket where the error first stays within the
stated limit; the reported GBW is the upper end of that bracket (it meets the
error; the smallest such GBW lies within one fine step below it).
"""

from __future__ import annotations

import numpy as np

from service.circuit import OpAmpModel
from service.circuit.mna import build_mna
from service.deadline import check as check_deadline

#: Coarse sweep: points, and span below/above the rule-of-thumb figure.
COARSE_POINTS = 16
COARSE_SPAN = (1 / 3, 60.0)
#: Extended spans when the boundary lies outside the coarse span.
EXTENDED_SPAN = (1e-3, 1e4)
#: Fine sweep points inside the bracket.
FINE_POINTS = 12


def poles_over_trials(circuit, w0: float) -> np.ndarray:
    """Finite poles (rad/s) of every trial of ``circuit``.

    Parameters
    ----------
    circuit : service.circuit.Circuit
        With T trials (per-trial element or op-amp model values).
    w0 : float
        Shift (rad/s), positive real, near the circuit's frequencies.

    Returns
    -------
    ndarray, complex, shape (T, n)
        Poles of each trial; infinite ones are returned as NaN.
    """
    system = build_mna(circuit)
    g, c = system.stamp()
    a = g + w0 * c
    m = np.linalg.solve(a, c)                     # (T, n, n)
    mu = np.linalg.eigvals(m)                      # (T, n)
    tiny = np.abs(mu) * w0 < 1e-12 * np.max(np.abs(mu) * w0, axis=1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = w0 - 1.0 / mu
    return np.where(tiny | ~np.isfinite(s), np.nan + 0j, s)


def dominant_figures(poles: np.ndarray, ref_poles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """f0 (Hz) and Q of the pole(s) of each trial nearest ``ref_poles``.

    Parameters
    ----------
    poles : ndarray, shape (T, n), complex (NaN for none)
    ref_poles : ndarray, shape (1,) or (2,), complex
        The stage's poles with ideal op-amps.

    Returns
    -------
    f0_hz : ndarray, shape (T,)
    q : ndarray, shape (T,) (NaN for first order)
    """
    p = np.where(np.isnan(poles), np.inf, poles)
    scale = max(abs(ref_poles[0]), 1e-30)
    d1 = np.abs(p - ref_poles[0]) / scale
    i1 = np.argmin(d1, axis=1)
    rows = np.arange(p.shape[0])
    p1 = p[rows, i1]
    if ref_poles.size == 1:
        return -p1.real / (2 * np.pi), np.full(p.shape[0], np.nan)
    d2 = np.abs(p - ref_poles[1]) / scale
    d2[rows, i1] = np.inf
    p2 = p[rows, np.argmin(d2, axis=1)]
    w0 = np.sqrt(np.abs((p1 * p2).real))
    q = w0 / -(p1 + p2).real
    return w0 / (2 * np.pi), q


def sweep_errors(build, gbw_hz: np.ndarray, ref: dict, ref_poles: np.ndarray, a0: float, rout_ohm: float
                 ) -> np.ndarray:
    """Worst of |f0/f0_ref - 1| and |Q/Q_ref - 1| for each GBW (Hz), shape (T,)."""
    check_deadline("realization.gbw")
    model = OpAmpModel(gbw_hz=np.asarray(gbw_hz, dtype=float), a0=a0, rout_ohm=rout_ohm)
    circuit = build(model)
    w_ref = 2 * np.pi * ref["f0_hz"]
    f0, q = dominant_figures(poles_over_trials(circuit, w_ref), ref_poles)
    err = np.abs(f0 / ref["f0_hz"] - 1)
    if ref.get("q") is not None:
        err = np.maximum(err, np.abs(q / ref["q"] - 1))
    return np.where(np.isfinite(err), err, np.inf)


def required_gbw_sweep(build, ref: dict, ref_poles: np.ndarray, error: float, rule_hz: float, *,
                       a0: float, rout_ohm: float = 0.0) -> float | None:
    """Smallest swept GBW (Hz) whose macromodel keeps f0 and Q within ``error`` of ``ref``.

    Parameters
    ----------
    build : callable
        ``OpAmpModel -> Circuit`` of the stage (input ``VIN`` at ``in``).
    ref : dict
        The stage's ideal-op-amp figures (``f0_hz``, ``q``).
    ref_poles : ndarray, complex
        The stage's ideal-op-amp poles (rad/s).
    error : float
        Allowed relative error.
    rule_hz : float
        Rule-of-thumb GBW (Hz), the centre of the first sweep.
    a0 : float
        Open-loop DC gain of the macromodel (V/V).

    Returns
    -------
    float or None
        None when no GBW up to ``1e4 * rule_hz`` meets ``error`` (the
        open-loop gain alone breaks it).
    """
    def bracket(lo, hi, n):
        g = np.geomspace(lo, hi, n)
        ok = sweep_errors(build, g, ref, ref_poles, a0, rout_ohm) <= error
        if ok.all():
            return g, ok, "below"
        if not ok[-1]:
            return g, ok, "above"
        last_bad = int(np.nonzero(~ok)[0][-1])
        return g[last_bad:last_bad + 2], ok, "inside"

    g, ok, where = bracket(rule_hz * COARSE_SPAN[0], rule_hz * COARSE_SPAN[1], COARSE_POINTS)
    if where == "above":
        g, ok, where = bracket(rule_hz * COARSE_SPAN[1], rule_hz * EXTENDED_SPAN[1], COARSE_POINTS)
        if where == "above":
            return None
        if where == "below":
            return float(rule_hz * COARSE_SPAN[1])
    elif where == "below":
        g, ok, where = bracket(rule_hz * EXTENDED_SPAN[0], rule_hz * COARSE_SPAN[0], COARSE_POINTS)
        if where == "below":
            return float(g[0])
        if where == "above":
            return float(rule_hz * COARSE_SPAN[0])
    fine, ok, where = bracket(g[0], g[1], FINE_POINTS)
    if where == "inside":
        return float(fine[1])
    if where == "below":
        return float(fine[0])
    return float(g[1])
