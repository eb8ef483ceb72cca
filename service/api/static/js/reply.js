// Every read of a reply field happens here, so a change in the service's replies is one edit.
// Design document: /v1/designs and /v1/designs/evaluate. Comparison: /v1/approximations/compare.
// Response: /v1/responses. Tolerance: /v1/tolerance.

const finite = (x) => typeof x === "number" && Number.isFinite(x);

/**
 * The verdict of a design: meets, worst margin (dB) and where, one row per checked edge.
 * Reads `verdict` when the service gives one, otherwise `summary` (meets + edges).
 */
export function verdictOf(doc) {
  const v = doc.verdict;
  const edges = ((doc.summary && doc.summary.edges) || []).map((e) => ({
    frequencyHz: e.frequency_hz, band: e.band, lossDb: e.loss_db, requiredDb: e.required_db, marginDb: e.margin_db,
  }));
  let worst = null;
  for (const e of edges) if (finite(e.marginDb) && (worst === null || e.marginDb < worst.marginDb)) worst = e;
  if (v && typeof v === "object") {
    return {
      meets: typeof v.meets === "boolean" ? v.meets : (doc.summary ? doc.summary.meets : null),
      worstMarginDb: finite(v.worst_margin_db) ? v.worst_margin_db : (worst ? worst.marginDb : null),
      worstFrequencyHz: finite(v.worst_frequency_hz) ? v.worst_frequency_hz : (worst ? worst.frequencyHz : null),
      unstable: v.stable === false || v.unstable === true,
      edges,
    };
  }
  return {
    meets: doc.summary ? doc.summary.meets : null,
    worstMarginDb: worst ? worst.marginDb : null,
    worstFrequencyHz: worst ? worst.frequencyHz : null,
    unstable: false,
    edges,
  };
}

/**
 * The verdict once the response's whole-band mask check is known: the design meets only if both the
 * design's own verdict and the check over every frequency (GET the mask from /v1/responses) say so.
 */
export function withWholeBand(v, mask) {
  if (!mask) return { ...v, wholeBand: null };
  const wholeBand = { pass: mask.pass, worstMarginDb: mask.worstMarginDb, worstFrequencyHz: mask.worstFrequencyHz };
  const meets = v.meets === null ? mask.pass : v.meets && mask.pass;
  const useMask = mask.pass === false && (v.worstMarginDb === null || mask.worstMarginDb < v.worstMarginDb);
  return {
    ...v, meets, wholeBand,
    worstMarginDb: useMask ? mask.worstMarginDb : v.worstMarginDb,
    worstFrequencyHz: useMask ? mask.worstFrequencyHz : v.worstFrequencyHz,
  };
}

/** Stages numbered from 1, with what the page shows of each. */
export function stagesOf(doc) {
  return (doc.stages || []).map((st, i) => {
    const sec = st.section || {};
    const ach = st.achieved || {};
    const req = st.opamp_requirement || {};
    return {
      number: i + 1,
      kind: sec.kind, order: sec.order, f0Hz: sec.f0_hz, q: sec.q, fzHz: sec.fz_hz, gain: sec.gain,
      topology: st.topology, strategy: st.strategy,
      f0Error: ach.f0_error, qError: ach.q_error,
      gbwRequiredHz: req.gbw_required_hz, slewRequired: req.slew_required_v_per_us,
      peakGainDb: st.peak_gain_db,
      components: (st.components || []).map((c) => ({
        ref: c.ref, kind: c.kind, value: c.value, tolerance: c.tolerance, dielectric: c.dielectric, partId: c.part_id,
      })),
      opamps: (st.opamps || []).map((u) => ({ ref: u.ref, gbwHz: u.gbw_hz, partId: u.part_id })),
    };
  });
}

/** Cautions of the design: [{code, message}]. */
export function warningsOf(doc) {
  return (doc.warnings || []).map((w) => ({ code: w.code, message: w.message }));
}

export function netlistOf(doc) { return doc.netlist || ""; }
export function familyOf(doc) { return doc.family; }
export function orderOf(doc) { return doc.order; }
export function responseTypeOf(doc) { return doc.response; }
export function requirementOf(doc) { return doc.requirement || null; }

/** The comparison table: rows and the family the service recommends. */
export function comparisonOf(cmp) {
  return {
    recommended: cmp.recommended || null,
    reason: cmp.recommended_reason || "",
    rows: (cmp.families || []).map((f) => ({
      family: f.family, meets: !!f.meets, order: f.order, maxQ: f.max_q, marginDb: f.margin_db,
      overshootPct: f.overshoot_pct, delayVariationS: f.group_delay_variation_s, settlingS: f.settling_time_1pct_s,
      withinLimits: f.within_limits, reason: f.reason,
    })),
  };
}

/** Mask segments of a response reply (loss bounds, dB), its reference gain and worst point. */
export function maskResultOf(resp) {
  const m = resp.mask_result;
  if (!m) return null;
  return {
    pass: m.pass, worstMarginDb: m.worst_margin_db, worstFrequencyHz: m.worst_frequency_hz,
    referenceGainDb: m.reference_gain_db,
    segments: (m.segments || []).map((s) => ({
      startHz: s.start_hz, stopHz: s.stop_hz, maxLossDb: s.max_loss_db, minLossDb: s.min_loss_db,
      worstMarginDb: s.worst_margin_db, worstFrequencyHz: s.worst_frequency_hz, pass: s.pass,
    })),
  };
}

/** Frequency (Hz) and magnitude (dB) of a response reply. */
export function curveOf(resp) {
  return { frequencyHz: resp.frequency_hz || [], magnitudeDb: resp.magnitude_db || [] };
}

/** A tolerance reply: percentile curves (dB), nominal, mask, yield with its interval. */
export function toleranceOf(tol) {
  const p = tol.magnitude_db_percentiles || {};
  const y = tol.yield || null;
  const mask = tol.mask || null;
  return {
    frequencyHz: tol.frequency_hz || [],
    nominalDb: tol.nominal_magnitude_db || [],
    bands: [
      { low: p["p0.135"], high: p["p99.865"], label: "99.73 % of boards (±3σ)" },
      { low: p["p2.5"], high: p["p97.5"], label: "95 % of boards" },
    ].filter((b) => b.low && b.high),
    median: p.p50 || null,
    referenceGainDb: mask ? mask.reference_gain_db : (tol.notes && tol.notes.nominal_reference_gain_db),
    segments: mask ? (mask.segments || []).map((s) => ({
      startHz: s.start_hz, stopHz: s.stop_hz, maxLossDb: s.max_loss_db, minLossDb: s.min_loss_db,
    })) : [],
    trials: tol.trial_count,
    seed: tol.seed,
    yield: y ? {
      fraction: y.fraction, low: y.ci95_low, high: y.ci95_high, passed: y.passed, trials: y.trials,
      interval: y.interval || "",
      failures: (y.failures_by_criterion || []).map((f) => ({
        band: f.band, startHz: f.start_hz, stopHz: f.stop_hz, failures: f.failures, worstMarginDb: f.worst_margin_db,
      })),
    } : null,
  };
}

/** Per-field messages of a problem: {path: [message, ...]}. */
export function fieldErrorsOf(problem) {
  return (problem && problem.errors) || {};
}
