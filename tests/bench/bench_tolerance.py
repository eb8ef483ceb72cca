"""Benchmark of the tolerance analysis against an ngspice Monte Carlo on the reference design.

Reference design: eighth-order Butterworth lowpass (1 kHz) as four unity-gain
Sallen-Key stages (E96 1 % R, E12 5 % C), Gaussian (tolerance = 3 sigma),
501 log-spaced frequencies 10 Hz ... 100 kHz, 10,000 trials.  ``--mask`` adds
a requirement every trial is verified against for the yield (1 dB to 800 Hz,
40 dB from 2 kHz).

Run:
  python tests/bench/bench_tolerance.py [--trials 10000] [--repeat 5] [--big 0] [--mask] [--spice-trials 500]
  python tests/bench/bench_tolerance.py --http [--rounds 5] [--requests 3] [--spice-trials 10000] [--mask]
  python tests/bench/bench_tolerance.py --profile [--mask] [--max-work 1000000000] [--tree OTHER_CHECKOUT]
  python tests/bench/bench_tolerance.py --compare BEFORE [--after HEAD] [--rounds 8] [--repeat 5]
  python tests/bench/bench_tolerance.py --quick      # a short run of every mode's code path (1,000 trials)

In-process (default): with the allocator thresholds of the service's workers
(``service.malloc.keep_freed_memory``), wall and CPU time (``time.process_time``) of the whole
``run_tolerance`` (percentiles, metrics, sensitivity, worst case, yield) over
repeats after a warm-up (median, IQR, min, max), the peak added RSS of a fresh
process with one BLAS thread (after a warm-up: the peak resident set during the
run, VmHWM reset before it, minus the resident set before it), the peak traced
memory (tracemalloc), and ngspice's wall time
for ``--spice-trials`` trials of a ``.control`` loop that alters every part and
reruns ``ac`` (scaled linearly to ``--trials``), with the ratio.

``--http``: the same request through a live ``rolloff serve`` (one worker, one
BLAS thread, bound to 127.0.0.1 on a free port of ``ROLLOFF_TEST_PORTS`` or
``--port``), timed from sending the request to the last byte of the JSON reply
on a kept-alive connection.  Each of ``--rounds`` rounds runs the ngspice loop
once on the same sampled part values (``--spice-trials``, default all trials,
unscaled) and ``--requests`` requests on a connection opened after the ngspice run, and takes the ratio ngspice / median
request; the median and spread of the rounds' ratios are printed, with the
worker's peak RSS (VmHWM) added by the requests.  The cost model may refuse a
request it estimates above ``ROLLOFF_MAX_WORK``; ``--max-work`` sets that
variable for the server (printed when set).

``--profile``: cProfile of one in-process ``run_tolerance`` and of one whole
request through the Flask test client (body parsing, document reading,
computation, encoding), top entries by cumulative and by own CPU time; ``--max-work``
sets the app's work limit (the 10,000-trial reference request is above the
default one).  ``--tree PATH`` profiles another checkout's ``service`` (for
example ``git archive main service tests`` extracted in a folder: the profile
before a change).

``--compare BEFORE`` times two commits in one run: both are extracted with
``git archive`` (the AFTER tree whole, the BEFORE tree the same except
``service/circuit``, ``service/tolerance`` and ``service/workflows/tolerancing.py``
taken from BEFORE), and fresh
processes of each alternate, round by round, with ``OPENBLAS_NUM_THREADS=1``.
It prints each side's wall and CPU times and the per-round ratios before/after.

The load average is printed with every figure: the machine may be shared.
"""

from __future__ import annotations

import argparse
import cProfile
import http.client
import io
import json
import os
import pstats
import resource
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import tracemalloc

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from benchlib import extract_trees, load  # noqa: E402  (tests/bench/benchlib.py)

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
# a --compare child imports the service from the tree it is given
TREE = sys.argv[sys.argv.index("--tree") + 1] if "--tree" in sys.argv else ROOT
sys.path.insert(0, TREE)


def serving_allocator() -> None:
    """The allocator thresholds of the service's workers (``service/gunicorn_conf.py``), where the tree has them.

    In-process runs then reuse freed memory as a worker does; a tree older
    than ``service/malloc.py`` keeps glibc's defaults.
    """
    try:
        from service.malloc import keep_freed_memory
    except ImportError:
        return
    keep_freed_memory()

F_START, F_STOP, F_POINTS = 10.0, 1e5, 501
F = np.logspace(1, 5, F_POINTS)
#: The mask of ``--mask`` (lowpass: loss at most 1 dB to 800 Hz, at least 40 dB from 2 kHz).
MASK = {"response": "lowpass", "passband_hz": 800.0, "stopband_hz": 2000.0, "passband_ripple_db": 1.0,
        "stopband_attenuation_db": 40.0}


def reference_document() -> dict:
    """The reference design's document (as ``POST /v1/designs`` returns it)."""
    from service.approximation import design_by_order
    from service.realization import design_filter
    from service.workflows import outcome_of
    return outcome_of(design_filter(design_by_order("lowpass", "butterworth", 8, 1000.0),
                                    topology="sallen_key")).as_dict()


def mask_criteria():
    from service.workflows import Requirement
    return Requirement(**MASK).criteria(finite_opamps=False)


def request_body(doc: dict, trials: int, seed: int, masked: bool) -> dict:
    body = {"design": doc, "trials": trials, "seed": seed, "distribution": "gaussian",
            "frequencies": {"start_hz": F_START, "stop_hz": F_STOP, "points": F_POINTS, "spacing": "log"}}
    if masked:
        body["mask"] = {k: v for k, v in MASK.items() if k != "response"}
    return body


class InProcess:
    """``run_tolerance`` of the reference document, read once (plans, draw order, response type)."""

    def __init__(self, masked: bool):
        import inspect
        from service.tolerance import run_tolerance
        from service.workflows import DesignDocument
        self.doc = reference_document()
        document = DesignDocument.from_json(self.doc)
        self.plans = document.plans()
        self.kw = dict(draw_order=document.draw_order(),
                       response=None if document.response is None else document.response.value,
                       criteria=mask_criteria() if masked else None, frequencies_hz=F)
        if "checked_plans" in inspect.signature(run_tolerance).parameters:   # (an older tree checks them again)
            self.kw["checked_plans"] = True                                   # as the workflow passes them

    def __call__(self, trials: int, seed: int = 1, **kw):
        from service.tolerance import run_tolerance
        return run_tolerance(self.plans, trials=trials, seed=seed, **self.kw, **kw)


def stats(xs, unit="s") -> str:
    xs = np.asarray(xs, dtype=float)
    q1, med, q3 = np.percentile(xs, [25, 50, 75])
    return f"median {med:.3f} {unit}  IQR {q3 - q1:.3f}  min {xs.min():.3f}  max {xs.max():.3f}  (n={xs.size})"


def timed_runs(run: InProcess, trials: int, repeat: int) -> tuple[list[float], list[float]]:
    """Wall and CPU times (s) of ``repeat`` whole runs (after the caller's warm-up)."""
    wall, cpu = [], []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        run(trials)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return wall, cpu


def compare_child(trials: int, repeat: int, masked: bool) -> None:
    """One side of --compare (tree ``TREE``): warm-up, timed runs, traced peak; print JSON."""
    run = InProcess(masked)
    run(200)
    wall, cpu = timed_runs(run, trials, repeat)
    tracemalloc.start()
    run(trials)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(json.dumps({"wall": wall, "cpu": cpu, "peak": peak}))


def compare(before: str, after: str, rounds: int, repeat: int, trials: int, masked: bool) -> None:
    """Alternate fresh processes of the two trees; print each side's times and the before/after ratios."""
    print(f"compare {before} (before) with {after} (after), {rounds} rounds x {repeat} timed runs, "
          f"{trials} trials x {F.size} frequencies{', verified against the mask' if masked else ''}; {load()}")
    cmd = [sys.executable, os.path.abspath(__file__)]
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    with tempfile.TemporaryDirectory(prefix="bench-compare-") as tmp:
        tb, ta = extract_trees(before, after, tmp, packages=("service/circuit", "service/tolerance",
                                                              "service/workflows/tolerancing.py"))
        res = {"before": {"wall": [], "cpu": [], "peak": []}, "after": {"wall": [], "cpu": [], "peak": []}}
        ratio = {"wall": [], "cpu": []}
        for r in range(rounds):
            med = {}
            order = (("before", tb), ("after", ta)) if r % 2 == 0 else (("after", ta), ("before", tb))
            for side, tree in order:
                out = subprocess.run(cmd + ["--compare-child", "--tree", tree, "--trials", str(trials),
                                            "--repeat", str(repeat)] + (["--mask"] if masked else []),
                                     capture_output=True, text=True, env=env, check=True, cwd=tree)
                d = json.loads(out.stdout.strip().splitlines()[-1])
                for k in ("wall", "cpu"):
                    res[side][k] += d[k]
                res[side]["peak"].append(d["peak"])
                med[side] = {k: float(np.median(d[k])) for k in ("wall", "cpu")}
            for k in ratio:
                ratio[k].append(med["before"][k] / med["after"][k])
        print(f"\n== OPENBLAS_NUM_THREADS=1  ({load()})")
        for side in ("before", "after"):
            print(f"  {side:6s} wall {stats(res[side]['wall'])}")
            print(f"  {side:6s} CPU  {stats(res[side]['cpu'])}   peak traced {max(res[side]['peak']) / 2**20:.0f} MiB")
        for k in ratio:
            print(f"  ratio before/after, {k:4s} (per round): {stats(ratio[k], 'x')}")


def _status_mib(pid, key: str) -> float:
    with open(f"/proc/{pid}/status") as fh:
        for line in fh:
            if line.startswith(key + ":"):
                return int(line.split()[1]) / 1024
    return float("nan")


def child(trials: int, masked: bool) -> None:
    """Fresh process: one warm-up, one timed run; print JSON with wall time, the resident set before the run and
    its peak during the run (VmHWM, reset after the warm-up through /proc/self/clear_refs)."""
    run = InProcess(masked)
    run(100)
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")                       # resets the peak resident set to the current one
    except OSError:
        pass
    base = _status_mib("self", "VmRSS")
    t0, c0 = time.perf_counter(), time.process_time()
    run(trials)
    dt, dc = time.perf_counter() - t0, time.process_time() - c0
    peak = _status_mib("self", "VmHWM")
    if peak != peak:
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"wall_s": dt, "cpu_s": dc, "maxrss_mib": peak, "before_mib": base}))


def fresh(trials: int, masked: bool) -> dict:
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    out = subprocess.run([sys.executable, os.path.abspath(__file__), "--child", str(trials)]
                         + (["--mask"] if masked else []), capture_output=True, text=True, env=env, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


# ---------------------------------------------------------------- ngspice

def spice_deck(doc: dict, trials: int, seed: int) -> str:
    """One ngspice deck: a ``.control`` loop altering every R and C to each trial's sampled values, then ``ac``.

    The values are those the service draws for ``seed`` (same parts, order and generator).
    """
    from service.circuit import ElementKind, to_spice
    from service.realization import cascade_circuit
    from service.tolerance.sampling import draw, resolve_distribution, varied_parts
    from service.workflows import DesignDocument
    from tests.ngspice import _HEAD, _ac_command, _insert_control
    document = DesignDocument.from_json(doc)
    plans = document.plans()
    parts = varied_parts(plans, document.draw_order(), resolve_distribution("gaussian"), None, None)
    values = draw(parts, trials, seed, None).values
    ckt = cascade_circuit(plans).with_values(values)
    varied = [el for el in ckt.elements if el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR)]
    net = to_spice(ckt, ac=("dec", 125, F_START, F_STOP), trial=0)
    ac = _ac_command(net)
    control = list(_HEAD)
    for i in range(trials):
        control += [f"alter {el.name} = {float(el.value[i]):.17g}" for el in varied]
        control += [ac, "wrdata result.txt v(out)", "destroy all"]
    return _insert_control(net, control)


def ngspice_once(deck_path: str, trials: int) -> float:
    """Wall time (s) of one ngspice batch run of the deck (checks that every trial was written)."""
    from tests.ngspice import NGSPICE
    tmp = os.path.dirname(deck_path)
    res = os.path.join(tmp, "result.txt")
    if os.path.exists(res):
        os.remove(res)
    t0 = time.perf_counter()
    subprocess.run([NGSPICE, "-b", deck_path], cwd=tmp, capture_output=True)   # exits 1 after a .control loop
    dt = time.perf_counter() - t0
    with open(res) as fh:
        if sum(1 for line in fh if line.lstrip().startswith("frequency")) != trials:
            raise RuntimeError("ngspice did not write every trial")
    return dt


def ngspice_times(doc: dict, trials: int, repeat: int, seed: int = 1) -> list[float]:
    with tempfile.TemporaryDirectory(prefix="bench-ngspice-") as tmp:
        path = os.path.join(tmp, "mc.cir")
        with open(path, "w") as fh:
            fh.write(spice_deck(doc, trials, seed))
        return [ngspice_once(path, trials) for _ in range(repeat)]


# ---------------------------------------------------------------- live service

def free_port(explicit: int | None) -> int:
    if explicit:
        return explicit
    lo, hi = 18000, 18999
    spec = os.environ.get("ROLLOFF_TEST_PORTS")
    if spec:
        lo, hi = (int(x) for x in spec.split("-"))
    for port in range(lo, hi + 1):
        with socket.socket() as s:
            try:
                s.bind(("127.0.0.1", port))
            except OSError:
                continue
            return port
    raise RuntimeError(f"no free port in {lo}-{hi}")


class Service:
    """``rolloff serve`` with one worker and one BLAS thread, in its own process group."""

    def __init__(self, port: int, max_work: str | None):
        self.port = port
        self.metrics_dir = tempfile.mkdtemp(prefix="bench-tolerance-metrics-")
        env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1",
                   PROMETHEUS_MULTIPROC_DIR=self.metrics_dir, ROLLOFF_LOG_LEVEL="warning")
        if max_work:
            env["ROLLOFF_MAX_WORK"] = max_work
        self.proc = subprocess.Popen([sys.executable, "-m", "service", "serve", "--host", "127.0.0.1",
                                      "--port", str(port), "--workers", "1"], cwd=TREE, env=env,
                                     stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            try:
                c = http.client.HTTPConnection("127.0.0.1", port, timeout=5)
                c.request("GET", "/readyz")
                if c.getresponse().status == 200:
                    c.close()
                    break
            except OSError:
                time.sleep(0.2)
        else:
            self.stop()
            raise RuntimeError("the service did not become ready")
        self.conn = None
        self.reconnect()

    def reconnect(self) -> None:
        """A new kept-alive connection (the server closes idle ones), opened with a GET /healthz."""
        if self.conn is not None:
            self.conn.close()
        self.conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=120)
        self.conn.request("GET", "/healthz")
        self.conn.getresponse().read()

    def worker_pid(self) -> int:
        with open(f"/proc/{self.proc.pid}/task/{self.proc.pid}/children") as fh:
            kids = [int(x) for x in fh.read().split()]
        return kids[0]

    def peak_rss_mib(self) -> float:
        """VmHWM (peak resident set) of the worker, MiB."""
        return _status_mib(self.worker_pid(), "VmHWM")

    def post(self, body: bytes) -> tuple[float, bytes]:
        """Wall time (s) from sending the request to the reply's last byte, and the reply."""
        t0 = time.perf_counter()
        self.conn.request("POST", "/v1/tolerance", body=body, headers={"Content-Type": "application/json"})
        r = self.conn.getresponse()
        data = r.read()
        dt = time.perf_counter() - t0
        if r.status != 200:
            raise RuntimeError(f"/v1/tolerance answered {r.status}: {data[:600]!r}")
        return dt, data

    def stop(self) -> None:
        try:
            self.conn.close()
        except Exception:
            pass
        if self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                os.killpg(self.proc.pid, signal.SIGKILL)
                self.proc.wait()
        shutil.rmtree(self.metrics_dir, ignore_errors=True)


def http_bench(trials: int, rounds: int, requests: int, spice_trials: int, masked: bool, port: int | None,
               max_work: str | None, seed: int = 1) -> None:
    doc = reference_document()
    body = json.dumps(request_body(doc, trials, seed, masked)).encode()
    spice_trials = spice_trials or trials
    scale = trials / spice_trials
    svc = Service(free_port(port), max_work)
    try:
        print(f"POST /v1/tolerance on a live `rolloff serve` (1 worker, OPENBLAS_NUM_THREADS=1, port {svc.port}"
              f"{', ROLLOFF_MAX_WORK=' + max_work if max_work else ''}): reference design, {trials} trials x "
              f"{F_POINTS} frequencies, Gaussian{', verified against the mask' if masked else ''}; "
              f"body {len(body) / 1024:.0f} KiB; {load()}")
        idle = svc.peak_rss_mib()
        dt, data = svc.post(body)                      # warm-up (first request of the worker)
        reply = json.loads(data)
        assert reply["trial_count"] == trials and len(reply["frequency_hz"]) == F_POINTS
        print(f"  reply {len(data) / 1024:.0f} KiB; warm-up request {dt:.3f} s; worker peak RSS after it "
              f"{svc.peak_rss_mib():.0f} MiB")
        rss0 = svc.peak_rss_mib()
        http_t, spice_t, ratios = [], [], []
        with tempfile.TemporaryDirectory(prefix="bench-ngspice-") as tmp:
            deck = os.path.join(tmp, "mc.cir")
            with open(deck, "w") as fh:
                fh.write(spice_deck(doc, spice_trials, seed))
            for r in range(rounds):
                s = ngspice_once(deck, spice_trials) * scale
                svc.reconnect()
                hs = [svc.post(body)[0] for _ in range(requests)]
                http_t += hs
                spice_t.append(s)
                ratios.append(s / float(np.median(hs)))
                print(f"  round {r + 1}: ngspice {s:.2f} s{' (scaled)' if scale != 1 else ''}, requests "
                      + ", ".join(f"{h:.3f}" for h in hs) + f" s, ratio {ratios[-1]:.1f}x  ({load()})")
        print(f"HTTP request:        {stats(http_t)}")
        print(f"ngspice {spice_trials} trials{f' scaled x{scale:g}' if scale != 1 else ''}: {stats(spice_t)}")
        print(f"ratio ngspice / HTTP (per round, median of {requests} requests): {stats(ratios, 'x')}")
        peak = svc.peak_rss_mib()
        print(f"worker peak RSS {peak:.0f} MiB: added by the requests {peak - idle:.0f} MiB over the idle worker "
              f"({idle:.0f} MiB), by the timed ones {peak - rss0:.0f} MiB over the warm-up's peak  ({load()})")
    finally:
        svc.stop()


# ---------------------------------------------------------------- profile

def profile(trials: int, masked: bool, max_work: str | None = None, top: int = 30) -> None:
    from service import create_app
    run = InProcess(masked)
    body = json.dumps(request_body(run.doc, trials, 1, masked))
    app = create_app({"max_work": int(max_work)} if max_work else None)
    client = app.test_client()

    def request():
        r = client.post("/v1/tolerance", data=body, content_type="application/json")
        if r.status_code != 200:
            raise RuntimeError(r.get_data(as_text=True)[:600])
        return r.get_data()

    for name, fn in (("run_tolerance, in-process", lambda: run(trials)), ("POST /v1/tolerance, test client", request)):
        fn()
        pr = cProfile.Profile(time.process_time)         # CPU time: the figures hold on a loaded machine
        t0, c0 = time.perf_counter(), time.process_time()
        pr.enable()
        fn()
        pr.disable()
        print(f"== {name}: {time.process_time() - c0:.3f} s CPU ({time.perf_counter() - t0:.3f} s wall) under the "
              f"profiler, whose times are CPU seconds ({load()})")
        for key in ("cumulative", "tottime"):
            s = io.StringIO()
            pstats.Stats(pr, stream=s).strip_dirs().sort_stats(key).print_stats(top)
            print("\n".join(line for line in s.getvalue().splitlines() if line.strip())[:12000])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--trials", type=int, default=10000)
    ap.add_argument("--spice-trials", type=int, default=None,
                    help="ngspice trials (default: 500 in-process, scaled; all trials with --http)")
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--big", type=int, default=0, help="also time this many trials in a fresh process")
    ap.add_argument("--mask", action="store_true", help="verify every trial against the mask (yield)")
    ap.add_argument("--http", action="store_true", help="through a live rolloff serve, against ngspice per round")
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--requests", type=int, default=3, help="requests per round (--http)")
    ap.add_argument("--port", type=int, default=None)
    ap.add_argument("--max-work", default=None, help="ROLLOFF_MAX_WORK of the server (--http) or the app (--profile)")
    ap.add_argument("--profile", action="store_true")
    ap.add_argument("--quick", action="store_true", help="short runs of every mode")
    ap.add_argument("--child", type=int, default=0)
    ap.add_argument("--compare", metavar="BEFORE", help="commit to time against --after, in one run")
    ap.add_argument("--after", default="HEAD")
    ap.add_argument("--compare-child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--tree", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if not a.http:
        serving_allocator()
    if a.child:
        child(a.child, a.mask)
        return
    if a.compare_child:
        compare_child(a.trials, a.repeat, a.mask)
        return
    if a.compare:
        compare(a.compare, a.after, a.rounds, a.repeat, a.trials, a.mask)
        return
    if a.quick:
        a.trials, a.repeat, a.rounds, a.requests = 1000, 2, 2, 2
        a.spice_trials = a.spice_trials or 100
    if a.profile:
        profile(a.trials, a.mask, a.max_work)
        return
    if a.http:
        http_bench(a.trials, a.rounds, a.requests, a.spice_trials or a.trials, a.mask, a.port, a.max_work)
        if not a.quick:
            return
    run = InProcess(a.mask)
    print(f"reference design, {a.trials} trials x {F.size} frequencies{', verified against the mask' if a.mask else ''}"
          f", OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}, {load()}")
    run(200)
    times, cpu = timed_runs(run, a.trials, a.repeat)
    print("run_tolerance in-process: wall", stats(times))
    print("run_tolerance in-process: CPU ", stats(cpu), f"({load()})")
    tracemalloc.start()
    run(a.trials)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(f"  peak traced memory {peak / 2**20:.1f} MiB")
    rs = [fresh(a.trials, a.mask) for _ in range(3)]
    print(f"  fresh process (OPENBLAS_NUM_THREADS=1): wall {stats([r['wall_s'] for r in rs])}; "
          f"CPU {stats([r['cpu_s'] for r in rs])}; peak RSS added by the run "
          f"{max(r['maxrss_mib'] - r['before_mib'] for r in rs):.0f} MiB (resident before the run, after import "
          f"and a warm-up: {min(r['before_mib'] for r in rs):.0f} MiB)")
    if a.big:
        rs = [fresh(a.big, a.mask) for _ in range(2)]
        print(f"{a.big} trials, fresh process: wall {stats([r['wall_s'] for r in rs])}; peak RSS added "
              f"{max(r['maxrss_mib'] - r['before_mib'] for r in rs):.0f} MiB")
    spice_trials = a.spice_trials or min(a.trials, 500)
    st = ngspice_times(run.doc, spice_trials, max(3, a.repeat // 2))
    scale = a.trials / spice_trials
    print(f"ngspice .control/alter loop, {spice_trials} trials: {stats(st)}; scaled to {a.trials}: "
          f"{np.median(st) * scale:.2f} s")
    print(f"speed ratio (ngspice scaled / run_tolerance median): {np.median(st) * scale / np.median(times):.1f}x")


if __name__ == "__main__":
    main()
