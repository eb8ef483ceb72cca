"""Read a stage's f0, Q, zero frequency and gain back from its poles and zeros.

The stage circuit is solved by the circuit engine
(:func:`service.circuit.transfer_function_zpk`); this module matches the
computed poles and zeros to the ones the section's standard form asks for and
returns the figures of that form (see :class:`service.approximation.SectionKind`).
An op-amp macromodel adds poles far above the stage's band; matching each
target root to the nearest computed one keeps the fit on the dominant pair.

For a second-order pair ``p1, p2`` (conjugate or both real)
``w0 = sqrt(p1*p2)`` and ``Q = w0 / -(p1 + p2)``, from
``s^2 + s*w0/Q + w0^2 = (s - p1)(s - p2)`` (A. Sedra and K. C. Smith,
"Microelectronic Circuits", 7th ed., sec. 17.3).
"""

from __future__ import annotations

import numpy as np

from service.approximation.types import Section, SectionKind

_NOTCHES = (SectionKind.NOTCH, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH)


def target_poles(section: Section) -> np.ndarray:
    """Poles (rad/s) of the section's standard form, shape (order,), complex."""
    w0 = 2 * np.pi * section.f0_hz
    if section.order == 1:
        return np.array([-w0], dtype=complex)
    q = section.q
    return np.roots([1.0, w0 / q, w0 * w0]).astype(complex)


def target_zeros(section: Section) -> np.ndarray:
    """Finite zeros (rad/s) of the standard form, complex; s = 0 zeros included."""
    k = section.kind
    if k in _NOTCHES:
        wz = 2 * np.pi * (section.fz_hz if section.fz_hz is not None else section.f0_hz)
        return np.array([1j * wz, -1j * wz])
    if k == SectionKind.HIGHPASS:
        return np.zeros(section.order, dtype=complex)
    if k == SectionKind.BANDPASS:
        return np.zeros(1, dtype=complex)
    if k == SectionKind.ALLPASS:
        return -target_poles(section).conj()
    return np.zeros(0, dtype=complex)


def _match(targets: np.ndarray, found: np.ndarray) -> np.ndarray:
    """For each target root the nearest unused found root (relative distance)."""
    found = list(np.asarray(found, dtype=complex))
    out = []
    for t in targets:
        if not found:
            out.append(np.nan + 0j)
            continue
        scale = max(abs(t), 1e-30)
        d = [abs(f - t) / scale if abs(t) > 0 else abs(f) for f in found]
        i = int(np.argmin(d))
        out.append(found.pop(i))
    return np.array(out, dtype=complex)


def dominant_poles(section: Section, poles) -> np.ndarray:
    """The computed poles (rad/s) matched to the section's standard-form poles, shape (order,)."""
    return _match(target_poles(section), np.asarray(poles, dtype=complex))


def standard_shape(section: Section, s: np.ndarray, f0_hz: float, q: float | None,
                   fz_hz: float | None) -> np.ndarray:
    """The section's standard form with gain 1 at complex frequencies ``s`` (rad/s)."""
    w0 = 2 * np.pi * f0_hz
    k = section.kind
    if section.order == 1:
        den = s + w0
        return (w0 / den) if k == SectionKind.LOWPASS else (s / den)
    den = s * s + s * w0 / q + w0 * w0
    if k == SectionKind.LOWPASS:
        return w0 * w0 / den
    if k == SectionKind.HIGHPASS:
        return s * s / den
    if k == SectionKind.BANDPASS:
        return (w0 / q) * s / den
    if k in _NOTCHES:
        wz = 2 * np.pi * (fz_hz if fz_hz is not None else f0_hz)
        return (w0 * w0 / (wz * wz)) * (s * s + wz * wz) / den
    return (s * s - s * w0 / q + w0 * w0) / den


def zpk_eval(zeros, poles, gain, s: np.ndarray) -> np.ndarray:
    """``gain * prod(s - z) / prod(s - p)`` at ``s`` (rad/s), vectorized over ``s``."""
    s = np.asarray(s, dtype=complex)
    num = np.prod(s[..., None] - np.asarray(zeros, dtype=complex), axis=-1) if len(zeros) else 1.0
    den = np.prod(s[..., None] - np.asarray(poles, dtype=complex), axis=-1) if len(poles) else 1.0
    return gain * num / den


def fit_section(section: Section, zeros, poles, gain) -> dict:
    """Achieved figures of a stage whose transfer function is ``(zeros, poles, gain)``.

    Parameters
    ----------
    section : Section
        The target (its kind and order say which roots to look for).
    zeros, poles : array_like of complex
        Finite zeros and poles in rad/s, as :func:`service.circuit.transfer_function_zpk` returns.
    gain : float

    Returns
    -------
    dict
        ``f0_hz``, ``q`` (None for first order), ``gain`` (of the standard
        form: ``H(s0) / shape(s0)``, real part, with s0 = 0 for the
        lowpass, notch and allpass kinds and ``j*w0`` otherwise), ``fz_hz`` (notch kinds,
        else None), the relative errors ``f0_error``, ``q_error``,
        ``gain_error``, ``fz_error`` (achieved / target - 1), and
        ``zero_damping`` (notch kinds, else None): the damping ratio of the
        zero pair, ``-Re(z1 + z2) / (2 |z|)``, 0 when the zeros lie on the
        j-axis as the standard form asks (a finite notch depth otherwise).
    """
    poles = np.asarray(poles, dtype=complex)
    zeros = np.asarray(zeros, dtype=complex)
    p = _match(target_poles(section), poles)
    if section.order == 1:
        w0 = -p[0].real
        q = None
    else:
        prod = (p[0] * p[1]).real
        w0 = float(np.sqrt(abs(prod)))
        q = float(w0 / -(p[0] + p[1]).real)
    f0 = float(w0 / (2 * np.pi))
    fz = None
    zeta = None
    if section.kind in _NOTCHES:
        z = _match(target_zeros(section), zeros)
        wz = float(np.sqrt(abs((z[0] * z[1]).real)))
        fz = wz / (2 * np.pi)
        zeta = float(-(z[0] + z[1]).real / (2 * wz)) if wz > 0 else None
    # Where the standard form's g is defined and the shape is not zero: DC for the
    # lowpass, notch and allpass kinds, f0 for bandpass and highpass.
    dc = section.kind in (SectionKind.LOWPASS, SectionKind.ALLPASS) or section.kind in _NOTCHES
    s0 = np.array([0j if dc else 1j * w0])
    shape = standard_shape(section, s0, f0, q, fz)
    h = zpk_eval(zeros, poles, gain, s0)
    g = float((h / shape).real[0])
    out = {
        "f0_hz": f0,
        "q": q,
        "gain": g,
        "fz_hz": fz,
        "f0_error": f0 / section.f0_hz - 1,
        "q_error": (q / section.q - 1) if q is not None and section.q else None,
        "gain_error": (g / section.gain - 1) if section.gain else None,
        "fz_error": (fz / section.fz_hz - 1) if fz is not None and section.fz_hz else None,
        "zero_damping": zeta,
    }
    return out
