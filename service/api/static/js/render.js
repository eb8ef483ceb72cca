// Results on the page: verdict, warnings, family comparison, stages, yield, downloads.

import { db, eng, hz, num, pct, signedDb, words } from "./format.js";

export function h(tag, attrs = {}, ...children) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (v === undefined || v === null || v === false) continue;
    if (k === "class") e.className = v;
    else if (k === "text") e.textContent = v;
    else e.setAttribute(k, v === true ? "" : String(v));
  }
  for (const c of children.flat()) if (c !== null && c !== undefined) e.append(c instanceof Node ? c : String(c));
  return e;
}

function item(k, v) {
  return h("div", { class: "figure-item" }, h("span", { class: "k" }, k), h("span", { class: "v" }, v));
}

/** Verdict: meets or not, the worst margin and where, the checked edges. */
export function renderVerdict(box, v, { family, order, response }) {
  box.classList.remove("placeholder");
  box.replaceChildren();
  const state = v.meets === true ? "pass" : v.meets === false ? "fail" : "unknown";
  const text = v.unstable ? "Unstable: meets nothing" : v.meets === true ? "Meets the requirement"
    : v.meets === false ? "Does not meet the requirement" : "No requirement to check";
  box.append(
    h("span", { class: `badge ${state}`, id: "verdict-badge", "data-meets": String(v.meets) }, text),
    item("Worst margin", v.worstMarginDb === null ? "—" : signedDb(v.worstMarginDb, 3)),
    item("Where", v.worstFrequencyHz === null ? "—" : v.worstFrequencyHz === 0 ? "DC" : hz(v.worstFrequencyHz)),
    item("Filter", `${words(family)} ${words(response)}, order ${order}`),
  );
  if (v.wholeBand) {
    const w = v.wholeBand;
    box.append(h("p", { class: "help", id: "whole-band", style: "flex-basis:100%" },
      `Checked at every frequency on the circuit with the op-amp model: ${w.pass ? "meets" : "fails"}, worst margin ` +
      `${signedDb(w.worstMarginDb, 3)} at ${w.worstFrequencyHz === 0 ? "DC" : hz(w.worstFrequencyHz)}. ` +
      "The table gives the loss at the requirement's edges."));
  } else if (v.meets !== null) {
    box.append(h("p", { class: "help", id: "whole-band", style: "flex-basis:100%" },
      "Checking every frequency of the band on the circuit…"));
  }
  if (v.edges.length) {
    const rows = v.edges.map((e) => h("tr", {},
      h("td", {}, words(e.band)), h("td", { class: "num" }, hz(e.frequencyHz)),
      h("td", { class: "num" }, db(e.lossDb, 3)),
      h("td", { class: "num" }, `${e.band === "passband" ? "≤" : "≥"} ${db(e.requiredDb, 2)}`),
      h("td", { class: "num" }, signedDb(e.marginDb, 3))));
    box.append(h("div", { class: "table-scroll", style: "flex-basis:100%" },
      h("table", { "aria-label": "Loss at the requirement's edges" },
        h("thead", {}, h("tr", {}, h("th", {}, "Edge"), h("th", { class: "num" }, "Frequency"),
          h("th", { class: "num" }, "Loss"), h("th", { class: "num" }, "Required"), h("th", { class: "num" }, "Margin"))),
        h("tbody", {}, rows))));
  }
}

export function renderWarnings(box, warnings) {
  box.replaceChildren();
  if (!warnings.length) return;
  box.append(h("ul", { class: "warnings", "aria-label": "Warnings" },
    warnings.map((w) => h("li", { "data-code": w.code }, w.message))));
}

/** Family comparison with a radio per row; `onPick(family)` designs with the picked one. */
export function renderComparison(box, cmp, chosen, onPick) {
  box.classList.remove("placeholder");
  box.replaceChildren();
  const rows = cmp.rows.map((r) => {
    const radio = h("input", { type: "radio", name: "pick-family", value: r.family, id: `pick-${r.family}`,
      disabled: !r.meets, checked: r.family === chosen });
    return h("tr", { class: (r.family === chosen ? "chosen " : "") + (r.meets ? "" : "fails"), "data-family": r.family },
      h("td", {}, radio),
      h("td", {}, h("label", { for: `pick-${r.family}` }, words(r.family)),
        r.family === cmp.recommended ? h("span", { class: "help" }, " (recommended)") : null),
      h("td", {}, r.meets ? "yes" : "no"),
      h("td", { class: "num" }, r.order ?? "—"),
      h("td", { class: "num" }, num(r.maxQ, 3)),
      h("td", { class: "num" }, r.overshootPct === null || r.overshootPct === undefined ? "—" : `${num(r.overshootPct, 3)} %`),
      h("td", { class: "num" }, r.delayVariationS === null || r.delayVariationS === undefined ? "—" : eng(r.delayVariationS, "s", 3)),
      h("td", { class: "note" }, r.reason || ""));
  });
  const table = h("table", { id: "compare-table" },
    h("caption", { class: "visually-hidden" }, "Approximation families for this requirement"),
    h("thead", {}, h("tr", {}, h("th", {}, h("span", { class: "visually-hidden" }, "Pick")), h("th", {}, "Family"),
      h("th", {}, "Meets"), h("th", { class: "num" }, "Order"), h("th", { class: "num" }, "Highest Q"),
      h("th", { class: "num" }, "Overshoot"), h("th", { class: "num" }, "Delay variation"), h("th", {}, "Note"))),
    h("tbody", {}, rows));
  const button = h("button", { type: "button", id: "use-family" }, "Design with the selected family");
  button.addEventListener("click", () => {
    const picked = box.querySelector('input[name="pick-family"]:checked');
    if (picked) onPick(picked.value);
  });
  box.append(h("p", { class: "help" }, cmp.reason), h("div", { class: "table-scroll" }, table), h("div", { class: "actions" }, button));
}

/** One card per stage; each gets a schematic slot filled later by `setSchematic`. */
export function renderStages(box, stages) {
  box.classList.remove("placeholder", "tall");
  box.replaceChildren();
  for (const st of stages) {
    const title = `Stage ${st.number} · ${words(st.kind)} · ${words(st.topology)}${st.strategy ? " (" + words(st.strategy) + ")" : ""}`;
    const figures = h("div", { class: "figures-row" },
      item("f0", hz(st.f0Hz)),
      st.q ? item("Q", num(st.q, 4)) : null,
      st.fzHz ? item("fz", hz(st.fzHz)) : null,
      item("Gain", num(st.gain, 4)),
      item("f0 error", st.f0Error === null || st.f0Error === undefined ? "—" : pct(st.f0Error, 2)),
      st.q ? item("Q error", st.qError === null || st.qError === undefined ? "—" : pct(st.qError, 2)) : null,
      st.gbwRequiredHz ? item("Op-amp GBW needed", hz(st.gbwRequiredHz, 3)) : null,
      item("Peak gain", db(Math.abs(st.peakGainDb) < 0.005 ? 0 : st.peakGainDb, 2)));
    const parts = h("table", { "aria-label": `Parts of stage ${st.number}` },
      h("thead", {}, h("tr", {}, h("th", {}, "Ref"), h("th", {}, "Kind"), h("th", { class: "num" }, "Value"),
        h("th", { class: "num" }, "Tolerance"), h("th", {}, "Part id"))),
      h("tbody", {},
        st.components.map((c) => h("tr", {}, h("td", {}, c.ref), h("td", {}, c.kind + (c.dielectric ? ` (${c.dielectric})` : "")),
          h("td", { class: "num" }, eng(c.value, c.kind === "resistor" ? "Ω" : "F", 4)),
          h("td", { class: "num" }, c.tolerance === null || c.tolerance === undefined ? "—" : pct(c.tolerance, 1)),
          h("td", {}, c.partId || ""))),
        st.opamps.map((u) => h("tr", {}, h("td", {}, u.ref), h("td", {}, "op-amp"),
          h("td", { class: "num" }, u.gbwHz ? `GBW ${hz(u.gbwHz, 3)}` : "ideal"), h("td", {}, ""), h("td", {}, u.partId || "")))));
    const slot = h("div", { class: "schematic", id: `schematic-${st.number}`, "data-stage": st.number },
      h("p", { class: "placeholder" }, "Drawing the schematic…"));
    const card = h("article", { class: "stage", id: `stage-${st.number}`, "aria-labelledby": `stage-${st.number}-title` },
      h("h4", { id: `stage-${st.number}-title` }, title), figures, slot,
      h("details", { class: "parts" }, h("summary", {}, `Parts of stage ${st.number}`), h("div", { class: "table-scroll" }, parts)));
    box.append(card);
  }
}

/** Put a stage's schematic (an object URL of its SVG) in its slot. */
export function setSchematic(stageNumber, url, stageTitle) {
  const slot = document.getElementById(`schematic-${stageNumber}`);
  if (!slot) return;
  const img = h("img", { src: url, alt: `Schematic of ${stageTitle}: parts with refs and values, op-amps and nodes`,
    "data-stage": stageNumber });
  const fit = h("button", { type: "button", class: "link", "aria-pressed": "false" }, "Show at full size");
  fit.addEventListener("click", () => {
    const full = fit.getAttribute("aria-pressed") !== "true";
    fit.setAttribute("aria-pressed", String(full));
    fit.textContent = full ? "Fit to the page" : "Show at full size";
    img.style.width = full ? `${img.naturalWidth}px` : "100%";
    img.style.minWidth = full ? "" : `${Math.round(0.7 * img.naturalWidth)}px`;
  });
  // fit the page, but never below 70 % of the drawing's size: past that its labels get too small to read
  img.style.width = "100%";
  img.addEventListener("load", () => { img.style.minWidth = `${Math.round(0.7 * img.naturalWidth)}px`; });
  slot.replaceChildren(img);
  slot.insertAdjacentElement("afterend", h("p", { class: "help" }, fit));
}

export function schematicFailed(stageNumber, message) {
  const slot = document.getElementById(`schematic-${stageNumber}`);
  if (slot) slot.replaceChildren(h("p", { class: "field-error" }, `No schematic: ${message}`));
}

/** Yield with its interval, failures by band, and the target when one was set. */
export function renderYield(box, t, targetFraction) {
  box.classList.remove("placeholder");
  box.replaceChildren();
  const y = t.yield;
  if (!y) {
    box.append(h("p", {}, "No yield: the design has no requirement to check the boards against."));
    return;
  }
  box.append(
    h("span", { class: "big", id: "yield-value" }, pct(y.fraction, 1)),
    item("95 % interval", `${pct(y.low, 1)} – ${pct(y.high, 1)}`),
    item("Boards", `${y.passed} of ${y.trials} pass`),
    item("Seed", String(t.seed)),
  );
  if (targetFraction !== null && targetFraction !== undefined && Number.isFinite(targetFraction)) {
    const verdict = y.low >= targetFraction ? ["pass", "target met"] : y.high < targetFraction ? ["fail", "target missed"]
      : ["unknown", "undecided: simulate more boards"];
    box.append(h("span", { class: `badge ${verdict[0]}`, id: "yield-target-verdict" },
      `Target ${pct(targetFraction, 1)}: ${verdict[1]}`));
  }
  const fails = y.failures.filter((f) => f.failures > 0);
  if (fails.length) {
    box.append(h("p", { class: "help", style: "flex-basis:100%" },
      "Boards failing, by band: " + fails.map((f) => `${words(f.band)} ${hz(f.startHz, 3)}–${f.stopHz ? hz(f.stopHz, 3) : "…"}: ` +
        `${f.failures} (worst ${signedDb(f.worstMarginDb)})`).join("; ")));
  }
  if (y.interval) box.append(h("p", { class: "help", style: "flex-basis:100%" }, `Interval: ${y.interval}.`));
}

const urls = [];

/** Replace the download links. Each item: {label, filename, text|blob|url, type, id}. */
export function renderDownloads(list, items) {
  while (urls.length) URL.revokeObjectURL(urls.pop());
  list.replaceChildren();
  for (const it of items) {
    let href = it.url;
    if (!href) {
      const blob = it.blob || new Blob([it.text], { type: it.type });
      href = URL.createObjectURL(blob);
      urls.push(href);
    }
    list.append(h("li", {}, h("a", { href, download: it.filename, id: it.id, type: it.type }, it.label)));
  }
}

export function addDownload(list, it) {
  const blob = it.blob || new Blob([it.text], { type: it.type });
  const href = URL.createObjectURL(blob);
  urls.push(href);
  list.append(h("li", {}, h("a", { href, download: it.filename, id: it.id, type: it.type }, it.label)));
}
