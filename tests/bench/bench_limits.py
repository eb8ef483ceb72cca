"""Search for the slowest and the largest request the service allows, endpoint by endpoint.

Usage::

    python tests/bench/bench_limits.py [--seed 1] [--random 10] [--adversarial 8] [--only tolerance]
                                       [--timeout 60] [--deadline 3600]

A seeded search, independent of how the service estimates work: it proposes
requests, and a request is *allowed* when the service answers it 200 (a 422
is the service refusing it, which costs nothing). Each proposal runs through
the Flask test client in a child forked from a process that has loaded the
app (so its cost is its own: CPU time of the child, and its peak resident
memory above the RSS it was forked with), with one BLAS thread as in a worker
and a request deadline of ``--deadline`` s (default: practically none, to see
the true cost; the service's default is 10 s).

Per endpoint: ``--random`` proposals drawn over every parameter that costs
time or memory (order, stages, topologies, op-amp models with an output
resistance, which force the whole-circuit solve, frequency and time points,
trials, sensitivity frequencies, included trials, stock lists, the SVG and CSV
formats), then ``--adversarial`` proposals mutated from the costliest allowed
ones so far (parameters pushed up to the configured limits, bigger design
documents, heavier options). Printed: every proposal's outcome, then per
endpoint the slowest allowed request (CPU s) and the largest (added RSS MB),
flagged when over 2 s of CPU or 256 MB, and any 5xx found (a bug).

Figures depend on the machine and its load; the load average is printed.
"""

from __future__ import annotations

import argparse
import copy
import json
import os
import random
import re
import select
import signal
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
# as in a gunicorn worker (service/gunicorn_conf.py): one BLAS thread, so CPU time is the request's own
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from service import create_app  # noqa: E402
from tests.bench.benchlib import load  # noqa: E402

CPU_BUDGET_S = 2.0
RSS_BUDGET_MB = 256.0
RESPONSES = ("lowpass", "highpass", "bandpass", "bandstop")
FAMILIES = ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "legendre", "linkwitz_riley")
TOPOLOGIES = ("auto", "sallen_key", "multiple_feedback", "state_variable", "tow_thomas")


@dataclass
class Outcome:
    endpoint: str
    label: str
    body: dict
    status: int = 0
    cpu_s: float = 0.0
    wall_s: float = 0.0
    rss_mb: float = 0.0
    note: str = ""

    @property
    def allowed(self) -> bool:
        return self.status == 200

    @property
    def score(self) -> float:
        return max(self.cpu_s / CPU_BUDGET_S, self.rss_mb / RSS_BUDGET_MB)


@dataclass
class Space:
    """The limits (from the catalog) and a pool of design documents to draw from."""

    limits: dict
    docs: list[dict] = field(default_factory=list)

    def lim(self, name: str) -> int:
        return int(self.limits[name]["value"])


# --- proposals -----------------------------------------------------------------------------------

def _filter(rng: random.Random, sp: Space, by_order: bool | None = None) -> dict:
    response = rng.choice(RESPONSES)
    family = rng.choice(FAMILIES)
    band = response in ("bandpass", "bandstop")
    f0 = 10 ** rng.uniform(1, 5)
    if by_order if by_order is not None else rng.random() < 0.6:
        out = {"response": response, "family": family, "order": rng.randint(1, sp.lim("max_order")),
               "cutoff_hz": [f0, f0 * 10 ** rng.uniform(0.05, 1)] if band else f0}
        if family in ("chebyshev1", "elliptic", "legendre"):
            out["passband_ripple_db"] = round(10 ** rng.uniform(-2, 0.4), 3)
        if family in ("chebyshev2", "elliptic"):
            out["stopband_attenuation_db"] = round(rng.uniform(20, 140), 1)
        return out
    ratio = 10 ** rng.uniform(0.01, 1)
    ripple = round(10 ** rng.uniform(-2, 0.4), 3)
    atten = round(rng.uniform(max(ripple + 1, 10), 140), 1)
    if band:
        lo, hi = f0, f0 * 10 ** rng.uniform(0.05, 1)
        passband, stopband = ([lo, hi], [lo / ratio, hi * ratio]) if response == "bandpass" \
            else ([lo / ratio, hi * ratio], [lo, hi])
    elif response == "lowpass":
        passband, stopband = f0, f0 * ratio
    else:
        passband, stopband = f0 * ratio, f0
    fam = rng.choice([f for f in FAMILIES if f != "linkwitz_riley"])
    return {"response": response, "family": fam, "passband_hz": passband, "stopband_hz": stopband,
            "passband_ripple_db": ripple, "stopband_attenuation_db": atten}


def _opamp(rng: random.Random) -> dict | None:
    if rng.random() < 0.3:
        return None
    out = {"gbw_hz": 10 ** rng.uniform(5, 8)}
    if rng.random() < 0.5:
        out["rout_ohm"] = round(10 ** rng.uniform(-1, 2.5), 2)  # forces the whole-circuit solve
    return out


def _stock(rng: random.Random, n: int) -> list[dict]:
    out = []
    for i in range(n):
        if i % 2:
            out.append({"kind": "capacitor", "value": 10 ** rng.uniform(-11, -6), "tolerance": 0.05})
        else:
            out.append({"kind": "resistor", "value": 10 ** rng.uniform(2, 6), "tolerance": 0.01})
    return out


def _doc(rng: random.Random, sp: Space) -> dict:
    doc = copy.deepcopy(rng.choice(sp.docs))
    if rng.random() < 0.3:  # an op-amp model with output resistance on every stage
        for st in doc["stages"]:
            for u in st["opamps"]:
                u["gbw_hz"] = 10 ** rng.uniform(6, 8)
                u["rout_ohm"] = round(10 ** rng.uniform(-1, 2), 2)
    return doc


def _grid(rng: random.Random, sp: Space, top: int | None = None) -> dict:
    top = top or sp.lim("max_frequency_points")
    return {"start_hz": 10 ** rng.uniform(0, 2), "stop_hz": 10 ** rng.uniform(4, 6.5),
            "points": rng.randint(2, top)}


def propose(endpoint: str, rng: random.Random, sp: Space) -> tuple[str, dict]:
    """A random request of ``endpoint``: (path, body)."""
    if endpoint == "approximations":
        return "/v1/approximations", _filter(rng, sp)
    if endpoint == "compare":
        f = _filter(rng, sp, by_order=False)
        f.pop("family")
        return "/v1/approximations/compare", f
    if endpoint == "designs":
        body = _filter(rng, sp)
        body["topology"] = rng.choice(TOPOLOGIES)
        if (op := _opamp(rng)) is not None:
            body["opamp"] = op
        if rng.random() < 0.3:
            body["parts"] = {"stock": _stock(rng, rng.randint(1, sp.lim("max_stock_entries")))}
        body["exact"] = rng.random() < 0.2
        body["format"] = rng.choice(["json", "json", "csv", "spice"])
        return "/v1/designs", body
    if endpoint == "evaluate":
        return "/v1/designs/evaluate", _doc(rng, sp)
    if endpoint == "responses":
        body: dict = {"design": _doc(rng, sp)} if rng.random() < 0.7 else {"filter": _filter(rng, sp)}
        body["frequencies"] = _grid(rng, sp)
        if rng.random() < 0.6:
            body["time"] = {"stop_s": 10 ** rng.uniform(-4, -1), "points": rng.randint(2, sp.lim("max_time_points"))}
        body["format"] = rng.choice(["json", "json", "csv", "svg"])
        return "/v1/responses", body
    if endpoint == "tolerance":
        doc = _doc(rng, sp)
        body = {"design": doc, "trials": int(10 ** rng.uniform(1, 5)), "seed": rng.randint(0, 10**6),
                "frequencies": _grid(rng, sp, 2000)}
        if rng.random() < 0.4:
            body["sensitivity_frequencies_hz"] = sorted(10 ** rng.uniform(1, 5) for _ in range(rng.randint(1, 32)))
        if rng.random() < 0.3:
            body["include_trials"] = rng.randint(1, 1000)
        if rng.random() < 0.3:
            body["gbw_spread"] = round(rng.uniform(0.05, 0.5), 2)
        if rng.random() < 0.3:
            body["temperature"] = {"min_c": -40, "max_c": 85}
        body["format"] = rng.choice(["json", "json", "csv", "svg"])
        return "/v1/tolerance", body
    raise ValueError(endpoint)


def mutate(endpoint: str, body: dict, rng: random.Random, sp: Space) -> dict:
    """Push a costly request further: numbers up toward the limits, bigger documents, heavier options."""
    b = copy.deepcopy(body)

    def up(value, top, integer=True):
        v = value * rng.uniform(1.3, 4.0)
        return min(int(v) if integer else v, top)

    if "order" in b:
        b["order"] = min(sp.lim("max_order"), b["order"] + rng.randint(1, 6))
    if "frequencies" in b and isinstance(b["frequencies"], dict):
        b["frequencies"]["points"] = up(b["frequencies"]["points"], sp.lim("max_frequency_points"))
    if "time" in b:
        b["time"]["points"] = up(b["time"]["points"], sp.lim("max_time_points"))
    if "trials" in b:
        b["trials"] = up(b["trials"], sp.lim("max_trials"))
    if "sensitivity_frequencies_hz" in b and rng.random() < 0.5:
        b["sensitivity_frequencies_hz"] = sorted(b["sensitivity_frequencies_hz"]
                                                 + [10 ** rng.uniform(1, 5) for _ in range(16)])[:64]
    if "include_trials" in b:
        b["include_trials"] = up(b["include_trials"], 1000)
    doc_key = "design" if "design" in b else ("stages" in b and None)
    if rng.random() < 0.4 and sp.docs:
        biggest = max(sp.docs, key=lambda d: len(d["stages"]))
        if doc_key == "design":
            b["design"] = copy.deepcopy(biggest)
        elif doc_key is None and endpoint == "evaluate":
            b = copy.deepcopy(biggest)
    stages = (b.get("design") or b).get("stages") if isinstance(b.get("design") or b, dict) else None
    if stages and rng.random() < 0.5:
        for st in stages:
            for u in st.get("opamps", []):
                u["gbw_hz"] = u.get("gbw_hz") or 1e7
                u["rout_ohm"] = max(u.get("rout_ohm") or 0, 10.0)
    if endpoint == "designs":
        if rng.random() < 0.4:
            b["parts"] = {"stock": _stock(rng, sp.lim("max_stock_entries"))}
        if rng.random() < 0.3:
            b["opamp"] = {"gbw_hz": 1e7, "rout_ohm": 50}
    if "format" in b and rng.random() < 0.3 and endpoint in ("responses", "tolerance"):
        b["format"] = "svg"
    return b


# --- measuring one request in a forked child ---------------------------------------------------

def _status_kb(key: str) -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(key + ":"):
            return int(line.split()[1])
    return 0


def measure(client, path: str, body: dict, timeout_s: float) -> tuple[int, float, float, float, str]:
    """(status, CPU s, wall s, added peak RSS MB, note) of one request, in a child process."""
    read_fd, write_fd = os.pipe()
    pid = os.fork()
    if pid == 0:  # child
        os.close(read_fd)
        try:
            base = _status_kb("VmRSS")
            c0, w0 = time.process_time(), time.perf_counter()
            r = client.post(path, json=body)
            cpu, wall = time.process_time() - c0, time.perf_counter() - w0
            peak = _status_kb("VmHWM")
            note = ""
            if r.status_code != 200:
                try:
                    note = str((r.get_json() or {}).get("detail", ""))[:140]
                except Exception:  # not JSON
                    note = r.get_data(as_text=True)[:140]
            os.write(write_fd, json.dumps([r.status_code, cpu, wall, max(0, peak - base) / 1024, note]).encode())
        finally:
            os._exit(0)
    os.close(write_fd)
    started = time.perf_counter()
    ready, _, _ = select.select([read_fd], [], [], timeout_s)
    if not ready:
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        os.close(read_fd)
        return 0, timeout_s, time.perf_counter() - started, 0.0, f"still running after {timeout_s:g} s (killed)"
    data = b""
    while chunk := os.read(read_fd, 65536):
        data += chunk
    os.close(read_fd)
    os.waitpid(pid, 0)
    status, cpu, wall, rss, note = json.loads(data or b'[0, 0, 0, 0, "child died"]')
    return status, cpu, wall, rss, note


def _describe(endpoint: str, body: dict) -> str:
    doc = body.get("design") if isinstance(body.get("design"), dict) else (body if "stages" in body else None)
    bits = []
    if doc:
        rout = any((u.get("rout_ohm") or 0) > 0 for st in doc["stages"] for u in st.get("opamps", []))
        bits.append(f"{len(doc['stages'])} stages" + (" rout>0" if rout else ""))
    for k in ("response", "family", "order", "topology", "trials", "format"):
        if k in body and not isinstance(body[k], (dict, list)):
            bits.append(f"{k}={body[k]}")
    if isinstance(body.get("frequencies"), dict):
        bits.append(f"points={body['frequencies']['points']}")
    if "time" in body:
        bits.append(f"time_points={body['time']['points']}")
    if "sensitivity_frequencies_hz" in body:
        bits.append(f"sens_f={len(body['sensitivity_frequencies_hz'])}")
    if "parts" in body:
        bits.append(f"stock={len(body['parts'].get('stock', []))}")
    if "opamp" in body:
        bits.append(f"opamp={body['opamp']}")
    if "passband_hz" in body:
        bits.append(f"pass={body['passband_hz']} stop={body['stopband_hz']} "
                    f"atten={body['stopband_attenuation_db']}")
    return ", ".join(bits)


def _documents(client, rng: random.Random, sp: Space, n: int) -> list[dict]:
    """Design documents of every size the service designs, from 1 stage to the order limit."""
    docs = []
    wanted = [{"response": "lowpass", "family": "butterworth", "order": 2, "cutoff_hz": 1000},
              {"response": "bandstop", "family": "elliptic", "order": sp.lim("max_order"), "cutoff_hz": [900, 1100],
               "passband_ripple_db": 0.1, "stopband_attenuation_db": 80, "topology": "state_variable"},
              {"response": "bandpass", "family": "chebyshev1", "order": sp.lim("max_order"),
               "cutoff_hz": [35e3, 45e3], "passband_ripple_db": 0.1},
              # by requirement, with a finite op-amp and tolerances: /v1/tolerance verifies every board
              # (most fail the 0.1 dB ripple, so the perturbation bound proves none and all take the full search)
              {"response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
               "passband_ripple_db": 0.1, "stopband_attenuation_db": 80, "opamp": {"gbw_hz": "20MHz"},
               "parts": {"resistors": {"series": "E96", "tolerance": 0.01},
                         "capacitors": {"series": "E12", "tolerance": 0.02, "dielectric": "C0G"}}}]
    tries = 0
    while len(docs) < n and tries < 6 * n:
        body = wanted.pop(0) if wanted else dict(_filter(rng, sp, by_order=True), topology=rng.choice(TOPOLOGIES))
        tries += 1
        r = client.post("/v1/designs", json=body)
        if r.status_code == 200:
            docs.append(r.get_json())
    return docs


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--random", type=int, default=10, help="random proposals per endpoint")
    ap.add_argument("--adversarial", type=int, default=8, help="mutated proposals per endpoint")
    ap.add_argument("--only", default="", help="endpoints, comma-separated")
    ap.add_argument("--timeout", type=float, default=60.0, help="kill a request after this many seconds")
    ap.add_argument("--deadline", type=float, default=3600.0, help="ROLLOFF_REQUEST_DEADLINE_S of the app")
    ap.add_argument("--docs", type=int, default=8, help="design documents in the pool")
    ap.add_argument("--quiet", action="store_true", help="print the summary only")
    args = ap.parse_args()
    app = create_app({"TESTING": True, "log_level": "critical", "request_deadline_s": args.deadline})
    client = app.test_client()
    limits = client.get("/v1/catalog").get_json()["limits"]
    rng = random.Random(args.seed)
    sp = Space(limits)
    sp.docs = _documents(client, rng, sp, args.docs)
    # warm every path once in the parent, so children measure requests, not imports
    for endpoint in ("approximations", "compare", "designs", "evaluate", "responses", "tolerance"):
        path, body = propose(endpoint, random.Random(0), sp)
        client.post(path, json=body)
    print(f"{load()}; seed {args.seed}; limits: " + ", ".join(f"{k}={v['value']}" for k, v in limits.items()))
    print(f"document pool: {sorted(len(d['stages']) for d in sp.docs)} stages")
    endpoints = [e for e in ("approximations", "compare", "designs", "evaluate", "responses", "tolerance")
                 if not args.only or e in args.only.split(",")]
    summary = []
    errors: list[Outcome] = []
    for endpoint in endpoints:
        outcomes: list[Outcome] = []

        def run(label: str, path: str, body: dict) -> None:
            status, cpu, wall, rss, note = measure(client, path, body, args.timeout)
            o = Outcome(endpoint, label, body, status, cpu, wall, rss, note)
            outcomes.append(o)
            if status >= 500 or status == 0 and "killed" not in note:
                errors.append(o)
            if not args.quiet:
                print(f"  {endpoint:<14} {label:<12} {status:>3}  CPU {cpu:6.2f} s  wall {wall:6.2f} s  "
                      f"+RSS {rss:6.0f} MB  {_describe(endpoint, body)[:110]}" + (f"  [{note}]" if note else ""),
                      flush=True)

        for i in range(args.random):
            path, body = propose(endpoint, rng, sp)
            run(f"random {i + 1}", path, body)
        if endpoint == "tolerance":
            # every document with a requirement at the most trials the budget allows (what the 422 says fits)
            for doc in (d for d in sp.docs if d.get("requirement")):
                body = {"design": doc, "trials": sp.lim("max_trials"), "seed": 1}
                said = client.post("/v1/tolerance", json=body).get_json().get("detail", "")
                fits = re.search(r"at most ([\d,]+) trials", said)
                if fits:
                    body["trials"] = int(fits.group(1).replace(",", ""))
                run("at its limit", "/v1/tolerance", body)
        for i in range(args.adversarial):
            pool = sorted([o for o in outcomes if o.allowed], key=lambda o: o.score, reverse=True)[:3]
            if not pool:
                path, body = propose(endpoint, rng, sp)
            else:
                parent = rng.choice(pool)
                path = {"approximations": "/v1/approximations", "compare": "/v1/approximations/compare",
                        "designs": "/v1/designs", "evaluate": "/v1/designs/evaluate", "responses": "/v1/responses",
                        "tolerance": "/v1/tolerance"}[endpoint]
                body = mutate(endpoint, parent.body, rng, sp)
            run(f"adversary {i + 1}", path, body)
        allowed = [o for o in outcomes if o.allowed or "killed" in o.note]
        refused = sum(400 <= o.status < 500 for o in outcomes)
        if allowed:
            slow = max(allowed, key=lambda o: o.cpu_s)
            big = max(allowed, key=lambda o: o.rss_mb)
            summary.append((endpoint, len(outcomes), refused, slow, big))
        else:
            summary.append((endpoint, len(outcomes), refused, None, None))
    print("\nslowest and largest allowed request per endpoint (CPU s, added peak RSS MB; "
          f"flag: over {CPU_BUDGET_S:g} s or {RSS_BUDGET_MB:g} MB)")
    for endpoint, n, refused, slow, big in summary:
        print(f"{endpoint}: {n} proposals, {refused} refused (4xx)")
        if slow is None:
            print("    no allowed request found")
            continue
        for what, o in (("slowest", slow), ("largest", big)):
            flag = "  <-- over" if o.cpu_s > CPU_BUDGET_S or o.rss_mb > RSS_BUDGET_MB else ""
            print(f"    {what}: CPU {o.cpu_s:.2f} s, wall {o.wall_s:.2f} s, +RSS {o.rss_mb:.0f} MB"
                  f"{' (' + o.note + ')' if o.note else ''}{flag}\n      {_describe(endpoint, o.body)}")
    if errors:
        print(f"\n{len(errors)} proposals answered 5xx or crashed (bugs):")
        for o in errors:
            print(f"  {o.endpoint}: {o.status} {o.note}  {_describe(o.endpoint, o.body)}")
    else:
        print("\nno proposal answered 5xx")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
