// Frequency plots drawn as SVG from the service's JSON: curves, envelope bands, requirement mask, worst point.
// Presentation attributes only (no CSS classes), so a downloaded figure looks the same as on the page.

import { eng, signedDb } from "./format.js";

const NS = "http://www.w3.org/2000/svg";
const W = 720, H = 420;
const M = { left: 62, right: 18, top: 40, bottom: 84 };
const COLORS = { curve: "#1d4f91", median: "#1d4f91", band1: "#9dbbe3", band2: "#5f8fcf", mask: "#b3261e",
  pass: "#1f7a3a", fail: "#b3261e", grid: "#e3e7ec", axis: "#59626e", text: "#1b1f24" };

function el(name, attrs = {}, text) {
  const e = document.createElementNS(NS, name);
  for (const [k, v] of Object.entries(attrs)) if (v !== undefined && v !== null) e.setAttribute(k, String(v));
  if (text !== undefined) e.textContent = text;
  return e;
}

function logTicks(lo, hi) {
  const out = [];
  const span = Math.log10(hi / lo);
  const steps = span > 2.5 ? [1] : span > 0.9 ? [1, 2, 5] : [1, 1.5, 2, 3, 4, 5, 6, 7, 8, 9];
  for (let d = Math.floor(Math.log10(lo)); d <= Math.ceil(Math.log10(hi)); d++) {
    for (const s of steps) {
      const v = s * 10 ** d;
      if (v >= lo * 0.9999 && v <= hi * 1.0001) out.push(v);
    }
  }
  return out;
}

function linTicks(lo, hi, n = 6) {
  const raw = (hi - lo) / n;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((s) => s >= raw) || raw;
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

function interp(xs, ys, x) {
  if (!xs.length) return null;
  if (x <= xs[0]) return ys[0];
  for (let i = 1; i < xs.length; i++) {
    if (xs[i] >= x) {
      const t = Math.log(x / xs[i - 1]) / Math.log(xs[i] / xs[i - 1]);
      return ys[i - 1] + t * (ys[i] - ys[i - 1]);
    }
  }
  return ys[ys.length - 1];
}

/**
 * A frequency plot.
 * @param {object} o
 * @param {string} o.title  shown above the plot and as the figure's accessible name
 * @param {[number, number]} o.x  frequency range (Hz), log scale
 * @param {[number, number]} o.y  gain range (dB, relative to the reference)
 * @param {{x: number[], y: number[], label: string, color?: string, width?: number}[]} o.curves
 * @param {{x: number[], low: number[], high: number[], label: string, color: string}[]} [o.bands]
 * @param {{startHz: number, stopHz: number|null, maxLossDb?: number|null, minLossDb?: number|null}[]} [o.mask]
 * @param {{x: number, y: number, marginDb: number, pass: boolean}} [o.worst]
 * @param {string} [o.description] longer text for screen readers
 */
export function frequencyPlot(o) {
  const [x0, x1] = o.x;
  const [y0, y1] = o.y;
  const pw = W - M.left - M.right, ph = H - M.top - M.bottom;
  const X = (f) => M.left + (Math.log10(f / x0) / Math.log10(x1 / x0)) * pw;
  const Y = (g) => M.top + (1 - (g - y0) / (y1 - y0)) * ph;
  const id = "clip" + Math.random().toString(36).slice(2, 9);
  const svg = el("svg", { xmlns: NS, viewBox: `0 0 ${W} ${H}`, role: "img", "font-family": "system-ui, sans-serif",
    "font-size": 12, "aria-labelledby": `${id}-t ${id}-d` });
  svg.appendChild(el("title", { id: `${id}-t` }, o.title));
  svg.appendChild(el("desc", { id: `${id}-d` }, o.description || o.title));
  svg.appendChild(el("rect", { x: 0, y: 0, width: W, height: H, fill: "#ffffff" }));
  const defs = el("defs");
  const clip = el("clipPath", { id });
  clip.appendChild(el("rect", { x: M.left, y: M.top, width: pw, height: ph }));
  defs.appendChild(clip);
  svg.appendChild(defs);
  svg.appendChild(el("text", { x: M.left, y: 22, "font-size": 14, "font-weight": 600, fill: COLORS.text }, o.title));

  // grid and axes
  const grid = el("g", { stroke: COLORS.grid, "stroke-width": 1 });
  const labels = el("g", { fill: COLORS.axis, "font-size": 11 });
  for (const f of logTicks(x0, x1)) {
    grid.appendChild(el("line", { x1: X(f), x2: X(f), y1: M.top, y2: M.top + ph }));
    labels.appendChild(el("text", { x: X(f), y: M.top + ph + 16, "text-anchor": "middle" }, eng(f, "Hz", 3)));
  }
  for (const g of linTicks(y0, y1)) {
    grid.appendChild(el("line", { x1: M.left, x2: M.left + pw, y1: Y(g), y2: Y(g) }));
    labels.appendChild(el("text", { x: M.left - 6, y: Y(g) + 4, "text-anchor": "end" },
      Math.abs(g) < 1e-12 ? "0" : Number(g.toPrecision(4)).toString()));
  }
  svg.append(grid, labels);
  svg.appendChild(el("text", { x: M.left + pw / 2, y: M.top + ph + 34, "text-anchor": "middle", fill: COLORS.axis },
    "Frequency (Hz, log)"));
  svg.appendChild(el("text", { x: 14, y: M.top + ph / 2, "text-anchor": "middle", fill: COLORS.axis,
    transform: `rotate(-90 14 ${M.top + ph / 2})` }, o.yLabel || "Gain relative to the reference (dB)"));

  const plotArea = el("g", { "clip-path": `url(#${id})` });
  const legend = [];

  // requirement mask: the forbidden regions, shaded, with the limit line
  if (o.mask && o.mask.length) {
    const shade = el("g", { fill: COLORS.mask, "fill-opacity": 0.12, stroke: COLORS.mask, "stroke-width": 1.5,
      "stroke-dasharray": "5 3" });
    for (const s of o.mask) {
      const a = Math.max(s.startHz > 0 ? s.startHz : x0, x0);
      const b = Math.min(s.stopHz === null || s.stopHz === undefined ? x1 : s.stopHz, x1);
      if (!(b > a)) continue;
      if (s.maxLossDb !== null && s.maxLossDb !== undefined) {       // passband: gain must stay above -maxLoss
        const g = -s.maxLossDb;
        shade.appendChild(el("rect", { x: X(a), y: Y(g), width: X(b) - X(a), height: Math.max(0, Y(y0 - 1) - Y(g)),
          stroke: "none" }));
        shade.appendChild(el("line", { x1: X(a), x2: X(b), y1: Y(g), y2: Y(g), fill: "none" }));
      }
      if (s.minLossDb !== null && s.minLossDb !== undefined) {       // stopband: gain must stay below -minLoss
        const g = -s.minLossDb;
        shade.appendChild(el("rect", { x: X(a), y: Y(y1 + 1), width: X(b) - X(a), height: Math.max(0, Y(g) - Y(y1 + 1)),
          stroke: "none" }));
        shade.appendChild(el("line", { x1: X(a), x2: X(b), y1: Y(g), y2: Y(g), fill: "none" }));
      }
    }
    plotArea.appendChild(shade);
    legend.push({ kind: "mask", label: "Requirement: shaded = not allowed" });
  }

  for (const b of o.bands || []) {
    const pts = [];
    for (let i = 0; i < b.x.length; i++) if (b.x[i] >= x0 && b.x[i] <= x1) pts.push([X(b.x[i]), Y(b.high[i])]);
    for (let i = b.x.length - 1; i >= 0; i--) if (b.x[i] >= x0 && b.x[i] <= x1) pts.push([X(b.x[i]), Y(b.low[i])]);
    if (pts.length) {
      plotArea.appendChild(el("polygon", { points: pts.map((p) => p.map((v) => v.toFixed(1)).join(",")).join(" "),
        fill: b.color, "fill-opacity": 0.55, stroke: "none" }));
      legend.push({ kind: "band", color: b.color, label: b.label });
    }
  }
  for (const c of o.curves) {
    const pts = [];
    for (let i = 0; i < c.x.length; i++) {
      if (c.x[i] >= x0 * 0.98 && c.x[i] <= x1 * 1.02 && Number.isFinite(c.y[i])) {
        pts.push(`${X(c.x[i]).toFixed(1)},${Y(Math.max(Math.min(c.y[i], y1 + 50), y0 - 50)).toFixed(1)}`);
      }
    }
    plotArea.appendChild(el("polyline", { points: pts.join(" "), fill: "none", stroke: c.color || COLORS.curve,
      "stroke-width": c.width || 2, "stroke-dasharray": c.dash, "stroke-linejoin": "round" }));
    legend.push({ kind: "line", color: c.color || COLORS.curve, dash: c.dash, label: c.label });
  }
  svg.appendChild(plotArea);
  svg.appendChild(el("rect", { x: M.left, y: M.top, width: pw, height: ph, fill: "none", stroke: COLORS.axis }));

  // the worst point; DC (0 Hz) is drawn at the left edge of the log axis
  const wx = o.worst && Number.isFinite(o.worst.x) ? (o.worst.x === 0 ? x0 : o.worst.x) : null;
  if (wx !== null && wx >= x0 && wx <= x1 && Number.isFinite(o.worst.y)) {
    const color = o.worst.pass ? COLORS.pass : COLORS.fail;
    const yw = Math.min(Math.max(o.worst.y, y0), y1);
    const g = el("g", {});
    g.appendChild(el("circle", { cx: X(wx), cy: Y(yw), r: 5.5, fill: "none", stroke: color, "stroke-width": 2.5 }));
    const where = o.worst.x === 0 ? "DC" : eng(o.worst.x, "Hz", 4);
    const text = `${o.worst.pass ? "meets" : "fails"}: worst margin ${signedDb(o.worst.marginDb)} at ${where}`;
    const right = X(wx) > M.left + pw * 0.6;
    const below = Y(yw) < M.top + 24;
    g.appendChild(el("text", { x: X(wx) + (right ? -9 : 9), y: below ? Y(yw) + 20 : Y(yw) - 9,
      "text-anchor": right ? "end" : "start", fill: color, "font-weight": 600, "paint-order": "stroke",
      stroke: "#ffffff", "stroke-width": 3 }, text));
    svg.appendChild(g);
    legend.push({ kind: "marker", color, label: "Worst point of the requirement check" });
  }

  // legend below the axis
  let lx = M.left;
  let ly = M.top + ph + 56;
  const lg = el("g", { "font-size": 11, fill: COLORS.text });
  for (const item of legend) {
    const width = 30 + item.label.length * 6.1;
    if (lx + width > W - 8 && lx > M.left) { lx = M.left; ly += 16; }
    if (item.kind === "line") lg.appendChild(el("line", { x1: lx, x2: lx + 18, y1: ly - 4, y2: ly - 4, stroke: item.color,
      "stroke-width": 2.5, "stroke-dasharray": item.dash }));
    else if (item.kind === "band") lg.appendChild(el("rect", { x: lx, y: ly - 10, width: 18, height: 10, fill: item.color,
      "fill-opacity": 0.55 }));
    else if (item.kind === "mask") lg.appendChild(el("rect", { x: lx, y: ly - 10, width: 18, height: 10, fill: COLORS.mask,
      "fill-opacity": 0.15, stroke: COLORS.mask, "stroke-dasharray": "4 2" }));
    else lg.appendChild(el("circle", { cx: lx + 9, cy: ly - 5, r: 5, fill: "none", stroke: item.color, "stroke-width": 2 }));
    const t = el("text", { x: lx + 23, y: ly }, item.label);
    lg.appendChild(t);
    lx += width;
  }
  svg.appendChild(lg);
  return svg;
}

/** Gain at frequency `f` read from a curve (log-frequency interpolation). */
export function gainAt(xs, ys, f) { return interp(xs, ys, f); }

/** A standalone SVG document of a figure (for downloads). */
export function svgText(svgEl) {
  const copy = svgEl.cloneNode(true);
  copy.setAttribute("xmlns", NS);
  return '<?xml version="1.0" encoding="UTF-8"?>\n' + new XMLSerializer().serializeToString(copy);
}

export const PLOT_COLORS = COLORS;
