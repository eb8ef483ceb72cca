"""Normalized sensitivities and the worst-case (extreme-value) corners.

Sensitivity ``S^y_x = (x/y) dy/dx`` (R. Schaumann, M. E. Van Valkenburg,
*Design of Analog Filters*, Oxford University Press, 2001, sec. 3.1) by
central differences with the circuit engine,
``S ~ (y(x(1+h)) - y(x(1-h))) / (2 h y(x))`` with ``h`` = :data:`REL_STEP`
(truncation error O(h^2), ~1e-8):

- each stage's f0 and Q from the closed form of its topology with ideal
  op-amps, differentiated by the complex step instead (exact to rounding:
  J. N. Lyness, C. B. Moler, SIAM J. Numer. Anal. 4 (1967) 202-210);
- the magnitude of the whole filter (its given op-amp models) in dB per
  percent change of the part, ``(|H|dB(+h) - |H|dB(-h)) / (2 h * 100)``, at
  the sensitivity frequencies; all ``2 P`` perturbed circuits are one batch
  of trials of one engine call.

Parts are ranked by their contribution to the spread: ``|S| * tolerance``
(dB at the tolerance bound, the largest over the sensitivity frequencies;
without frequencies the larger of the f0 and Q contributions), largest first:
the parts that deserve a tighter tolerance.

Worst case (extreme-value analysis, e.g. Schaumann and Van Valkenburg sec.
3.5): at each mask edge every part is set to ``+tol`` or ``-tol`` by the sign
of its magnitude sensitivity there -- once for the corner that raises the
loss, once for the one that lowers it -- and the ``2 E`` corners are one
batch of the engine on the metric grid, so each corner's loss is read
against its own reference gain exactly as a Monte Carlo trial's is.  The
temperature is the reference 25 degC in every corner.
"""

from __future__ import annotations

import math

import numpy as np

from service.circuit import Circuit, ac_response
from service.deadline import check as check_deadline
from service.tolerance import figures as fig
from service.tolerance.grids import Grids
from service.tolerance.sampling import VariedPart

#: Relative step of the central differences.
REL_STEP = 1e-4


def _batch(parts: list[VariedPart], factors: np.ndarray) -> dict[str, np.ndarray]:
    """Circuit values of a batch: ``factors`` (N, P) multiplies each part's nominal value."""
    return {p.key: p.nominal * factors[:, i] for i, p in enumerate(parts)}


def magnitude_sensitivity(circuit: Circuit, parts: list[VariedPart], f_hz: np.ndarray, memory_limit_bytes: int
                          ) -> np.ndarray:
    """dB per percent of every part at ``f_hz``, shape (P, K) (empty when K = 0)."""
    n = len(parts)
    if f_hz.size == 0 or n == 0:
        return np.zeros((n, f_hz.size))
    factors = np.ones((2 * n, n))
    idx = np.arange(n)
    factors[2 * idx, idx] = 1.0 + REL_STEP
    factors[2 * idx + 1, idx] = 1.0 - REL_STEP
    h = ac_response(circuit.with_values(_batch(parts, factors)), f_hz, output="out",
                    memory_limit_bytes=memory_limit_bytes)
    g = fig.gain_db(h)
    return (g[0::2] - g[1::2]) / (2.0 * REL_STEP * 100.0)


def stage_sensitivity(plans, parts: list[VariedPart]) -> dict[str, tuple[float, float | None]]:
    """``{ref: (S^f0, S^Q)}`` of every passive part on its own stage (ideal op-amps; S^Q None for first order).

    The stage topology's closed form differentiated by the complex step
    (:meth:`service.realization.topologies.base.Topology.sensitivities`): exact to rounding, one
    evaluation of the closed form per part.
    """
    out = {}
    for k, plan in enumerate(plans):
        mine = [p for p in parts if p.stage == k and p.kind != "opamp"]
        if not mine:
            continue
        check_deadline("tolerance.sensitivity")
        values = dict(plan.values)
        values.update({p.role: p.nominal for p in mine})
        s = plan.topology.sensitivities(plan.section, plan.strategy, values)
        second = plan.section.order == 2
        for part in mine:
            sf, sq = s[part.role]
            out[part.ref] = (float(sf), float(sq) if second and math.isfinite(sq) else None)
    return out


def rank(parts: list[VariedPart], stage_s: dict, mag_s: np.ndarray, f_hz: np.ndarray) -> list[dict]:
    """Sensitivity rows, largest contribution to the spread first (equal ones by stage, then ref: :func:`_ranked`).

    Returns
    -------
    list of dict
        ``{ref, kind, stage, tolerance, f0, q, magnitude_db_per_pct: {frequency: dB/%},
        contribution_db, contribution_f0_q}``; ``stage`` is 1-based.
    """
    rows = []
    for i, p in enumerate(parts):
        sf, sq = stage_s.get(p.ref, (None, None))
        mag = {_key(f): float(mag_s[i, j]) for j, f in enumerate(f_hz)}
        c_db = float(np.max(np.abs(mag_s[i])) * p.tolerance * 100.0) if f_hz.size else None
        c_fq = max(abs(sf or 0.0), abs(sq or 0.0)) * p.tolerance
        rows.append({"ref": p.ref, "kind": p.kind, "stage": p.stage + 1, "tolerance": p.tolerance,
                     "f0": sf, "q": sq, "magnitude_db_per_pct": mag, "contribution_db": c_db,
                     "contribution_f0_q": c_fq})
    return _ranked(rows)


#: Contributions within this relative difference are equal: the central differences are accurate to about
#: 1e-8 and their rounding moves the last digits, so nearer contributions are listed by stage, then ref.
TIE_RELATIVE = 1e-6


def _contribution(row: dict) -> float:
    return row["contribution_db"] if row["contribution_db"] is not None else row["contribution_f0_q"]


def _natural_ref(ref: str) -> tuple:
    """``"C10"`` after ``"C9"``: the letters, then the number."""
    head = ref.rstrip("0123456789")
    tail = ref[len(head):]
    return (head, int(tail) if tail else -1, ref)


def _ranked(rows: list[dict]) -> list[dict]:
    """``rows`` by contribution, largest first; runs equal within :data:`TIE_RELATIVE` of the run's largest by
    stage, then ref, so the order does not depend on the rounding of equal sensitivities (e.g. the -1/2 of
    every R and C of a unity-gain Sallen-Key stage)."""
    rows = sorted(rows, key=lambda r: (-_contribution(r), _natural_ref(r["ref"])))
    out: list[dict] = []
    run: list[dict] = []
    for r in rows:
        if run and _contribution(r) < _contribution(run[0]) * (1.0 - TIE_RELATIVE):
            out += sorted(run, key=lambda x: (x["stage"], _natural_ref(x["ref"])))
            run = []
        run.append(r)
    return out + sorted(run, key=lambda x: (x["stage"], _natural_ref(x["ref"])))


def _key(f: float) -> str:
    """Mapping key of a frequency (Hz): the shortest repr of the float."""
    return repr(float(f))


def worst_case(circuit: Circuit, parts: list[VariedPart], grids: Grids, edge_s: np.ndarray, nominal_loss: np.ndarray,
               mc_loss: np.ndarray, memory_limit_bytes: int) -> list[dict]:
    """Corners at every mask edge (see the module notes).

    Parameters
    ----------
    edge_s : ndarray (P, E)
        Magnitude sensitivities (dB/%) at the edges.
    nominal_loss : ndarray (E,)
        Nominal loss (dB) at the edges.
    mc_loss : ndarray (T, E)
        Monte Carlo loss (dB) at the edges.

    Returns
    -------
    list of dict
        Two rows per edge (``direction`` ``"max_loss"`` then ``"min_loss"``).
    """
    edges = grids.edges
    if not edges or not parts:
        return []
    n = len(parts)
    tol = np.array([p.tolerance for p in parts])
    signs = np.where(edge_s.T >= 0, 1.0, -1.0)          # (E, P): raises the gain
    corners = np.concatenate([-signs[:, None, :], signs[:, None, :]], axis=1).reshape(-1, n)   # (2E, P)
    h = ac_response(circuit.with_values(_batch(parts, 1.0 + corners * tol)), grids.metric_hz, output="out",
                    memory_limit_bytes=memory_limit_bytes)
    p2 = fig.power(h)
    g = fig.db(p2)
    ref = fig.reference_gain(p2, grids)
    rows = []
    for j, e in enumerate(edges):
        for d, direction in enumerate(("max_loss", "min_loss")):
            r = 2 * j + d
            rows.append({
                "frequency_hz": e.frequency_hz, "band": e.band, "direction": direction,
                "nominal_loss_db": float(nominal_loss[j]),
                "corner": {p.ref: int(corners[r, i]) for i, p in enumerate(parts)},
                "loss_db": float(ref[r] - g[r, e.column]),
                "monte_carlo_min_loss_db": float(np.min(mc_loss[:, j])),
                "monte_carlo_max_loss_db": float(np.max(mc_loss[:, j])),
            })
    return rows


__all__ = ["magnitude_sensitivity", "stage_sensitivity", "rank", "worst_case", "REL_STEP"]
