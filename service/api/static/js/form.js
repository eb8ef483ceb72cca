// The requirement form: requests built from it, its state in the page address, examples, field errors.

const BANDS = new Set(["bandpass", "bandstop"]);

const PM7_CAPACITORS = ["1n", "1.5n", "2.2n", "3.3n", "4.7n", "6.8n", "10n", "15n", "22n", "33n", "47n"];
const PM7_STOCK = "kind,value,tolerance,dielectric,part_id\n" +
  PM7_CAPACITORS.map((v) => `capacitor,${v},0.02,C0G,PM7-C0G-${v.toUpperCase()}`).join("\n");

const COMMON = {
  family: "auto", topology: "auto", r_series: "E96", r_tol: "1", c_series: "E12", c_tol: "5", c_diel: "C0G",
  c_range: "100p, 10u", stock: PM7_STOCK, gbw: "20MHz", slew: "5", a0: "110", opamp_id: "PM7-U-OPA-GP",
  yield_target: "", trials: "500", seed: "1",
};

/** Examples from the (invented) Larkspur Fluidics PM-7 pump monitor. */
export const PRESETS = {
  "pm7-antialias": { ...COMMON, response: "lowpass", passband: "10kHz", stopband: "25.6kHz", ripple: "0.1",
    attenuation: "80" },
  "pm7-leak": { ...COMMON, response: "bandpass", passband: "35k, 45k", stopband: "25k, 60k", ripple: "0.5",
    attenuation: "30" },
  "pm7-mains": { ...COMMON, response: "bandstop", passband: "20, 150", stopband: "49, 61", ripple: "0.5",
    attenuation: "40", stock: "", c_series: "E12", c_tol: "5", c_diel: "film", c_range: "100n, 10u" },
  "pm7-bearing": { ...COMMON, response: "bandpass", passband: "1, 1k", stopband: "0.2, 5k", ripple: "1",
    attenuation: "20", stock: "", c_series: "E12", c_tol: "5", c_diel: "film", c_range: "100n, 10u" },
};

export function fields(form) {
  return Array.from(form.elements).filter((el) => el.name && !el.disabled);
}

/** Current values by input name. */
export function values(form) {
  const out = {};
  for (const el of fields(form)) out[el.name] = el.value;
  return out;
}

export function setValues(form, vals) {
  for (const el of fields(form)) {
    if (Object.prototype.hasOwnProperty.call(vals, el.name)) {
      if (el.tagName === "SELECT" && !Array.from(el.options).some((o) => o.value === vals[el.name])) {
        const opt = document.createElement("option");
        opt.value = opt.textContent = vals[el.name];
        el.appendChild(opt);
      }
      el.value = vals[el.name];
    }
  }
  syncBandHelp(form);
}

export function syncBandHelp(form) {
  const band = BANDS.has(form.elements.response.value);
  for (const el of form.querySelectorAll(".band-help")) el.hidden = !band;
}

/** The form state as a query string (the API key is never part of it). */
export function toQuery(form) {
  const q = new URLSearchParams();
  for (const el of fields(form)) if (!el.dataset.ignoreUrl && el.type !== "password") q.set(el.name, el.value);
  return q.toString();
}

/** Values found in a query string, or null when it carries no form state. */
export function fromQuery(search) {
  const q = new URLSearchParams(search);
  if (!q.has("response")) return null;
  const out = {};
  for (const [k, v] of q) out[k] = v;
  return out;
}

// ---------------------------------------------------------------------------- request bodies

const trim = (s) => (s || "").trim();

/** A number when the text is one, else the text itself (so the service names what is wrong). */
function number(text) {
  const t = trim(text);
  if (t !== "" && Number.isFinite(Number(t))) return Number(t);
  return t;
}

/** "1" (%) -> 0.01; text that is not a number is sent as it is. */
function percent(text) {
  const t = trim(text).replace(/%$/, "").trim();
  if (t !== "" && Number.isFinite(Number(t))) return Number(t) / 100;
  return t;
}

function edge(text, band) {
  const parts = trim(text).split(/[,;]/).map(trim).filter((p) => p !== "");
  if (band) return parts;
  return parts.length === 1 ? parts[0] : parts;
}

/** The requirement fields shared by compare and designs. */
export function requirement(vals) {
  const band = BANDS.has(vals.response);
  return {
    response: vals.response,
    passband_hz: edge(vals.passband, band),
    stopband_hz: edge(vals.stopband, band),
    passband_ripple_db: number(vals.ripple),
    stopband_attenuation_db: number(vals.attenuation),
  };
}

/**
 * Stock CSV -> {entries, lines, problems}: one entry per data row; lines[i] is the 1-based line of entry i.
 * Only the shape is checked here (columns); values are the service's to judge.
 */
export function parseStock(text) {
  const entries = [], lines = [], problems = [];
  const rows = (text || "").split(/\r?\n/);
  let header = null;
  rows.forEach((raw, i) => {
    const line = raw.trim();
    if (!line || line.startsWith("#")) return;
    const cells = splitCsv(line);
    if (header === null && cells.some((c) => c.toLowerCase() === "kind")) {
      header = cells.map((c) => c.toLowerCase());
      return;
    }
    const cols = header || ["kind", "value", "tolerance", "dielectric", "part_id"];
    if (cells.length > cols.length) {
      problems.push({ line: i + 1, message: `${cells.length} columns; expected at most ${cols.length} (${cols.join(", ")})` });
    }
    const entry = {};
    cols.forEach((name, j) => {
      const cell = (cells[j] || "").trim();
      if (name === "tolerance") { if (cell !== "") entry.tolerance = number(cell); }
      else if (name === "dielectric" || name === "part_id") { if (cell !== "") entry[name] = cell; }
      else if (cell !== "" || name === "kind" || name === "value") entry[name] = cell;
    });
    entries.push(entry);
    lines.push(i + 1);
  });
  return { entries, lines, problems };
}

function splitCsv(line) {
  const out = [];
  let cur = "", quoted = false;
  for (let i = 0; i < line.length; i++) {
    const ch = line[i];
    if (quoted) {
      if (ch === '"' && line[i + 1] === '"') { cur += '"'; i++; }
      else if (ch === '"') quoted = false;
      else cur += ch;
    } else if (ch === '"') quoted = true;
    else if (ch === ",") { out.push(cur); cur = ""; }
    else cur += ch;
  }
  out.push(cur);
  return out;
}

/** The /v1/designs body; `withYield` adds the yield target when the user set one. */
export function designBody(vals, family, { withYield = true } = {}) {
  const body = { ...requirement(vals), family, topology: vals.topology || "auto" };
  const resistors = { series: vals.r_series, tolerance: percent(vals.r_tol) };
  const capacitors = { series: vals.c_series, tolerance: percent(vals.c_tol) };
  if (trim(vals.c_diel)) capacitors.dielectric = trim(vals.c_diel);
  if (trim(vals.c_range)) capacitors.range = edge(vals.c_range, true);
  body.parts = { resistors, capacitors };
  const stock = parseStock(vals.stock);
  if (stock.entries.length) body.parts.stock = stock.entries;
  if (trim(vals.gbw)) {
    body.opamp = { gbw_hz: trim(vals.gbw) };
    if (trim(vals.slew)) body.opamp.slew_v_per_us = number(vals.slew);
    if (trim(vals.a0)) body.opamp.a0_db = number(vals.a0);
    if (trim(vals.opamp_id)) body.opamp.part_id = trim(vals.opamp_id);
  }
  if (withYield && trim(vals.yield_target)) {
    body.yield = { target: percent(vals.yield_target), trials: number(vals.trials), seed: number(vals.seed) };
  }
  return body;
}

export function toleranceBody(vals, doc) {
  return { design: doc, trials: number(vals.trials), seed: number(vals.seed) };
}

// ---------------------------------------------------------------------------- errors beside fields

export function clearErrors(form) {
  for (const el of form.querySelectorAll("[aria-invalid]")) {
    el.removeAttribute("aria-invalid");
    const msg = document.getElementById(el.id + "-error");
    if (msg) msg.remove();
    el.setAttribute("aria-describedby", (el.getAttribute("aria-describedby") || "")
      .split(" ").filter((id) => id && id !== el.id + "-error").join(" "));
  }
  const stock = form.querySelector("#stock-errors");
  stock.hidden = true;
  stock.textContent = "";
  const general = form.querySelector("#form-errors");
  general.hidden = true;
  general.textContent = "";
}

function markField(el, messages) {
  el.setAttribute("aria-invalid", "true");
  const id = el.id + "-error";
  let msg = document.getElementById(id);
  if (!msg) {
    msg = document.createElement("p");
    msg.id = id;
    msg.className = "field-error";
    el.insertAdjacentElement("afterend", msg);
    el.setAttribute("aria-describedby", ((el.getAttribute("aria-describedby") || "") + " " + id).trim());
  }
  msg.textContent = messages.join(" ");
}

/**
 * Show a problem's per-field messages beside the fields they name.
 * Stock entries ("parts.stock[3].value") are listed by CSV line. Returns the first invalid element.
 */
export function showErrors(form, errors, { stockLines = [], stockProblems = [], fieldPrefix = "" } = {}) {
  let first = null;
  const general = [];
  const stockMessages = stockProblems.map((p) => `line ${p.line}: ${p.message}`);
  const byField = new Map();
  for (const el of form.querySelectorAll("[data-field]")) byField.set(el.dataset.field, el);
  for (const [rawKey, msgs] of Object.entries(errors)) {
    const key = fieldPrefix && rawKey.startsWith(fieldPrefix) ? rawKey.slice(fieldPrefix.length) : rawKey;
    const list = Array.isArray(msgs) ? msgs.map(String) : [typeof msgs === "string" ? msgs : JSON.stringify(msgs)];
    const stock = /^parts\.stock\[(\d+)\](?:\.(\w+))?/.exec(key);
    if (stock) {
      const i = Number(stock[1]);
      const line = stockLines[i] || `entry ${i + 1}`;
      stockMessages.push(`line ${line}${stock[2] ? " (" + stock[2] + ")" : ""}: ${list.join(" ")}`);
      continue;
    }
    let el = byField.get(key);
    if (!el) {
      const base = key.replace(/\[\d+\]$/, "");
      el = byField.get(base);
    }
    if (el) {
      markField(el, list);
      if (!first) first = el;
    } else {
      general.push(`${key === "_schema" ? "" : key + ": "}${list.join(" ")}`);
    }
  }
  if (stockMessages.length) {
    const box = form.querySelector("#stock-errors");
    const stockInput = form.querySelector("#stock");
    box.hidden = false;
    box.textContent = "";
    const p = document.createElement("p");
    p.textContent = `The stock list has ${stockMessages.length} problem${stockMessages.length > 1 ? "s" : ""}:`;
    const ul = document.createElement("ul");
    for (const m of stockMessages) {
      const li = document.createElement("li");
      li.textContent = m;
      ul.appendChild(li);
    }
    box.append(p, ul);
    stockInput.setAttribute("aria-invalid", "true");
    if (!(stockInput.getAttribute("aria-describedby") || "").includes("stock-errors")) {
      stockInput.setAttribute("aria-describedby", (stockInput.getAttribute("aria-describedby") || "") + " stock-errors");
    }
    if (!first) first = stockInput;
  }
  if (general.length) {
    const box = form.querySelector("#form-errors");
    box.hidden = false;
    box.textContent = general.join(" · ");
  }
  return first;
}
