"""What a figure needs beyond the result it draws: its title, and a denser look at the passband.

The workflow that knows the request (``service.workflows.figures``) writes
them; the figures (:mod:`service.response.plotting`,
:mod:`service.tolerance.plotting`) only draw them. Frequencies are in Hz,
gains and losses in dB.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Loss (dB) at the half-power point, 10 log10 2.
HALF_POWER_DB = 10.0 * math.log10(2.0)


@dataclass(frozen=True)
class FigureSubject:
    """The title lines of a figure.

    Attributes
    ----------
    filter : str
        The filter: family, response and order (``"Elliptic lowpass, order 6"``), or
        what a bare transfer function is (``"Transfer function (lowpass): 6 poles, 4 zeros"``).
    requirement : str or None
        What it must do, band edges in Hz and losses in dB
        (``"passband to 10 kHz within 0.1 dB · stopband from 25.6 kHz, 80 dB down"``); None when not stated.
    design : str or None
        The circuit: stage count, topologies, op-amps and their gain-bandwidth (Hz);
        None for a transfer function.
    """

    filter: str
    requirement: str | None = None
    design: str | None = None


@dataclass(frozen=True)
class PassbandDetail:
    """The response sampled densely over its passband(s), for the figure's passband detail panel.

    Attributes
    ----------
    frequency_hz : ndarray of float64, shape (N,)
        Sorted frequencies (Hz) from the lowest passband start to the highest passband stop, within
        the plotted range; the verifier's worst points of the passband segments among them.
    magnitude_db : ndarray of float64, shape (N,)
        Gain (dB) at those frequencies, evaluated like the result's magnitude.
    bands_hz : tuple of (float, float)
        The passband intervals (Hz; an open band ends at ``inf``) the detail's gain axis is scaled to.
    log : bool
        The frequencies are log-spaced (the panel draws a log axis).
    """

    frequency_hz: np.ndarray
    magnitude_db: np.ndarray
    bands_hz: tuple[tuple[float, float], ...]
    log: bool


def frequency_view(f: np.ndarray) -> tuple[bool, np.ndarray]:
    """How a frequency axis is drawn: (log axis?, bool (F,) of the frequencies drawn).

    A grid spanning more than 20:1 (Hz) is drawn on a log axis, without 0 Hz.
    """
    f = np.asarray(f, dtype=float)
    pos = f > 0
    log_x = bool(f.size > 1 and pos.any() and f[-1] / f[pos][0] > 20)
    return log_x, pos if log_x else np.ones(f.shape, dtype=bool)


def passband_window(bands, f_lo: float, f_hi: float) -> tuple[float, float] | None:
    """The frequency range (Hz) of a passband detail: from the lowest passband start to the highest stop,
    within the drawn range [f_lo, f_hi]; None when no passband reaches into it.

    Parameters
    ----------
    bands : sequence of (float, float)
        Passband intervals (Hz); an open band may end at ``inf``.
    f_lo, f_hi : float
        The plotted range (Hz).
    """
    if not bands:
        return None
    lo = max(min(a for a, _ in bands), f_lo)
    hi = min(max(b for _, b in bands), f_hi)
    return (float(lo), float(hi)) if hi > lo else None


def in_bands(f: np.ndarray, bands) -> np.ndarray:
    """bool (F,): the frequencies ``f`` (Hz) inside any of the intervals ``bands`` [(start, stop), ...]."""
    sel = np.zeros(np.shape(f), dtype=bool)
    for a, b in bands:
        sel |= (f >= a) & (f <= b)
    return sel


def reference_gain(verdict, passband_gain_db: float | None, gain_db: np.ndarray) -> float:
    """The gain (dB) a figure measures losses from: the verifier's reference, else the passband gain
    metric, else the largest gain drawn."""
    if verdict is not None and getattr(verdict, "reference_gain_db", None) is not None:
        return float(verdict.reference_gain_db)
    if passband_gain_db is not None and math.isfinite(passband_gain_db):
        return float(passband_gain_db)
    return float(np.max(gain_db)) if np.size(gain_db) else 0.0


def half_power_band(f: np.ndarray, gain_db: np.ndarray, ref_db: float) -> list[tuple[float, float]]:
    """The run of frequencies (Hz) around the gain's peak where it is within 3.01 dB of ``ref_db``
    (the passband of a figure when none is stated); [] when there is none.

    Parameters
    ----------
    f, gain_db : ndarray, shape (F,)
        Sorted frequencies (Hz) and gains (dB).
    ref_db : float
        The reference gain (dB).
    """
    inside = gain_db >= ref_db - HALF_POWER_DB
    if not inside.any():
        return []
    k = int(np.argmax(gain_db))
    left, right = inside[k::-1], inside[k:]
    lo = 0 if left.all() else k - int(np.argmin(left)) + 1
    hi = f.size - 1 if right.all() else k + int(np.argmin(right)) - 1
    return [(float(f[lo]), float(f[hi]))]


__all__ = ["FigureSubject", "PassbandDetail", "frequency_view", "passband_window", "in_bands", "half_power_band",
           "reference_gain", "HALF_POWER_DB"]
