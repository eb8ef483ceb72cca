"""Run ngspice (the reference simulator) from tests and read its results back.

Shared by the circuit, realization, response and tolerance tests::

    from tests.ngspice import run_ngspice_ac, run_ngspice_ac_trials, run_ngspice_tran

A netlist (as written by ``service.circuit.to_spice``) is copied to a
temporary folder with a ``.control`` block added before ``.end``; ngspice
runs it in batch mode (``ngspice -b``) and writes the requested node
voltages with ``wrdata`` at 17 significant digits.  When ngspice is missing
the helpers raise :class:`NgspiceError` -- a reference check must fail, not
skip, without its reference.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from typing import Mapping, Sequence

import numpy as np

NGSPICE = os.environ.get("NGSPICE", shutil.which("ngspice") or "/usr/bin/ngspice")
TIMEOUT_S = 600


class NgspiceError(RuntimeError):
    """ngspice is missing, failed, or wrote no usable result."""


def _require() -> str:
    if not (os.path.isfile(NGSPICE) and os.access(NGSPICE, os.X_OK)):
        raise NgspiceError(f"ngspice not found at {NGSPICE}: the reference simulator is required for this test")
    return NGSPICE


_END_RE = re.compile(r"^\s*\.end\s*$", re.IGNORECASE | re.MULTILINE)
_AC_RE = re.compile(r"^\s*\.ac\s+(.*)$", re.IGNORECASE | re.MULTILINE)


def _insert_control(netlist: str, control: list[str]) -> str:
    matches = list(_END_RE.finditer(netlist))
    if not matches:
        raise NgspiceError("netlist has no .end line")
    m = matches[-1]
    block = "\n".join([".control", *control, ".endc"]) + "\n"
    return netlist[: m.start()] + block + netlist[m.start():]


def _vectors(nodes: Sequence[str]) -> str:
    return " ".join(f"v({n})" for n in nodes)


def _run(netlist: str) -> list[np.ndarray]:
    """Run a netlist whose control block writes ``result.txt``; return one table per wrdata call."""
    exe = _require()
    with tempfile.TemporaryDirectory(prefix="ngspice-") as tmp:
        path = os.path.join(tmp, "circuit.cir")
        with open(path, "w") as fh:
            fh.write(netlist)
        proc = subprocess.run([exe, "-b", path], cwd=tmp, capture_output=True, text=True, timeout=TIMEOUT_S)
        out = os.path.join(tmp, "result.txt")
        if not os.path.exists(out):
            raise NgspiceError(f"ngspice wrote no result (exit {proc.returncode}):\n{proc.stdout[-2000:]}\n{proc.stderr[-2000:]}")
        with open(out) as fh:
            text = fh.read()
    if re.search(r"^\s*error", proc.stdout + proc.stderr, re.IGNORECASE | re.MULTILINE):
        raise NgspiceError(f"ngspice reported an error:\n{proc.stdout[-2000:]}\n{proc.stderr[-2000:]}")
    tables, rows = [], []
    for line in text.splitlines():
        parts = line.split()
        if not parts:
            continue
        try:
            rows.append([float(p) for p in parts])
        except ValueError:  # a header line starts the next table
            if rows:
                tables.append(np.array(rows))
                rows = []
    if rows:
        tables.append(np.array(rows))
    if not tables:
        raise NgspiceError("ngspice result file is empty")
    return tables


def _ac_command(netlist: str) -> str:
    m = list(_AC_RE.finditer(netlist))
    if not m:
        raise NgspiceError("netlist has no .ac line")
    return "ac " + m[-1].group(1).strip()


def _complex_columns(table: np.ndarray, nodes: Sequence[str]) -> dict[str, np.ndarray]:
    if table.shape[1] != 1 + 2 * len(nodes):
        raise NgspiceError(f"unexpected ngspice table with {table.shape[1]} columns for nodes {list(nodes)}")
    return {n: table[:, 1 + 2 * i] + 1j * table[:, 2 + 2 * i] for i, n in enumerate(nodes)}


_HEAD = ["set wr_vecnames", "set wr_singlescale", "option numdgt=17", "set appendwrite"]


def run_ngspice_ac(netlist: str, nodes: Sequence[str] = ("out",)) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """AC analysis of ``netlist`` (its ``.ac`` line) by ngspice.

    Returns
    -------
    freq_hz : ndarray, shape (F,)
    voltages : dict of node to complex ndarray, shape (F,)
        Node voltages; with ``VIN ... AC 1`` these are transfer functions.
    """
    nodes = tuple(nodes)
    control = _HEAD + ["run", f"wrdata result.txt {_vectors(nodes)}"]
    table = _run(_insert_control(netlist, control))[0]
    return table[:, 0].copy(), _complex_columns(table, nodes)


def run_ngspice_sweeps(netlist: str, sweeps: Sequence[str], node: str = "out") -> list[tuple[np.ndarray, np.ndarray]]:
    """Several AC sweeps of one netlist in one ngspice run.

    Parameters
    ----------
    sweeps : sequence of str
        ngspice ``ac`` arguments, e.g. ``"dec 200 1 1e6"`` or ``"lin 101 900 1100"``.

    Returns
    -------
    list of (freq_hz, complex V(node)), one per sweep.
    """
    control = list(_HEAD)
    for sw in sweeps:
        control += [f"ac {sw}", f"wrdata result.txt {_vectors((node,))}"]
    tables = _run(_insert_control(_AC_RE.sub("", netlist), control))
    if len(tables) != len(sweeps):
        raise NgspiceError(f"expected {len(sweeps)} tables from ngspice, got {len(tables)}")
    return [(t[:, 0].copy(), _complex_columns(t, (node,))[node]) for t in tables]


def run_ngspice_ac_trials(netlist: str, alters: Sequence[Mapping[str, float]], nodes: Sequence[str] = ("out",)
                          ) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Monte Carlo AC analysis in one ngspice run: ``alter`` the named elements, ``ac``, write; per trial.

    Parameters
    ----------
    netlist : str
        Netlist with an ``.ac`` line; its values are trial 0's unless
        ``alters[0]`` changes them.
    alters : sequence of mapping element name -> value
        One mapping per trial (SPICE element names such as ``"R1"``, ``"C3"``;
        values in ohm, farad, henry, or the gain of E/G sources).
    nodes : sequence of str

    Returns
    -------
    freq_hz : ndarray, shape (F,)
    voltages : dict of node to complex ndarray, shape (T, F)
    """
    nodes = tuple(nodes)
    ac = _ac_command(netlist)
    control = list(_HEAD)
    for trial in alters:
        for name, value in trial.items():
            control.append(f"alter {name} = {float(value):.17g}")
        control += [ac, f"wrdata result.txt {_vectors(nodes)}", "destroy all"]
    tables = _run(_insert_control(netlist, control))
    if len(tables) != len(alters):
        raise NgspiceError(f"ngspice returned {len(tables)} of {len(alters)} trials")
    per = [_complex_columns(t, nodes) for t in tables]
    return tables[0][:, 0].copy(), {n: np.stack([p[n] for p in per]) for n in nodes}


_VIN_RE = re.compile(r"^(\s*VIN\s+\S+\s+\S+)\s+.*$", re.IGNORECASE | re.MULTILINE)


def run_ngspice_tran(netlist: str, tstep: float, tstop: float, nodes: Sequence[str] = ("out",), *,
                     rise_s: float | None = None) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Step response by ngspice transient analysis.

    The ``.ac`` line is replaced by ``.tran tstep tstop 0 tstep`` and the
    input ``VIN`` by a 0 -> 1 V step at t = 0 (``PULSE`` with rise time
    ``rise_s``, default ``tstep / 1000``).

    Returns
    -------
    t_s : ndarray, shape (N,)
        Time points chosen by ngspice (at most ``tstep`` apart), s.
    voltages : dict of node to ndarray, shape (N,)
    """
    nodes = tuple(nodes)
    rise = float(rise_s) if rise_s is not None else float(tstep) / 1000.0
    if not _VIN_RE.search(netlist):
        raise NgspiceError("netlist has no VIN source line")
    text = _VIN_RE.sub(lambda m: f"{m.group(1)} PULSE(0 1 0 {rise:.17g} {rise:.17g} {10 * tstop:.17g} {20 * tstop:.17g})",
                       netlist, count=1)
    tran = f".tran {float(tstep):.17g} {float(tstop):.17g} 0 {float(tstep):.17g}"
    if _AC_RE.search(text):
        text = _AC_RE.sub(tran, text)
    else:
        m = list(_END_RE.finditer(text))[-1]
        text = text[: m.start()] + tran + "\n" + text[m.start():]
    control = _HEAD + ["run", f"wrdata result.txt {_vectors(nodes)}"]
    table = _run(_insert_control(text, control))[0]
    if table.shape[1] != 1 + len(nodes):
        raise NgspiceError(f"unexpected ngspice table with {table.shape[1]} columns for nodes {list(nodes)}")
    return table[:, 0].copy(), {n: table[:, 1 + i].copy() for i, n in enumerate(nodes)}


def run_ngspice_noise(netlist: str) -> dict[str, np.ndarray]:
    """Noise analysis of ``netlist`` (its ``.noise`` line) by ngspice.

    Returns
    -------
    dict
        ``frequency_hz`` (F,), ``onoise`` and ``inoise`` spectra (F,) in
        V/sqrt(Hz), ``onoise_total`` and ``inoise_total`` (V RMS, integrated
        by ngspice over the sweep).
    """
    if not re.search(r"^\s*\.noise\s", netlist, re.IGNORECASE | re.MULTILINE):
        raise NgspiceError("netlist has no .noise line")
    control = _HEAD + ["run", "setplot noise1", "wrdata result.txt onoise_spectrum inoise_spectrum",
                       "setplot noise2", "wrdata result.txt onoise_total inoise_total"]
    tables = _run(_insert_control(netlist, control))
    if len(tables) != 2:
        raise NgspiceError(f"ngspice returned {len(tables)} noise tables, expected 2")
    spec, tot = tables
    if spec.shape[1] != 3 or tot.shape != (1, 3):
        raise NgspiceError(f"unexpected ngspice noise tables of shapes {spec.shape} and {tot.shape}")
    return {"frequency_hz": spec[:, 0].copy(), "onoise": spec[:, 1].copy(), "inoise": spec[:, 2].copy(),
            "onoise_total": float(tot[0, 1]), "inoise_total": float(tot[0, 2])}


def run_ngspice_op(netlist: str, nodes: Sequence[str]) -> dict[str, float]:
    """DC operating point of ``netlist`` by ngspice (``op``): the voltage of each node, V."""
    nodes = tuple(nodes)
    control = _HEAD + ["op", f"wrdata result.txt {_vectors(nodes)}"]
    table = _run(_insert_control(netlist, control))[0]
    if table.shape != (1, 1 + len(nodes)):
        raise NgspiceError(f"unexpected ngspice table of shape {table.shape} for nodes {list(nodes)}")
    return {n: float(table[0, 1 + i]) for i, n in enumerate(nodes)}


def run_ngspice_tran_raw(netlist: str, tstep: float, tstop: float, nodes: Sequence[str] = ("out",),
                         tstart: float = 0.0) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Transient analysis of ``netlist`` as written (its sources unchanged), from ``tstart`` to ``tstop``.

    Any ``.ac`` or ``.noise`` line is removed and ``.tran tstep tstop tstart tstep`` added.
    """
    nodes = tuple(nodes)
    text = re.sub(r"^\s*\.(ac|noise)\s.*$", "", netlist, flags=re.IGNORECASE | re.MULTILINE)
    m = list(_END_RE.finditer(text))[-1]
    tran = f".tran {float(tstep):.17g} {float(tstop):.17g} {float(tstart):.17g} {float(tstep):.17g}"
    text = text[: m.start()] + tran + "\n" + text[m.start():]
    control = _HEAD + ["run", f"wrdata result.txt {_vectors(nodes)}"]
    table = _run(_insert_control(text, control))[0]
    if table.shape[1] != 1 + len(nodes):
        raise NgspiceError(f"unexpected ngspice table with {table.shape[1]} columns for nodes {list(nodes)}")
    return table[:, 0].copy(), {n: table[:, 1 + i].copy() for i, n in enumerate(nodes)}
