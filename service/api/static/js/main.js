// The page: form -> /v1 calls -> results. Only the public /v1 endpoints are used.

import { ServiceError, call, getKey, setKey } from "./api.js";
import {
  PRESETS, clearErrors, designBody, fromQuery, parseStock, requirement, setValues, showErrors, syncBandHelp,
  toQuery, toleranceBody, values,
} from "./form.js";
import { hz, words } from "./format.js";
import { PLOT_COLORS, frequencyPlot, gainAt, svgText } from "./plots.js";
import {
  addDownload, renderComparison, renderDownloads, renderStages, renderVerdict, renderWarnings, renderYield,
  schematicFailed, setSchematic,
} from "./render.js";
import {
  comparisonOf, curveOf, familyOf, maskResultOf, netlistOf, orderOf, requirementOf, responseTypeOf, stagesOf,
  toleranceOf, verdictOf, warningsOf, withWholeBand,
} from "./reply.js";

const form = document.getElementById("design-form");
const results = document.getElementById("results");
const statusBox = document.getElementById("status");
const statusText = document.getElementById("status-text");
const designButton = document.getElementById("design-button");
const compareButton = document.getElementById("compare-button");
const downloads = document.getElementById("downloads");

let running = null;          // AbortController of the run in progress
let schematicUrls = [];

function status(text, kind = "") {
  statusText.textContent = text;
  statusBox.classList.remove("error", "note");
  if (kind) statusBox.classList.add(kind);
}

function busy(on, text) {
  statusBox.classList.toggle("busy", on);
  results.setAttribute("aria-busy", String(on));
  designButton.disabled = on;
  compareButton.disabled = on;
  designButton.textContent = on ? "Working…" : "Design";
  document.body.dataset.busy = String(on);
  if (text) status(text);
}

function markStale() {
  for (const id of ["verdict-panel", "stages-panel", "response-panel", "tolerance-panel", "downloads-panel"]) {
    document.getElementById(id).classList.add("stale");
  }
}

function fresh(id) { document.getElementById(id).classList.remove("stale"); }

function failure(err, what) {
  if (err && err.name === "AbortError") return;
  if (!(err instanceof ServiceError)) {
    status(`${what} failed in this page: ${err && err.message ? err.message : err}. Your inputs are kept.`, "error");
    return;
  }
  if (err.kind === "network") {
    status(`${what}: the service could not be reached. Your inputs are kept; try again when it is back.`, "error");
  } else if (err.kind === "server") {
    status(`${what}: ${err.message}. Your inputs are kept; try again, or tell the service's keepers.`, "error");
  } else if (err.kind === "auth") {
    status(`${what}: ${err.message} Enter the key under “API key” (top right) and try again.`, "error");
    const box = document.getElementById("key-box");
    box.open = true;
    document.getElementById("api-key").focus();
  } else {
    const stock = parseStock(form.elements.stock.value);
    const first = showErrors(form, err.fieldErrors, { stockLines: stock.lines });
    status(`${what}: ${err.message}${first ? " The fields concerned are marked." : ""}`, "error");
    if (first) first.focus();
  }
}

// ---------------------------------------------------------------------------- the steps

async function compare(vals, signal) {
  const cmp = comparisonOf(await call("/v1/approximations/compare", { body: requirement(vals), signal }));
  return cmp;
}

function showComparison(cmp, chosen) {
  renderComparison(document.getElementById("compare"), cmp, chosen, (family) => {
    form.elements.family.value = family;
    run();
  });
}

async function designDoc(vals, family, signal) {
  const body = designBody(vals, family);
  try {
    return { doc: await call("/v1/designs", { body, signal }), note: "" };
  } catch (err) {
    // A service without yield targets answers 422 naming `yield`: design without it, say so.
    const keys = err instanceof ServiceError && err.kind === "problem" ? Object.keys(err.fieldErrors) : [];
    if (body.yield && keys.length && keys.every((k) => k === "yield" || k.startsWith("yield."))
        && keys.some((k) => /unknown field/i.test(String(err.fieldErrors[k])))) {
      const doc = await call("/v1/designs", { body: designBody(vals, family, { withYield: false }), signal });
      return { doc, note: "This service does not take a yield target with the design; the target is checked " +
        "against the Monte Carlo yield below instead." };
    }
    throw err;
  }
}

async function schematics(doc, stages, signal) {
  for (const u of schematicUrls) URL.revokeObjectURL(u);
  schematicUrls = [];
  await Promise.all(stages.map(async (st) => {
    try {
      const svg = await call("/v1/designs/evaluate", { body: doc, query: { format: "svg", stage: st.number },
        accept: "image/svg+xml", signal });
      const url = URL.createObjectURL(new Blob([svg], { type: "image/svg+xml" }));
      schematicUrls.push(url);
      setSchematic(st.number, url, `stage ${st.number}, ${words(st.kind)}`);
      st.svg = svg;
    } catch (err) {
      if (err && err.name === "AbortError") throw err;
      schematicFailed(st.number, err.message);
    }
  }));
}

/** Frequencies for the response: a wide log grid and a dense passband grid in one list. */
function responseGrid(req) {
  const edges = [].concat(req.passband_hz, req.stopband_hz).map(Number).filter((f) => f > 0);
  const lo = Math.min(...edges) / 10, hi = Math.max(...edges) * 10;
  const detail = detailRange(req);
  const grid = [];
  for (let i = 0; i < 320; i++) grid.push(lo * (hi / lo) ** (i / 319));
  for (let i = 0; i < 280; i++) grid.push(detail[0] * (detail[1] / detail[0]) ** (i / 279));
  const sorted = Array.from(new Set(grid.map((f) => Number(f.toPrecision(9))))).sort((a, b) => a - b);
  return { wide: [lo, hi], detail, list: sorted };
}

function detailRange(req) {
  const p = [].concat(req.passband_hz).map(Number);
  switch (req.response) {
    case "lowpass": return [p[0] / 20, p[0] * 1.25];
    case "highpass": return [p[0] / 1.25, p[0] * 20];
    case "bandpass": return [p[0] / 1.3, p[1] * 1.3];
    default: return [p[0] / 10, p[1] * 10];
  }
}

function plotResponse(resp, req, ranges) {
  const curve = curveOf(resp);
  const mask = maskResultOf(resp);
  const ref = mask && Number.isFinite(mask.referenceGainDb) ? mask.referenceGainDb : Math.max(...curve.magnitudeDb);
  const rel = curve.magnitudeDb.map((m) => m - ref);
  const atten = Number(req.stopband_attenuation_db) || 60;
  const ripple = Number(req.passband_ripple_db) || 1;
  const worst = mask ? { x: mask.worstFrequencyHz,
    y: mask.worstFrequencyHz === 0 ? rel[0] : gainAt(curve.frequencyHz, rel, mask.worstFrequencyHz),
    marginDb: mask.worstMarginDb, pass: mask.pass } : null;
  const name = `${words(familyOf(state.doc))} ${words(responseTypeOf(state.doc))}, order ${orderOf(state.doc)}`;
  const main = frequencyPlot({
    title: `Response of the ${name} against the requirement`, x: ranges.wide, y: [-(atten + 40), 10],
    curves: [{ x: curve.frequencyHz, y: rel, label: "This design (chosen parts, op-amp model)" }],
    mask: mask ? mask.segments : [], worst,
    description: mask ? `The design ${mask.pass ? "meets" : "does not meet"} the requirement; worst margin ` +
      `${mask.worstMarginDb.toFixed(3)} dB at ${hz(mask.worstFrequencyHz)}.` : "No requirement mask.",
  });
  const [d0, d1] = ranges.detail;
  const passRel = rel.filter((g, i) => Number.isFinite(g) && curve.frequencyHz[i] >= d0 && curve.frequencyHz[i] <= d1
    && inPassband(curve.frequencyHz[i], req));
  const ymin = Math.min(-1.6 * ripple, ...(passRel.length ? [Math.min(...passRel) - 0.2 * ripple] : []));
  const ymax = Math.max(0.4 * ripple, ...(passRel.length ? [Math.max(...passRel) + 0.2 * ripple] : []));
  const detail = frequencyPlot({
    title: `Passband detail: ${ripple} dB ripple allowed`, x: [d0, d1], y: [ymin, ymax],
    curves: [{ x: curve.frequencyHz, y: rel, label: "This design" }],
    mask: mask ? mask.segments.filter((s) => s.maxLossDb !== null && s.maxLossDb !== undefined) : [],
    worst: worst && ((worst.x >= d0 && worst.x <= d1) || (worst.x === 0 && inPassband(d0, req))) ? worst : null,
    description: `The passband, scaled to the allowed ripple of ${ripple} dB.`,
  });
  put("plot-response", main, "Gain relative to the reference gain (the largest in the passband). Shaded: what the requirement forbids.");
  put("plot-passband", detail, "The same response in the passband, scaled to the ripple.");
  return { main, detail };
}

/** True when `f` (Hz) lies in a passband of the requirement (open bands end at the plot's edge). */
function inPassband(f, req) {
  const p = [].concat(req.passband_hz).map(Number);
  switch (req.response) {
    case "lowpass": return f <= p[0];
    case "highpass": return f >= p[0];
    case "bandpass": return f >= p[0] && f <= p[1];
    default: return f <= p[0] || f >= p[1];
  }
}

function put(id, svg, caption) {
  const fig = document.getElementById(id);
  fig.replaceChildren(svg);
  const cap = document.createElement("figcaption");
  cap.textContent = caption;
  fig.append(cap);
}

function plotTolerance(t, req, ranges) {
  const ref = Number.isFinite(t.referenceGainDb) ? t.referenceGainDb : Math.max(...t.nominalDb);
  const shift = (arr) => arr.map((v) => v - ref);
  const bands = t.bands.map((b, i) => ({ x: t.frequencyHz, low: shift(b.low), high: shift(b.high), label: b.label,
    color: i === 0 ? PLOT_COLORS.band1 : PLOT_COLORS.band2 }));
  const curves = [{ x: t.frequencyHz, y: shift(t.nominalDb), label: "Nominal parts", color: "#1b1f24", width: 1.6 }];
  const atten = Number(req.stopband_attenuation_db) || 60;
  const ripple = Number(req.passband_ripple_db) || 1;
  const main = frequencyPlot({
    title: `Spread of ${t.trials} boards (seed ${t.seed})`, x: ranges.wide, y: [-(atten + 40), 10], curves, bands,
    mask: t.segments, description: "Percentile envelope of the magnitude over the simulated boards.",
  });
  const [d0, d1] = ranges.detail;
  // scale to the passband: the ripple, and the 99.73 % band where the boards pass signal
  let lo = -1.6 * ripple, hi = 0.4 * ripple;
  const outer = bands[0];
  if (outer) {
    for (let i = 0; i < t.frequencyHz.length; i++) {
      const f = t.frequencyHz[i];
      if (f < d0 || f > d1 || !inPassband(f, req)) continue;
      lo = Math.min(lo, outer.low[i]);
      hi = Math.max(hi, outer.high[i]);
    }
  }
  lo = Math.max(lo, -20 * ripple - 1);
  const pad = 0.08 * (hi - lo);
  const detail = frequencyPlot({
    title: "Passband spread", x: [d0, d1], y: [lo - pad, hi + pad], curves, bands,
    mask: t.segments.filter((s) => s.maxLossDb !== null && s.maxLossDb !== undefined),
    description: "Percentile envelope in the passband, scaled to the ripple.",
  });
  put("plot-envelope", main, "Bands: where 95 % and 99.73 % of boards lie at each frequency; line: nominal parts.");
  put("plot-envelope-detail", detail, "The passband of the same boards, scaled to the ripple.");
  return { main, detail };
}

// ---------------------------------------------------------------------------- a run

const state = { doc: null };

async function run() {
  if (running) running.abort();
  const controller = new AbortController();
  running = controller;
  const signal = controller.signal;
  const vals = values(form);
  clearErrors(form);
  history.replaceState(null, "", "?" + toQuery(form));
  const stock = parseStock(vals.stock);
  if (stock.problems.length) {
    const first = showErrors(form, {}, { stockProblems: stock.problems });
    status("The stock list has rows that cannot be read; they are listed under it.", "error");
    if (first) first.focus();
    return;
  }
  markStale();
  delete document.body.dataset.stage;
  performance.clearMarks("rolloff-run");
  performance.clearMeasures();
  performance.mark("rolloff-run");       // the benchmark reads the measures below
  busy(true, "Working…");
  const target = vals.yield_target.trim() === "" ? null : Number(vals.yield_target) / 100;
  let step = "Comparing the families";
  try {
    let family = vals.family;
    if (family === "auto") {
      status("Comparing the approximation families…");
      const cmp = await compare(vals, signal);
      if (!cmp.recommended) {
        showComparison(cmp, null);
        throw new ServiceError("note", "No family meets this requirement within the service's limits; see the comparison.");
      }
      family = cmp.recommended;
      showComparison(cmp, family);
    }
    step = "Designing";
    status(`Designing the ${words(family)} filter…`);
    const { doc, note } = await designDoc(vals, family, signal);
    state.doc = doc;
    const stages = stagesOf(doc);
    renderVerdict(document.getElementById("verdict"), verdictOf(doc),
      { family: familyOf(doc), order: orderOf(doc), response: responseTypeOf(doc) });
    renderWarnings(document.getElementById("warnings"), warningsOf(doc));
    fresh("verdict-panel");
    renderStages(document.getElementById("stages"), stages);
    fresh("stages-panel");
    step = "Drawing";
    status("Drawing the schematics and the response…");
    const req = requirementOf(doc) || requirement(vals);
    const ranges = responseGrid(req);
    const responseCall = call("/v1/responses", { signal, body: {
      design: doc, frequencies: ranges.list,
      mask: { response: req.response, passband_hz: req.passband_hz, stopband_hz: req.stopband_hz,
        passband_ripple_db: req.passband_ripple_db, stopband_attenuation_db: req.stopband_attenuation_db },
    } });
    const [, resp] = await Promise.all([schematics(doc, stages, signal), responseCall]);
    const respPlots = plotResponse(resp, req, ranges);
    renderVerdict(document.getElementById("verdict"), withWholeBand(verdictOf(doc), maskResultOf(resp)),
      { family: familyOf(doc), order: orderOf(doc), response: responseTypeOf(doc) });
    fresh("response-panel");
    document.body.dataset.stage = "designed";
    performance.measure("rolloff-designed", "rolloff-run");
    const files = [
      { label: "BOM (CSV)", filename: "bom.csv", type: "text/csv", id: "dl-bom",
        text: await call("/v1/designs/evaluate", { body: doc, query: { format: "csv" }, accept: "text/csv", signal }) },
      { label: "SPICE netlist", filename: "netlist.cir", type: "text/plain", id: "dl-netlist", text: netlistOf(doc) },
      { label: "Design document (JSON)", filename: "design.json", type: "application/json", id: "dl-design",
        text: JSON.stringify(doc, null, 2) },
      ...stages.filter((s) => s.svg).map((s) => ({ label: `Schematic, stage ${s.number} (SVG)`, id: `dl-schematic-${s.number}`,
        filename: `schematic-stage-${s.number}.svg`, type: "image/svg+xml", text: s.svg })),
      { label: "Response (SVG)", filename: "response.svg", type: "image/svg+xml", id: "dl-response", text: svgText(respPlots.main) },
      { label: "Passband detail (SVG)", filename: "passband.svg", type: "image/svg+xml", id: "dl-passband",
        text: svgText(respPlots.detail) },
    ];
    renderDownloads(downloads, files);
    fresh("downloads-panel");
    step = "Simulating boards";
    status(`Designed. Simulating ${vals.trials} boards for the yield…`);
    const tol = toleranceOf(await call("/v1/tolerance", { body: toleranceBody(vals, doc), signal }));
    renderYield(document.getElementById("yield"), tol, target);
    const tolPlots = plotTolerance(tol, req, ranges);
    fresh("tolerance-panel");
    addDownload(downloads, { label: "Tolerance envelope (SVG)", filename: "tolerance.svg", type: "image/svg+xml",
      id: "dl-tolerance", text: svgText(tolPlots.main) });
    document.body.dataset.stage = "complete";
    performance.measure("rolloff-complete", "rolloff-run");
    const v = withWholeBand(verdictOf(doc), maskResultOf(resp));
    busy(false);
    status(`${v.meets === true ? "Meets the requirement" : v.meets === false ? "Does not meet the requirement"
      : "Designed"}: ${stages.length} stage${stages.length > 1 ? "s" : ""}, ${words(familyOf(doc))} order ${orderOf(doc)}.` +
      (note ? " " + note : ""), note ? "note" : "");
  } catch (err) {
    if (err && err.name === "AbortError") return;
    busy(false);
    if (err instanceof ServiceError && err.kind === "note") status(err.message, "error");
    else failure(err, step);
  } finally {
    if (running === controller) running = null;
  }
}

async function compareOnly() {
  const vals = values(form);
  clearErrors(form);
  busy(true, "Comparing the approximation families…");
  try {
    const cmp = await compare(vals);
    showComparison(cmp, vals.family === "auto" ? cmp.recommended : vals.family);
    busy(false);
    status(cmp.recommended ? `Recommended: ${words(cmp.recommended)}. Pick a row and design with it.` :
      "No family meets this requirement within the service's limits.");
    document.getElementById("compare-table").focus?.();
  } catch (err) {
    busy(false);
    failure(err, "Comparing");
  }
}

// ---------------------------------------------------------------------------- wiring

async function catalog() {
  try {
    const cat = await call("/v1/catalog");
    const sel = form.elements.topology;
    const known = new Set(Array.from(sel.options).map((o) => o.value));
    for (const t of cat.topologies || []) {
      if (!known.has(t.name) && t.order === 2) {
        const o = document.createElement("option");
        o.value = t.name;
        o.textContent = words(t.name);
        sel.append(o);
      }
    }
  } catch (err) { /* the form works with its built-in lists */ }
}

function init() {
  const keyInput = document.getElementById("api-key");
  keyInput.value = getKey();
  keyInput.addEventListener("change", () => setKey(keyInput.value.trim()));
  document.getElementById("api-key-forget").addEventListener("click", () => { keyInput.value = ""; setKey(""); });
  form.elements.response.addEventListener("change", () => syncBandHelp(form));
  form.elements.preset.addEventListener("change", () => {
    setValues(form, PRESETS[form.elements.preset.value]);
    clearErrors(form);
  });
  form.addEventListener("submit", (ev) => { ev.preventDefault(); run(); });
  compareButton.addEventListener("click", compareOnly);
  const fromUrl = fromQuery(location.search);
  catalog();
  if (fromUrl) {
    setValues(form, fromUrl);
    run();
  } else {
    syncBandHelp(form);
  }
}

init();
