// Calls to the public /v1 endpoints: base URL, API key, content types and RFC 9457 problems.

const KEY_STORAGE = "rolloff.apiKey";

/** Base URL of the service: <meta name="rolloff-api">, or "" for the server that served this page. */
export function apiBase() {
  const meta = document.querySelector('meta[name="rolloff-api"]');
  return ((meta && meta.content) || "").replace(/\/+$/, "");
}

/** The API key of this tab (sessionStorage only), or "". */
export function getKey() {
  try { return sessionStorage.getItem(KEY_STORAGE) || ""; } catch (e) { return ""; }
}

export function setKey(key) {
  try {
    if (key) sessionStorage.setItem(KEY_STORAGE, key); else sessionStorage.removeItem(KEY_STORAGE);
  } catch (e) { /* storage disabled: the key lives in the field only */ }
}

/** A failed call: kind is "network", "auth", "problem" (4xx with a problem body) or "server" (5xx). */
export class ServiceError extends Error {
  constructor(kind, message, { status = 0, problem = null } = {}) {
    super(message);
    this.kind = kind;
    this.status = status;
    this.problem = problem;
  }
  /** The problem's per-field messages: {"parts.stock[2].value": ["..."]}. */
  get fieldErrors() {
    return (this.problem && this.problem.errors) || {};
  }
}

/**
 * POST (or GET) to a /v1 path. Returns the parsed JSON, or text for text/csv, text/plain and SVG.
 * @param {string} path e.g. "/v1/designs"
 * @param {{body?: object, query?: object, accept?: string, signal?: AbortSignal, method?: string}} opts
 */
export async function call(path, { body, query, accept = "application/json", signal, method } = {}) {
  let url = apiBase() + path;
  if (query) {
    const q = new URLSearchParams(Object.entries(query).filter(([, v]) => v !== undefined && v !== null));
    url += (url.includes("?") ? "&" : "?") + q.toString();
  }
  const headers = { Accept: accept + ", application/problem+json;q=0.9" };
  const key = getKey();
  if (key) headers.Authorization = "Bearer " + key;
  if (body !== undefined) headers["Content-Type"] = "application/json";
  let response;
  try {
    response = await fetch(url, {
      method: method || (body !== undefined ? "POST" : "GET"),
      headers, body: body !== undefined ? JSON.stringify(body) : undefined,
      signal, credentials: "omit", cache: "no-store",
    });
  } catch (err) {
    if (err && err.name === "AbortError") throw err;
    throw new ServiceError("network", "The service could not be reached (network error or blocked by the browser).");
  }
  const type = (response.headers.get("Content-Type") || "").split(";")[0].trim();
  if (!response.ok) {
    let problem = null;
    if (type === "application/problem+json" || type === "application/json") {
      try { problem = await response.json(); } catch (e) { problem = null; }
    }
    const detail = (problem && (problem.detail || problem.title)) || response.statusText || "no detail";
    if (response.status === 401) {
      throw new ServiceError("auth", detail, { status: 401, problem });
    }
    if (response.status >= 500 || !problem) {
      throw new ServiceError("server", `The service failed (HTTP ${response.status}): ${detail}`,
        { status: response.status, problem });
    }
    throw new ServiceError("problem", detail, { status: response.status, problem });
  }
  if (type === "application/json") return response.json();
  return response.text();
}
