"""A seeded generator of filter requirements, and their check in ngspice with the chosen parts.

Shared by ``test_requirements_in_ngspice.py``; also runnable on its own to print
the pass rate::

    python -m tests.realization.requirement_cases [seed] [count]

Each case is a requirement (response, family, band edges from audio to 1 MHz,
ripple, attenuation), a parts policy (E12/E24/E96 series or a small stock
list) and an op-amp the service calls adequate: the smallest GBW of a list of
common figures that every stage's op-amp requirement accepts (a predistorted
stage: ``gbw_required_predistorted_hz``; otherwise ``gbw_required_hz``).  The
requirement goes to ``POST /v1/designs`` as a client would send it (the service
tightens it by its margin policy, realizes the stages with that op-amp and
verifies), and the exported netlist (single-pole op-amp subcircuits) runs in
ngspice.  The loss, measured from the largest passband
gain, is then checked at least 200 points per decade over every passband and
stopband segment: passbands up to 10x an open edge (or GBW/20 where the op-amp
ends the band first), stopbands over a factor of 20 beyond their edges.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, field

import numpy as np

from tests.ngspice import run_ngspice_ac

RESPONSES = ("lowpass", "highpass", "bandpass", "bandstop")
FAMILIES = ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "legendre", "linkwitz_riley")
#: Common gain-bandwidth products of op-amp types (Hz), ascending.
GBW_CHOICES = (1e6, 3e6, 10e6, 30e6, 100e6, 300e6, 1e9, 3e9)
#: Fraction of the ripple taken off the passband loss before the approximation (as the service does).
PASSBAND_MARGIN_FRACTION = 0.25
#: Points per decade of the ngspice check.
POINTS_PER_DECADE = 400
#: Numerical tolerance of a margin (dB): margins within it count as 0.
MARGIN_TOLERANCE_DB = 1e-3
#: Factor beyond a stopband edge that the stopband check covers, and beyond an open passband edge.
STOPBAND_SPAN = 20.0
PASSBAND_SPAN = 10.0


@dataclass
class Case:
    label: str
    response: str
    family: str
    passband_hz: object
    stopband_hz: object
    ripple_db: float
    attenuation_db: float
    parts: dict


@dataclass
class Outcome:
    case: Case
    passed: bool
    worst_margin_db: float
    where_hz: float
    gbw_hz: float | None
    opamps: int
    claimed_meets: bool | None
    note: str = ""
    stages: list = field(default_factory=list)
    adequate: bool = True


def _stock(center_f: float, rng) -> list[dict]:
    """Six E6 capacitors spread around the value a 10 kohm level asks at ``center_f``."""
    c0 = 1.0 / (2 * math.pi * center_f * 10e3)
    e6 = np.array([1.0, 1.5, 2.2, 3.3, 4.7, 6.8])
    decade = 10 ** math.floor(math.log10(c0))
    vals = np.concatenate([e6 * decade / 10, e6 * decade, e6 * decade * 10])
    i = int(np.argmin(np.abs(np.log(vals / c0))))
    lo = max(0, i - 3 + int(rng.integers(0, 2)))
    return [{"value": float(v), "tolerance": 0.02, "dielectric": "C0G", "part_id": f"C-{k}"}
            for k, v in enumerate(vals[lo:lo + 6])]


#: Largest section Q and transfer-function order a generated requirement may need (beyond them it is
#: drawn again): a practical filter, buildable with a real op-amp.
MAX_Q = 30.0
MAX_ORDER = 16


def _practical(case: "Case") -> bool:
    from service.approximation import design_by_requirement

    try:
        a = design_by_requirement(case.response, case.family, case.passband_hz, case.stopband_hz,
                                  case.ripple_db * (1 - PASSBAND_MARGIN_FRACTION), case.attenuation_db)
    except Exception:
        return False
    return a.order <= MAX_ORDER and max((s.q or 0.0) for s in a.sections) <= MAX_Q


def generate(seed: int = 12, count: int = 48) -> list[Case]:
    """``count`` requirements, every response and family, from a seeded generator.

    A draw whose approximation needs a Q above :data:`MAX_Q` or an order above :data:`MAX_ORDER`
    is drawn again.
    """
    rng = np.random.default_rng(seed)
    cases = []
    i = 0
    while len(cases) < count:
        case = _draw(len(cases), rng)
        i += 1
        if _practical(case):
            cases.append(case)
    return cases


def _draw(i: int, rng) -> "Case":
    """One requirement (the i-th of the set: its response and family follow i)."""
    response = RESPONSES[i % 4]
    family = FAMILIES[(i // 4 + i) % len(FAMILIES)]
    bessel = family == "bessel"
    if response in ("bandpass", "bandstop") and bessel:
        family = "butterworth"
        bessel = False
    f = float(10 ** rng.uniform(math.log10(50.0), math.log10(200e3 if response in ("lowpass", "bandstop") else 1e6 / 3)))
    ripple = 3.0 if bessel else float(rng.choice([0.1, 0.25, 0.5, 1.0]))
    att = float(rng.uniform(20, 35)) if bessel else float(rng.uniform(30, 70))
    if response in ("lowpass", "highpass"):
        ratio = float(rng.uniform(4.0, 8.0)) if bessel else float(rng.uniform(1.3, 3.0))
        if response == "lowpass":
            pb, sb = f, f * ratio
        else:
            pb, sb = min(f * ratio, 1e6), min(f * ratio, 1e6) / ratio
    else:
        bw = float(rng.uniform(0.15, 0.8))               # relative passband (bandpass) / stopband (bandstop)
        ratio = float(rng.uniform(1.6, 3.0))
        lo, hi = f / math.sqrt(1 + bw), f * math.sqrt(1 + bw)
        if response == "bandpass":
            pb, sb = (lo, hi), (lo / ratio ** 0.5, hi * ratio ** 0.5)
        else:
            sb, pb = (lo, hi), (lo / ratio ** 0.5, hi * ratio ** 0.5)
    kind = i % 5
    if kind == 0:
        parts = {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}
    elif kind == 1:
        parts = {"resistors": {"series": "E24"}, "capacitors": {"series": "E6"}}
    elif kind == 2:
        parts = {"resistors": {"series": "E12"}, "capacitors": {"series": "E12"}}
    elif kind == 3:
        parts = {"resistors": {"series": "E96"}, "capacitors": {"stock": _stock(f, rng)}}
    else:
        parts = {"resistors": {"series": "E24"}, "capacitors": {"series": "E24"}}
    return Case(f"{i:02d}-{response}-{family}-{f:.4g}Hz-{list(parts['resistors'].values())[0]}",
                response, family, pb, sb, ripple, att, parts)


def _client():
    from service import create_app

    return create_app({"TESTING": True, "log_level": "critical"}).test_client()


def request_body(case: Case, gbw: float) -> dict:
    """The ``POST /v1/designs`` body of a case with an op-amp of ``gbw`` (Hz)."""
    parts = {k: dict(v) for k, v in case.parts.items()}
    stock = [dict(e, kind=kind[:-1]) for kind, policy in parts.items() for e in policy.pop("stock", [])]
    if stock:  # the API lists stock entries once, each with its kind
        parts["stock"] = stock
    parts = {k: v for k, v in parts.items() if v}
    return {"response": case.response, "family": case.family, "passband_hz": case.passband_hz,
            "stopband_hz": case.stopband_hz, "passband_ripple_db": case.ripple_db,
            "stopband_attenuation_db": case.attenuation_db, "parts": parts, "opamp": {"gbw_hz": gbw}}


def design(case: Case, client=None, opamp_gbw: float | None = None):
    """The service's design document for ``case`` (through ``POST /v1/designs``) and the GBW it used.

    With ``opamp_gbw`` None, the smallest of :data:`GBW_CHOICES` the design calls adequate.
    """
    client = client or _client()
    choices = GBW_CHOICES if opamp_gbw is None else (opamp_gbw,)
    d = None
    for gbw in choices:
        r = client.post("/v1/designs", json=request_body(case, gbw))
        if r.status_code != 200:
            raise RuntimeError(f"{r.status_code}: {r.get_json().get('detail')}")
        d = r.get_json()
        if adequate(d, gbw):
            return d, gbw
    return d, choices[-1]


def adequate(d: dict, gbw: float) -> bool:
    """Whether the design document calls the op-amp adequate for every stage.

    A predistorted stage needs the GBW its ``gbw_required_predistorted_hz`` states (the nominal
    shift is designed out, the GBW's spread is what is left); a stage used as designed needs its
    ``gbw_required_hz``.
    """
    for st in d["stages"]:
        req = st["opamp_requirement"]
        need = req["gbw_required_predistorted_hz"] if req.get("predistorted") else req["gbw_required_hz"]
        if need is None or gbw < need:
            return False
    return True


def _segments(case: Case, gbw: float | None):
    """``(passbands, stopbands)`` as lists of (lo, hi) in Hz."""
    top = (gbw / 20.0) if gbw else math.inf
    pb, sb = case.passband_hz, case.stopband_hz
    if case.response == "lowpass":
        return [(pb / 100.0, pb)], [(sb, sb * STOPBAND_SPAN)]
    if case.response == "highpass":
        return [(pb, max(pb * 1.0001, min(pb * PASSBAND_SPAN, top)))], [(sb / STOPBAND_SPAN, sb)]
    if case.response == "bandpass":
        return [tuple(pb)], [(sb[0] / STOPBAND_SPAN, sb[0]), (sb[1], sb[1] * STOPBAND_SPAN)]
    return [(pb[0] / 100.0, pb[0]), (pb[1], max(pb[1] * 1.0001, min(pb[1] * PASSBAND_SPAN, top)))], [tuple(sb)]


def _run_ac(netlist: str, lo: float, hi: float):
    import re

    ac = f".ac dec {POINTS_PER_DECADE} {lo!r} {hi!r}"
    text = re.sub(r"^\s*\.ac\s+.*$", ac, netlist, count=1, flags=re.IGNORECASE | re.MULTILINE)
    f, v = run_ngspice_ac(text)
    return f, np.abs(v["out"])


def check(case: Case, d, gbw: float | None) -> Outcome:
    """The design's netlist in ngspice against the requirement as asked (not the tightened one)."""
    passbands, stopbands = _segments(case, gbw)
    edges = [x for seg in passbands + stopbands for x in seg]
    f, mag = _run_ac(d["netlist"], min(edges) / 1.01, max(edges) * 1.01)
    # the band edges themselves, exactly
    fe = np.array(edges)
    fe_, mag_e = _exact_points(d["netlist"], fe)
    f = np.concatenate([f, fe_])
    mag = np.concatenate([mag, mag_e])
    inside = [(f >= lo * (1 - 1e-12)) & (f <= hi * (1 + 1e-12)) for lo, hi in passbands]
    pmask = np.logical_or.reduce(inside)
    ref = float(np.max(mag[pmask]))
    with np.errstate(divide="ignore"):
        loss = 20 * np.log10(ref / np.maximum(mag, 1e-300))
    worst, where = math.inf, float("nan")
    for lo, hi in passbands:
        m = (f >= lo * (1 - 1e-12)) & (f <= hi * (1 + 1e-12))
        margin = case.ripple_db - loss[m]
        j = int(np.argmin(margin))
        if margin[j] < worst:
            worst, where = float(margin[j]), float(f[m][j])
    for lo, hi in stopbands:
        m = (f >= lo * (1 - 1e-12)) & (f <= hi * (1 + 1e-12))
        margin = loss[m] - case.attenuation_db
        j = int(np.argmin(margin))
        if margin[j] < worst:
            worst, where = float(margin[j]), float(f[m][j])
    ops = sum(len(s["opamps"]) for s in d["stages"])
    stages = [f"{s['topology']}/{s['section']['kind']}/Q{(s['section']['q'] or 0):.3g}" for s in d["stages"]]
    return Outcome(case, worst >= -MARGIN_TOLERANCE_DB, worst, where, gbw, ops, d["summary"]["meets"], stages=stages,
                   adequate=adequate(d, gbw))


def _exact_points(netlist: str, freqs: np.ndarray):
    """|V(out)| at each of ``freqs`` (one ngspice run with a ``.ac lin 1`` per point via a control loop)."""
    import re

    from tests.ngspice import _insert_control, _run

    base = re.sub(r"^\s*\.ac\s+.*$\n?", "", netlist, flags=re.IGNORECASE | re.MULTILINE)
    control = ["set wr_vecnames", "set wr_singlescale", "option numdgt=17", "set appendwrite"]
    for x in freqs:
        control += [f"ac lin 1 {float(x)!r} {float(x)!r}", "wrdata result.txt v(out)"]
    tables = _run(_insert_control(base, control))
    rows = np.concatenate([t for t in tables])
    return rows[:, 0], np.hypot(rows[:, 1], rows[:, 2])


def run(seed: int = 12, count: int = 48, verbose=True):
    """Design (through the service) and check (in ngspice) every case; returns the list of :class:`Outcome`."""
    client = _client()
    out = []
    for case in generate(seed, count):
        try:
            d, gbw = design(case, client)
        except Exception as exc:          # a design that fails counts as a miss, with its reason
            o = Outcome(case, False, -math.inf, float("nan"), None, 0, None, note=f"{type(exc).__name__}: {exc}")
        else:
            o = check(case, d, gbw)
        out.append(o)
        if verbose:
            print(f"{'PASS' if o.passed else 'MISS'} {case.label:48s} margin {o.worst_margin_db:+8.3f} dB at "
                  f"{o.where_hz:10.5g} Hz  GBW {o.gbw_hz or 0:8.3g}  op-amps {o.opamps:2d}  claimed "
                  f"{o.claimed_meets}  {' '.join(o.stages)}{o.note[:200]}", flush=True)
    return out


if __name__ == "__main__":
    seed = int(sys.argv[1]) if len(sys.argv) > 1 else 12
    count = int(sys.argv[2]) if len(sys.argv) > 2 else 48
    res = run(seed, count)
    n = len(res)
    ok = sum(o.passed for o in res)
    false_claims = sum(1 for o in res if o.claimed_meets and not o.passed)
    print(f"pass rate {ok}/{n} = {100 * ok / n:.1f} %; claimed to meet but missing: {false_claims}; "
          f"op-amps total {sum(o.opamps for o in res)}")
