"""Systems whose response is analysed: an ideal transfer function or a circuit.

Both kinds expose the same small protocol used by :func:`service.response.analyze`:

- ``evaluate(frequency_hz) -> complex ndarray`` the response H(j*2*pi*f);
- ``zpk() -> (zeros, poles, gain)`` in rad/s, or ``None`` when not available;
- ``group_delay(frequency_hz) -> float ndarray`` in seconds.

Hertz are converted to rad/s here, in one place.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterable, Sequence

import numpy as np

from service.approximation.types import Section, SectionKind
from service.response import zpk as _zpk
from service.response.errors import ImproperSystem

TWO_PI = 2.0 * math.pi


def _as_roots(values: Any, name: str) -> np.ndarray:
    arr = np.asarray(values if values is not None else [], dtype=complex).ravel()
    if not np.all(np.isfinite(arr)):
        raise ImproperSystem(f"{name} must be finite complex numbers (rad/s)", field=name)
    return arr


@dataclass(frozen=True)
class ZpkSystem:
    """An ideal transfer function H(s) = gain * prod(s - z) / prod(s - p).

    Parameters
    ----------
    zeros : array_like of complex, shape (nz,)
        Zeros in rad/s (complex ones in conjugate pairs).
    poles : array_like of complex, shape (np,)
        Poles in rad/s, all with negative real part (a stable filter).
    gain : float
        Real factor k.

    Raises
    ------
    ImproperSystem
        When nz > np (improper), a pole is not in the open left half-plane,
        or a value is not finite.
    """

    zeros: np.ndarray
    poles: np.ndarray
    gain: float

    def __post_init__(self):
        z = _as_roots(self.zeros, "zeros")
        p = _as_roots(self.poles, "poles")
        g = complex(self.gain)
        if abs(g.imag) > 1e-9 * max(abs(g.real), 1e-300) or not math.isfinite(g.real):
            raise ImproperSystem("gain must be a finite real number", field="gain")
        if z.size > p.size:
            raise ImproperSystem(
                f"the transfer function is improper: {z.size} zeros but only {p.size} poles", field="zeros")
        if p.size == 0:
            raise ImproperSystem("the transfer function needs at least one pole", field="poles")
        if np.any(p.real >= 0):
            raise ImproperSystem("every pole must have a negative real part (a stable filter)", field="poles")
        object.__setattr__(self, "zeros", z)
        object.__setattr__(self, "poles", p)
        object.__setattr__(self, "gain", float(g.real))

    @classmethod
    def from_sections(cls, sections: Iterable[Section]) -> "ZpkSystem":
        """Cascade of standard-form sections (see :class:`SectionKind`)."""
        zs, ps, k = [], [], 1.0
        for i, sec in enumerate(sections):
            z, p, g = section_zpk(sec, index=i)
            zs.append(z)
            ps.append(p)
            k *= g
        if not ps:
            raise ImproperSystem("at least one section is needed", field="sections")
        return cls(np.concatenate(zs), np.concatenate(ps), k)

    @classmethod
    def from_approximation(cls, approximation: Any) -> "ZpkSystem":
        """From any object with ``zeros``, ``poles`` (rad/s) and ``gain`` attributes."""
        return cls(approximation.zeros, approximation.poles, approximation.gain)

    # -- protocol -----------------------------------------------------------
    def evaluate(self, frequency_hz: np.ndarray) -> np.ndarray:
        """H(j*2*pi*f), complex128 array of the shape of ``frequency_hz``."""
        f = np.asarray(frequency_hz, dtype=float)
        return _zpk.freqresp(self.zeros, self.poles, self.gain, TWO_PI * f.ravel()).reshape(f.shape)

    def zpk(self) -> tuple[np.ndarray, np.ndarray, float]:
        """(zeros, poles, gain) in rad/s."""
        return self.zeros, self.poles, self.gain

    def group_delay(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Analytic group delay (s), see :func:`service.response.zpk.group_delay`."""
        f = np.asarray(frequency_hz, dtype=float)
        return _zpk.group_delay(self.zeros, self.poles, TWO_PI * f.ravel()).reshape(f.shape)

    def phase(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Unwrapped phase (rad) from the angles of the factors."""
        f = np.asarray(frequency_hz, dtype=float)
        return _zpk.phase(self.zeros, self.poles, self.gain, TWO_PI * f.ravel())


@dataclass(frozen=True)
class CircuitSystem:
    """A circuit from :mod:`service.circuit`, observed at one output node.

    The frequency response comes from the circuit engine's AC solution
    (``ac_response``); the group delay and the time responses come from the
    circuit's exact transfer function (``transfer_function_zpk``) when the
    engine provides it, else the group delay is taken from the complex
    derivative of the AC response, tau = -Im(H'(w) / H(w)).

    Parameters
    ----------
    circuit : service.circuit.Circuit
    output : str
        Output node name (``"out"`` in every design netlist).
    """

    circuit: Any
    output: str = "out"
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def evaluate(self, frequency_hz: np.ndarray) -> np.ndarray:
        """H(j*2*pi*f) from the AC solution, complex128 of the shape of ``frequency_hz``."""
        from service.circuit import prepare_ac

        f = np.asarray(frequency_hz, dtype=float)
        prepared = self._cache.get("prepared")
        if prepared is None:
            # the first grid prepares the circuit (its per-stage coefficients); later grids, such as the
            # refinement of metrics between grid points, only evaluate them again
            prepared = self._cache["prepared"] = prepare_ac(self.circuit, f.ravel(), output=self.output)
        else:
            prepared = prepared.on_grid(f.ravel())
        h = np.asarray(prepared.response(), dtype=complex)
        if h.ndim == 2:
            h = h[0]
        return h.reshape(f.shape)

    def zpk(self) -> tuple[np.ndarray, np.ndarray, float] | None:
        """Exact (zeros, poles, gain) in rad/s, or None if it cannot be had."""
        if "zpk" not in self._cache:
            try:
                from service.circuit import transfer_function_zpk
            except ImportError:
                self._cache["zpk"] = None
            else:
                z, p, k = transfer_function_zpk(self.circuit, output=self.output)
                z = np.asarray(z, dtype=complex).ravel()
                p = np.asarray(p, dtype=complex).ravel()
                self._cache["zpk"] = (z, p, float(np.real(k)))
        return self._cache["zpk"]

    def group_delay(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Group delay (s): analytic from the exact zpk, else from dH/dw."""
        f = np.asarray(frequency_hz, dtype=float)
        zpk = self.zpk()
        if zpk is not None:
            return _zpk.group_delay(zpk[0], zpk[1], TWO_PI * f.ravel()).reshape(f.shape)
        return complex_derivative_delay(self.evaluate, f)

    def phase(self, frequency_hz: np.ndarray, h: np.ndarray | None = None) -> np.ndarray:
        """Unwrapped phase (rad) of the AC response."""
        if h is None:
            h = self.evaluate(frequency_hz)
        return np.unwrap(np.angle(h))


def complex_derivative_delay(evaluate, frequency_hz: np.ndarray, rel_step: float = 1e-5) -> np.ndarray:
    """Group delay tau = -Im(dH/dw / H) with a central difference of H (s).

    Parameters
    ----------
    evaluate : callable
        ``evaluate(f_hz) -> complex ndarray``.
    frequency_hz : ndarray of float, shape (F,)
    rel_step : float
        Relative frequency step of the central difference.
    """
    f = np.asarray(frequency_hz, dtype=float).ravel()
    h_step = np.maximum(np.abs(f) * rel_step, 1e-9)
    hp = evaluate(f + h_step)
    hm = evaluate(np.maximum(f - h_step, 0.0))
    df = (f + h_step) - np.maximum(f - h_step, 0.0)
    h0 = evaluate(f)
    dh_dw = (hp - hm) / (TWO_PI * df)
    ok = np.abs(h0) > 0
    return -np.imag(np.divide(dh_dw, h0, out=np.zeros_like(h0), where=ok))


def _quadratic_roots(w0: float, q: float) -> np.ndarray:
    """Roots of s^2 + s*w0/q + w0^2 (rad/s)."""
    a = 1.0 / (2.0 * q)
    disc = complex(a * a - 1.0)
    r = np.sqrt(disc)
    return w0 * np.array([-a + r, -a - r], dtype=complex)


def section_zpk(section: Section, index: int = 0) -> tuple[np.ndarray, np.ndarray, float]:
    """(zeros, poles, gain) in rad/s of one standard-form section.

    The forms are those of :class:`service.approximation.types.SectionKind`
    (w0 = 2*pi*f0_hz, wz = 2*pi*fz_hz).

    Raises
    ------
    ImproperSystem
        For a non-positive f0 or Q, a missing fz for the notch kinds, or an
        order other than 1 or 2.
    """
    where = f"sections[{index}]"
    kind = SectionKind(section.kind)
    if section.order not in (1, 2):
        raise ImproperSystem(f"{where}.order must be 1 or 2", field=f"{where}.order")
    if not (section.f0_hz and section.f0_hz > 0 and math.isfinite(section.f0_hz)):
        raise ImproperSystem(f"{where}.f0_hz must be a positive frequency", field=f"{where}.f0_hz")
    w0 = TWO_PI * section.f0_hz
    g = float(section.gain)
    empty = np.zeros(0, dtype=complex)
    if section.order == 1:
        p = np.array([-w0], dtype=complex)
        if kind is SectionKind.LOWPASS:
            return empty, p, g * w0
        if kind is SectionKind.HIGHPASS:
            return np.zeros(1, dtype=complex), p, g
        if kind is SectionKind.ALLPASS:
            return np.array([w0], dtype=complex), p, -g
        raise ImproperSystem(f"{where}: a first-order section must be lowpass, highpass or allpass",
                             field=f"{where}.kind")
    q = section.q
    if q is None or not (q > 0 and math.isfinite(q)):
        raise ImproperSystem(f"{where}.q must be a positive number", field=f"{where}.q")
    p = _quadratic_roots(w0, q)
    if kind is SectionKind.LOWPASS:
        return empty, p, g * w0 * w0
    if kind is SectionKind.HIGHPASS:
        return np.zeros(2, dtype=complex), p, g
    if kind is SectionKind.BANDPASS:
        return np.zeros(1, dtype=complex), p, g * w0 / q
    if kind is SectionKind.ALLPASS:
        return -p, p, g
    fz = section.fz_hz if kind is not SectionKind.NOTCH or section.fz_hz else section.f0_hz
    if not (fz and fz > 0 and math.isfinite(fz)):
        raise ImproperSystem(f"{where}.fz_hz must be a positive frequency", field=f"{where}.fz_hz")
    wz = TWO_PI * fz
    return np.array([1j * wz, -1j * wz]), p, g * w0 * w0 / (wz * wz)


def as_system(obj: Any) -> ZpkSystem | CircuitSystem:
    """Accept a system, an approximation-like object (zeros/poles/gain) or a list of sections."""
    if isinstance(obj, (ZpkSystem, CircuitSystem)):
        return obj
    if all(hasattr(obj, a) for a in ("zeros", "poles", "gain")):
        return ZpkSystem.from_approximation(obj)
    if isinstance(obj, Sequence) and obj and all(isinstance(s, Section) for s in obj):
        return ZpkSystem.from_sections(obj)
    raise ImproperSystem(
        "expected a ZpkSystem, a CircuitSystem, an approximation or a list of sections",
        field="system")
