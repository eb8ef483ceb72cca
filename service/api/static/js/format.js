// Numbers for people: engineering notation with SI prefixes, percentages, dB.

const PREFIXES = [[1e12, "T"], [1e9, "G"], [1e6, "M"], [1e3, "k"], [1, ""], [1e-3, "m"], [1e-6, "µ"], [1e-9, "n"],
  [1e-12, "p"], [1e-15, "f"]];

/** 10700 -> "10.7 k" + unit; significant digits kept, trailing zeros dropped. */
export function eng(value, unit = "", digits = 4) {
  if (value === null || value === undefined || !Number.isFinite(value)) return "—";
  if (value === 0) return `0 ${unit}`.trim();
  const a = Math.abs(value);
  let [scale, prefix] = PREFIXES[PREFIXES.length - 1];
  for (const [s, p] of PREFIXES) {
    if (a >= s * 0.9995) { scale = s; prefix = p; break; }
  }
  let text = Number((value / scale).toPrecision(digits)).toString();
  if (Math.abs(Number(text)) >= 1000 && scale < 1e12) {   // 999.96 k rounds to 1000 k: step up
    const i = PREFIXES.findIndex(([s]) => s === scale);
    [scale, prefix] = PREFIXES[i - 1];
    text = Number((value / scale).toPrecision(digits)).toString();
  }
  return `${text} ${prefix}${unit}`.trim();
}

export function hz(value, digits = 4) { return eng(value, "Hz", digits); }

export function db(value, digits = 2) {
  if (value === null || value === undefined || !Number.isFinite(value)) return "—";
  return `${value.toFixed(digits)} dB`;
}

export function signedDb(value, digits = 2) {
  if (value === null || value === undefined || !Number.isFinite(value)) return "—";
  return `${value >= 0 ? "+" : "−"}${Math.abs(value).toFixed(digits)} dB`;
}

export function pct(fraction, digits = 1) {
  if (fraction === null || fraction === undefined || !Number.isFinite(fraction)) return "—";
  return `${(100 * fraction).toFixed(digits)} %`;
}

export function num(value, digits = 3) {
  if (value === null || value === undefined || !Number.isFinite(value)) return "—";
  return Number(value.toPrecision(digits)).toString();
}

export function words(id) {
  return String(id || "").replace(/_/g, " ");
}
