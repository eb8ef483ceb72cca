"""``run_tolerance``: Monte Carlo, sensitivity, worst case and yield of a realized design.

The yield counts the trials the verifier (:func:`service.response.verification.verify`)
finds meeting the criteria on the whole band -- each trial's circuit, with its
part values and op-amp models, judged exactly as a design is.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from service.approximation.types import ResponseType
from service.circuit import ac_response, prepare_ac
from service.errors import LimitExceeded
from service.realization.analysis import StagePlan, cascade_circuit, design_roots
from service.realization.conditioning import check_plans
from service.response import resolve_frequencies
from service.response.verification import Band, Criteria, verify
from service.response.metrics import infer_response_type
from service.tolerance import figures as fig
from service.tolerance.errors import ToleranceError
from service.tolerance.grids import HALF_POWER_DB, build_grids, crossings
from service.tolerance.montecarlo import monte_carlo
from service.tolerance.result import ToleranceResult
from service.tolerance.sampling import (REFERENCE_TEMPERATURE_C, draw, resolve_distribution, resolve_temperature,
                                        varied_parts)
from service.tolerance.sensitivity import magnitude_sensitivity, rank, stage_sensitivity, worst_case, _key
from service.tolerance.statistics import summary, wilson_interval

DEFAULT_TRIALS = 1000
DEFAULT_MAX_TRIALS = 100_000
DEFAULT_MEMORY_LIMIT_BYTES = 512 * 2**20
#: Most trials whose values and figures are returned one by one.
MAX_INCLUDED_TRIALS = 1000
#: How closely a trial's worst margin is located (dB); its pass/fail is proved to 1e-9 dB regardless.
TRIAL_PRECISION_DB = 1e-3
#: Points of the dense nominal sweep that places the 3 dB windows.
NOMINAL_POINTS = 2000


@dataclass(frozen=True)
class Outputs:
    """The parts of the result a run computes (every part by default; a part not asked for is not computed).

    Attributes
    ----------
    phase : bool
        Phase and group-delay percentiles (else NaN).
    figures : bool
        Per-trial figures (3 dB frequency, ripple, edge losses, stage f0 and Q), their summaries in
        ``metrics`` and the included trials (else empty).
    yield_ : bool
        The yield, every trial verified against the criteria (else None).
    sensitivity : bool
        Sensitivities, and with ``figures`` the worst case (else empty).
    """

    phase: bool = True
    figures: bool = True
    yield_: bool = True
    sensitivity: bool = True


#: Everything: the JSON reply.
EVERYTHING = Outputs()


def _int(value, name: str, lo: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < lo:
        raise ToleranceError(f"{name} must be an integer >= {lo}, got {value!r}", field=name)
    return int(value)


def _response_type(response: str | None, circuit, dense: np.ndarray) -> ResponseType:
    """The given response type, or the one the nominal response on ``dense`` (Hz) shows (evaluated only then)."""
    try:
        return ResponseType(response)
    except ValueError:
        g = fig.gain_db(ac_response(circuit, dense, output="out"))[0]
        return infer_response_type(float(g[0]), float(g[-1]), float(np.max(g)))


def run_tolerance(plans: list[StagePlan], *, draw_order: Sequence[str] = (), response: str | None = None,
                  trials: int = DEFAULT_TRIALS, seed: int = 0,
                  distribution: str | dict = "gaussian", temperature: dict | None = None,
                  tempco_ppm_per_c: dict | None = None, gbw_spread: float | None = None,
                  frequencies_hz, criteria: Criteria | None = None, sensitivity_frequencies_hz: Sequence[float] = (),
                  include_trials: int = 0, memory_limit_bytes: int = DEFAULT_MEMORY_LIMIT_BYTES,
                  max_trials: int = DEFAULT_MAX_TRIALS, max_frequency_points: int = 10_000,
                  chunk_trials: int | None = None, store_budget_bytes: int | None = None,
                  precision_db: float = TRIAL_PRECISION_DB, outputs: Outputs = EVERYTHING,
                  checked_plans: bool = False) -> ToleranceResult:
    """Monte Carlo analysis, sensitivities, worst case and yield of a design.

    Parameters
    ----------
    plans : list of StagePlan
        The design's stages; each part's ``tolerance`` (relative) or the
        default of its kind (:data:`service.tolerance.sampling.DEFAULT_TOLERANCE`:
        1 % R, 5 % C).
    draw_order : sequence of str
        Refs of the passive parts in the order their deviates are drawn
        (the design document's order); parts not listed follow.
    response : str or None
        The response type (inferred from the nominal response when None).
    trials : int
        Monte Carlo trials, 1 ... ``max_trials``.
    seed : int
        Seed of ``numpy.random.Generator(PCG64(seed))``; same request and
        seed, same numbers.
    distribution : str or dict
        ``"uniform"`` (within +-tolerance), ``"gaussian"`` (tolerance = 3
        sigma), or ``{"resistor": ..., "capacitor": ..., "opamp": ...}``.
    temperature : dict or None
        ``{"min_c", "max_c"}`` (degC): one board temperature per trial,
        uniform over the range.
    tempco_ppm_per_c : dict or None
        Temperature-coefficient bounds (ppm/degC) by ref, dielectric or kind;
        defaults in :data:`service.tolerance.sampling.DEFAULT_TEMPCO_PPM_PER_C`.
    gbw_spread : float or None
        Relative op-amp GBW tolerance (0.3 = +-30 %), distribution of kind
        ``opamp``; only op-amps with a ``gbw_hz`` vary.
    frequencies_hz : array_like or FrequencyGrid
        Grid (Hz) of the percentiles; should contain the mask edges.
    criteria : Criteria or None
        The requirement for the yield (verified per trial), ripple, attenuation and worst case.
    sensitivity_frequencies_hz : sequence of float
        Frequencies (Hz) of the magnitude sensitivities; default the requirement's edges.
    include_trials : int
        Return the values and figures of the first N trials (N <= 1000).
    memory_limit_bytes : int
        Bound on the working memory of the sweep (bytes).
    max_trials, max_frequency_points : int
        Configured limits (``ROLLOFF_MAX_TRIALS``, ``ROLLOFF_MAX_FREQUENCY_POINTS``).
    chunk_trials : int or None
        Trials processed at once (at least 64; bounded by the memory limit);
        the numbers do not depend on it.
    store_budget_bytes : int or None
        Bound of the per-frequency stores (default 160 MiB); larger runs are
        split into frequency blocks.  Numbers are identical for a given
        budget (see :mod:`service.tolerance.montecarlo`).
    precision_db : float
        How closely each trial's worst margin is located (dB); the pass/fail of
        a trial is proved to the verifier's tolerance whatever this is.
    outputs : Outputs
        The parts to compute (default all); the parts computed are the same
        numbers whatever else is asked.
    checked_plans : bool
        The plans already passed :func:`service.realization.conditioning.check_plans`
        (a design document's plans do): the check is not repeated.

    Returns
    -------
    ToleranceResult

    Raises
    ------
    LimitExceeded
        ``trials`` above ``max_trials`` (``limit="max_trials"``) or too many frequencies.
    ToleranceError, InvalidDocument, InvalidGrid
        With ``field`` naming the request field.
    """
    trials = _int(trials, "trials", 1)
    if trials > max_trials:
        raise LimitExceeded(f"trials: {trials} requested, at most {max_trials} allowed", limit="max_trials",
                            value=max_trials, setting="ROLLOFF_MAX_TRIALS", field="trials")
    seed = _int(seed, "seed", 0)
    include_trials = _int(include_trials, "include_trials", 0)
    if include_trials > min(trials, MAX_INCLUDED_TRIALS):
        raise ToleranceError(f"include_trials must not exceed trials or {MAX_INCLUDED_TRIALS}, got {include_trials}",
                             field="include_trials")
    if chunk_trials is not None:
        chunk_trials = _int(chunk_trials, "chunk_trials", 1)
    memory_limit_bytes = _int(memory_limit_bytes, "memory_limit_bytes", 2**20)
    if criteria is not None and not isinstance(criteria, Criteria):
        raise ToleranceError("criteria must be a Criteria", field="mask")
    f = resolve_frequencies(frequencies_hz, max_frequency_points)
    dist = resolve_distribution(distribution)
    temp = resolve_temperature(temperature)

    if not checked_plans:
        check_plans(plans)
    circuit = cascade_circuit(plans)
    parts = varied_parts(plans, draw_order, dist, tempco_ppm_per_c, gbw_spread)
    samples = draw(parts, trials, seed, temp)

    # nominal sweep: response type and where the 3 dB windows go
    pos = f[f > 0]
    lo, hi = (pos.min(), pos.max()) if pos.size else (1.0, 1e6)
    dense = np.unique(np.concatenate([np.geomspace(lo, hi, NOMINAL_POINTS), f]))
    response = _response_type(response, circuit, dense)
    if sensitivity_frequencies_hz is None or len(sensitivity_frequencies_hz) == 0:
        sens_f = np.array(sorted({e for s in (criteria.limits if criteria else ()) for e in (s.start_hz, s.stop_hz)
                                  if math.isfinite(e) and e > 0}))
    else:
        sens_f = np.asarray(sensitivity_frequencies_hz, dtype=float).ravel()
        if not np.all(np.isfinite(sens_f) & (sens_f > 0)):
            raise ToleranceError("sensitivity_frequencies_hz must be positive frequencies (Hz)",
                                 field="sensitivity_frequencies_hz")
    pre = build_grids(dense, response, criteria, [], 0.0, sens_f)
    nominal_ac = prepare_ac(circuit, pre.metric_hz, output="out")      # one trial: coefficients reused below
    p_pre = fig.power(nominal_ac.response())
    g_pre = fig.db(p_pre)
    ref_pre = fig.reference_gain(p_pre, pre)
    pos_pre = pre.metric_hz > 0
    f3_nom = crossings(pre.metric_hz[pos_pre], g_pre[0, pos_pre], float(ref_pre[0]) - HALF_POWER_DB, response)
    span = max([p.tolerance + p.tempco_ppm_per_c * 1e-6 * (0 if temp is None else max(
        abs(temp[0] - REFERENCE_TEMPERATURE_C), abs(temp[1] - REFERENCE_TEMPERATURE_C))) for p in parts] + [0.0])
    grids = build_grids(f, response, criteria, f3_nom, 4.0 * span, sens_f)

    h_nom = nominal_ac.on_grid(grids.metric_hz).response()
    p_nom = fig.power(h_nom)
    g_nom = fig.db(p_nom)
    ref_nom = float(fig.reference_gain(p_nom, grids)[0])
    nominal = h_nom[0, grids.caller_columns]
    phase_nom = np.unwrap(np.angle(nominal))

    sweep = monte_carlo(circuit, samples, trials, grids, nominal, phase_nom, memory_limit_bytes=memory_limit_bytes,
                        chunk_trials=chunk_trials, store_budget_bytes=store_budget_bytes, phase=outputs.phase,
                        figures=outputs.figures)
    tf = sweep.figures

    # metrics
    metrics: dict = {}
    stage_figs = []
    edge_loss = None
    if tf is not None:
        metrics, stage_figs, edge_loss = _metrics(plans, samples, grids, tf)

    # yield: every trial verified on the whole band, as a design is
    yld = None
    verdicts = None
    if criteria is not None and outputs.yield_:
        roots = design_roots(plans, samples.values)
        verdicts = verify(roots, criteria, precision_db=precision_db, nominal=design_roots(plans),
                          located_trials=include_trials)
        ok = verdicts.segment_met()                                         # (T, S)
        passed = verdicts.meets()
        n_pass = int(passed.sum())
        lo_ci, hi_ci = wilson_interval(n_pass, trials)
        fails = []
        for j, lim in enumerate(criteria.limits):
            margins = verdicts.margin_db[:, j]
            # where the worst of the trials whose margin the search located has it (a bounded trial has none)
            located = np.flatnonzero(np.isfinite(verdicts.worst_hz[:, j]) & np.isfinite(margins))
            k = int(located[np.argmin(margins[located])]) if located.size else None
            fails.append({
                "segment": j, "band": lim.band.value, "start_hz": lim.start_hz,
                "stop_hz": lim.stop_hz if math.isfinite(lim.stop_hz) else None, "limit_db": lim.limit_db,
                "failures": int((~ok[:, j] & verdicts.stable).sum()),
                "worst_margin_db": float(np.nanmin(margins)) if np.isfinite(margins).any() else None,
                "worst_trial": None if k is None else {
                    "trial": k, "frequency_hz": float(verdicts.worst_hz[k, j]),
                    "loss_db": float(verdicts.loss_db[k, j]), "margin_db": float(margins[k])}})
        if criteria.delay is not None:
            dm = verdicts.delay_margin_pct
            fails.append({"segment": None, "band": "group_delay", "start_hz": 0.0, "stop_hz": criteria.delay.stop_hz,
                          "limit_pct": criteria.delay.max_deviation_pct,
                          "failures": int(((dm < 0) & verdicts.stable).sum()),
                          "worst_margin_pct": float(np.nanmin(dm)) if np.isfinite(dm).any() else None})
        unstable = int((~verdicts.stable).sum())
        fails.sort(key=lambda r: (-r["failures"], -1 if r["segment"] is None else r["segment"]))
        yld = {"fraction": n_pass / trials, "ci95_low": lo_ci, "ci95_high": hi_ci, "trials": trials,
               "passed": n_pass, "unstable": unstable, "failures_by_criterion": fails,
               "unresolved": int(np.sum(np.nan_to_num(verdicts.unresolved_db) > 0)),
               "interval": "Wilson score, 95 % (E. B. Wilson, JASA 22 (1927) 209-212)",
               "verdict": "each trial verified on the whole band like a design (stability, every segment, delay)"}

    # sensitivity and worst case (nominal values, 25 degC)
    sens, wc = [], []
    edge_f = np.array([e.frequency_hz for e in grids.edges])
    if outputs.sensitivity:
        all_f = np.unique(np.concatenate([sens_f, edge_f]))
        mag_all = magnitude_sensitivity(circuit, parts, all_f, max(2**20, memory_limit_bytes // 4))
        mag_sens = mag_all[:, np.searchsorted(all_f, sens_f)] if sens_f.size else mag_all[:, :0]
        sens = rank(parts, stage_sensitivity(plans, parts), mag_sens, sens_f)
    if outputs.sensitivity and tf is not None and grids.edges:
        nominal_edge_loss = ref_nom - g_nom[0, [e.column for e in grids.edges]]
        wc = worst_case(circuit, parts, grids, mag_all[:, np.searchsorted(all_f, edge_f)], nominal_edge_loss,
                        edge_loss, max(2**20, memory_limit_bytes // 4))

    # the first trials, one by one
    rows = []
    for i in range(include_trials if tf is not None else 0):
        r = {"trial": i, "values": {p.ref if p.kind != "opamp" else p.key: float(samples.values[p.key][i])
                                    for p in parts}}
        r["temperature_c"] = None if samples.temperature_c is None else float(samples.temperature_c[i])
        if tf.f3db_hz.ndim == 1:
            r["f3db_hz"] = _finite_or_none(tf.f3db_hz[i])
        else:
            r["f3db_low_hz"], r["f3db_high_hz"] = (_finite_or_none(x) for x in tf.f3db_hz[i])
        r["passband_ripple_db"] = None if tf.ripple_db is None else float(tf.ripple_db[i])
        r["reference_gain_db"] = float(tf.reference_gain_db[i])
        r["edges"] = [{"frequency_hz": e.frequency_hz, "band": e.band, "gain_db": float(tf.edge_gain_db[i, j]),
                       "loss_db": float(edge_loss[i, j])} for j, e in enumerate(grids.edges)]
        r["stages"] = [{"f0_hz": float(f0[i]), "q": None if q is None else float(q[i])} for f0, q in stage_figs]
        if verdicts is not None:
            r["margins_db"] = [_finite_or_none(x) for x in verdicts.margin_db[i]]
            r["stable"] = bool(verdicts.stable[i])
            r["passes"] = bool(passed[i])
        else:
            r["passes"] = None
        rows.append(r)

    notes = {
        "nominal_reference_gain_db": ref_nom,
        "group_delay": "closed form from each trial's transfer-function polynomials and their derivatives "
                       "(a central difference of the phase, step 1e-5 f, where the output is not one rational "
                       "function)",
        "stage_figures": "closed form of each topology with the sampled values, ideal op-amps",
        "sensitivity": "magnitude: central differences (h = 1e-4) with the circuit engine; stage f0 and Q: "
                       "complex-step derivative of the topology's closed form",
        "gaussian": "tolerance read as 3 sigma, deviates truncated at 6 sigma",
        "percentiles": "Hyndman and Fan (1996) definition 7",
        "verdict": "per trial, the whole-band verifier of the designs (interval bounds on each trial's poles and "
                   f"zeros), margins located to {precision_db:g} dB, pass/fail proved to 1e-9 dB",
        "engine_tile_trials": sweep.tile,          # default trials per chunk (speed only)
        "frequency_blocks": sweep.blocks,
        "reference_temperature_c": REFERENCE_TEMPERATURE_C,
    }
    temp_out = None if temp is None else {"min_c": temp[0], "max_c": temp[1]}
    return ToleranceResult(
        frequency_hz=f, magnitude_db=sweep.magnitude_db, phase_deg=sweep.phase_deg,
        group_delay_s=sweep.group_delay_s, nominal_magnitude_db=g_nom[0, grids.caller_columns],
        metrics=metrics, yield_=yld, sensitivity=sens, worst_case=wc, trials=rows, distribution=dist, seed=seed,
        temperature=temp_out, trial_count=trials, criteria=criteria, notes=notes)


def _metrics(plans, samples, grids, tf) -> tuple[dict, list, np.ndarray]:
    """Summaries of the per-trial figures; each stage's closed-form f0 and Q per trial; losses at the edges (T, E)."""
    metrics: dict = {}
    if tf.f3db_hz.ndim == 1:
        metrics["f3db_hz"] = summary(tf.f3db_hz)
    else:
        metrics["f3db_low_hz"] = summary(tf.f3db_hz[:, 0])
        metrics["f3db_high_hz"] = summary(tf.f3db_hz[:, 1])
    metrics["passband_ripple_db"] = summary(tf.ripple_db) if tf.ripple_db is not None else None
    edge_loss = tf.reference_gain_db[:, None] - tf.edge_gain_db          # (T, E)
    metrics["attenuation_db"] = {_key(e.frequency_hz): summary(edge_loss[:, j])
                                 for j, e in enumerate(grids.edges) if e.band == "stopband"}
    stage_figs = []
    for k, plan in enumerate(plans):
        vals = {c.role: samples.values[c.ref] for c in plan.components}
        a = plan.topology.achieved(plan.section, plan.strategy, vals)
        entry = {"f0_hz": summary(a["f0_hz"])}
        entry["q"] = summary(a["q"]) if plan.section.order == 2 else None
        stage_figs.append((a["f0_hz"], a["q"] if plan.section.order == 2 else None))
        metrics.setdefault("stages", []).append(entry)
    return metrics, stage_figs, edge_loss


def _finite_or_none(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


__all__ = ["run_tolerance", "Outputs", "EVERYTHING", "DEFAULT_TRIALS", "DEFAULT_MAX_TRIALS", "MAX_INCLUDED_TRIALS"]
