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
#: Largest relative f0/Q shift (by the op-amp) that predistortion is relied on to undo.
#: common practice (no source): beyond a few tens of percent the op-amp's pole takes part
#: in the stage's response and a first-order correction no longer describes it.
PREDISTORTION_MAX_SHIFT = 0.25
#: Relative spread of an op-amp type's gain-bandwidth product (parts, supply, temperature)
#: that a predistorted stage must tolerate.
#: common practice (no source): data sheets give GBW as a typical figure; +-30 % covers the usual spread.
GBW_SPREAD = 0.3


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


def spread_errors(build, gbw_hz: np.ndarray, ref: dict, ref_poles: np.ndarray, a0: float, rout_ohm: float,
                  spread: float) -> np.ndarray:
    """Error left after predistortion for each nominal GBW (Hz), shape (T,).

    A stage predistorted for a nominal GBW ``g`` reaches its target there;
    when the part's GBW is ``g (1 +- spread)`` instead, f0 and Q move by the
    difference of the macromodel's figures between the two GBWs (to first
    order in the op-amp's effect).  Returned: the worst of
    ``|f0(g (1 +- spread))/f0(g) - 1|`` and the same for Q.
    """
    g = np.asarray(gbw_hz, dtype=float)
    t = g.size
    model = OpAmpModel(gbw_hz=np.concatenate([g, g * (1 - spread), g * (1 + spread)]), a0=a0, rout_ohm=rout_ohm)
    circuit = build(model)
    f0, q = dominant_figures(poles_over_trials(circuit, 2 * np.pi * ref["f0_hz"]), ref_poles)
    f0 = f0.reshape(3, t)
    err = np.max(np.abs(f0[1:] / f0[0] - 1), axis=0)
    shift = np.abs(f0[0] / ref["f0_hz"] - 1)
    if ref.get("q") is not None:
        q = q.reshape(3, t)
        err = np.maximum(err, np.max(np.abs(q[1:] / q[0] - 1), axis=0))
        shift = np.maximum(shift, np.abs(q[0] / ref["q"] - 1))
    err = np.where(shift <= PREDISTORTION_MAX_SHIFT, err, np.inf)
    return np.where(np.isfinite(err), err, np.inf)


def required_gbw_sweep(build, ref: dict, ref_poles: np.ndarray, error: float, rule_hz: float, *,
                       a0: float, rout_ohm: float = 0.0, spread: float | None = None) -> float | None:
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
    rout_ohm : float
        Open-loop output resistance of the macromodel (ohm).
    spread : float or None
        None: the stage is used as designed (no predistortion), the error
        is the macromodel's deviation from ``ref`` (:func:`sweep_errors`).
        A relative spread: the stage is predistorted for the nominal GBW
        and the error is what the GBW's own spread leaves
        (:func:`spread_errors`).

    Returns
    -------
    float or None
        None when no GBW up to ``1e4 * rule_hz`` meets ``error`` (the
        open-loop gain alone breaks it).
    """
    def errors(g):
        if spread is None:
            return sweep_errors(build, g, ref, ref_poles, a0, rout_ohm)
        return spread_errors(build, g, ref, ref_poles, a0, rout_ohm, spread)

    def bracket(lo, hi, n):
        g = np.geomspace(lo, hi, n)
        ok = errors(g) <= error
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


def _shift_invert_eigs(a: np.ndarray, b: np.ndarray, w0: float) -> np.ndarray:
    """Finite eigenvalues ``s`` of the batched pencils ``a x = -s b x`` (rad/s), NaN for infinite ones.

    ``(a + w0 b)^-1 b x = mu x`` gives ``s = w0 - 1/mu`` (see the module docstring).
    """
    m = np.linalg.solve(a + w0 * b, b)
    mu = np.linalg.eigvals(m)
    tiny = np.abs(mu) * w0 < 1e-12 * np.max(np.abs(mu) * w0, axis=1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = w0 - 1.0 / mu
    return np.where(tiny | ~np.isfinite(s), np.nan + 0j, s)


def _nearest_pair(roots: np.ndarray, targets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """For each trial the two roots nearest ``targets[0]`` and ``targets[1]`` (distinct), shape (T,) each."""
    r = np.where(np.isnan(roots), np.inf, roots)
    scale = max(abs(targets[0]), 1e-30)
    rows = np.arange(r.shape[0])
    d1 = np.abs(r - targets[0]) / scale
    i1 = np.argmin(d1, axis=1)
    d2 = np.abs(r - targets[1]) / scale
    d2[rows, i1] = np.inf
    return r[rows, i1], r[rows, np.argmin(d2, axis=1)]


def figures_over_trials(circuit, section, output: str = "out") -> dict[str, np.ndarray]:
    """Standard-form figures of every trial of a stage circuit (op-amp macromodels included).

    The poles (and, for the notch kinds, the zeros) come from batched
    shift-and-invert eigenvalue problems of the MNA pencil and of the
    Rosenbrock system matrix ``[[G + sC, -b], [e_out^T, 0]]`` (zeros as
    generalized eigenvalues: A. Emami-Naeini, P. Van Dooren, "Computation
    of zeros of linear multivariable systems", Automatica 18 (1982) 415-430,
    from memory); the pair nearest the section's own poles (zeros) gives
    f0 and Q (fz).  The gain is read as :func:`service.realization.fit.fit_section`
    does: ``H(s0)`` over the standard shape at ``s0 = 0`` for the lowpass and
    notch kinds and ``s0 = j w0`` (achieved) otherwise, ``H`` from a batched solve.

    Parameters
    ----------
    circuit : service.circuit.Circuit
        The stage driven at ``in``, with T trials (per-trial part values or models).
    section : Section
        The target: its kind and order say which roots to match.

    Returns
    -------
    dict of str to ndarray, shape (T,)
        ``f0_hz`` (Hz), ``q`` (NaN for first order), ``gain`` and, for the
        notch kinds, ``fz_hz`` (Hz) and ``zero_damping`` (the zero pair's
        damping ratio).  NaN where a trial has no such root.
    """
    from service.approximation.types import SectionKind
    from service.realization.fit import target_poles, target_zeros

    system = build_mna(circuit)
    g, c = system.stamp()
    t, n = g.shape[0], g.shape[1]
    out = system.node_index[output]
    w0 = 2 * np.pi * section.f0_hz
    ref = target_poles(section)
    poles = _shift_invert_eigs(g, c, w0)
    if section.order == 1:
        p = np.where(np.isnan(poles), np.inf, poles)
        p1 = p[np.arange(t), np.argmin(np.abs(p - ref[0]), axis=1)]
        f0 = -p1.real / (2 * np.pi)
        q = np.full(t, np.nan)
        w = -p1.real
    else:
        p1, p2 = _nearest_pair(poles, ref)
        w = np.sqrt(np.abs((p1 * p2).real))
        with np.errstate(invalid="ignore", divide="ignore"):
            q = w / -(p1 + p2).real
        f0 = w / (2 * np.pi)
    res = {"f0_hz": f0, "q": q}
    kind = section.kind
    notch = kind in (SectionKind.NOTCH, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH)
    fz = None
    if notch:
        a = np.zeros((t, n + 1, n + 1))
        b = np.zeros((t, n + 1, n + 1))
        a[:, :n, :n] = g
        a[:, system.rhs_row, n] = -1.0
        a[:, n, out] = 1.0
        b[:, :n, :n] = c
        zeros = _shift_invert_eigs(a, b, w0)
        z1, z2 = _nearest_pair(zeros, target_zeros(section))
        wz = np.sqrt(np.abs((z1 * z2).real))
        fz = wz / (2 * np.pi)
        res["fz_hz"] = fz
        with np.errstate(invalid="ignore", divide="ignore"):
            res["zero_damping"] = -(z1 + z2).real / (2 * wz)
    dc = kind == SectionKind.LOWPASS or notch
    s0 = np.zeros(t, dtype=complex) if dc else 1j * w
    rhs = np.zeros((t, n), dtype=complex)
    rhs[:, system.rhs_row] = 1.0
    # The standard shape at s0 (closed forms of service.realization.fit.standard_shape there):
    # 1 at DC for lowpass and notch kinds; at s0 = j w: j Q (highpass), 1 (bandpass), j/(1 + j) (first-order highpass).
    if dc:
        shape = np.ones(t, dtype=complex)
    elif kind == SectionKind.HIGHPASS and section.order == 2:
        shape = 1j * q
    elif kind == SectionKind.HIGHPASS:
        shape = np.full(t, 1j / (1 + 1j))
    else:
        shape = np.ones(t, dtype=complex)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        s0 = np.where(np.isfinite(s0), s0, 0.0)
        h = np.linalg.solve(g + s0[:, None, None] * c, rhs[..., None])[:, out, 0]
        res["gain"] = np.real(h / shape)
    return res
