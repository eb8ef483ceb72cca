"""Frequency response and group delay of a transfer function in zero-pole-gain form.

All frequencies here are angular (rad/s); :mod:`service.response.systems`
converts from hertz in one place.

References
----------
.. [1] A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*,
   3rd ed., Pearson, 2010, sec. 5.1.2 (group delay as the negative derivative
   of the unwrapped phase) and sec. 5.3 (contribution of each pole and zero).
.. [2] A. B. Williams, F. J. Taylor, *Electronic Filter Design Handbook*,
   4th ed., McGraw-Hill, 2006, sec. 2.2 (phase and delay of pole-zero factors).
"""

from __future__ import annotations

import numpy as np

#: Magnitudes below this (an exact transmission zero on the grid) are reported
#: as this value, so every number stays finite and JSON-representable.
MAGNITUDE_FLOOR_DB = -400.0


def freqresp(zeros: np.ndarray, poles: np.ndarray, gain: float, w: np.ndarray) -> np.ndarray:
    """Complex response H(jw) = k * prod(jw - z) / prod(jw - p).

    Each zero is divided by a pole before the product is taken, so high
    orders at high frequencies neither overflow nor underflow.

    Parameters
    ----------
    zeros, poles : ndarray of complex, shape (nz,), (np,)
        Roots in rad/s.
    gain : float
        The factor k (real).
    w : ndarray of float, shape (F,)
        Angular frequencies (rad/s), >= 0.

    Returns
    -------
    ndarray of complex128, shape (F,)
    """
    s = 1j * np.asarray(w, dtype=float)[:, None]
    z = np.asarray(zeros, dtype=complex)
    p = np.asarray(poles, dtype=complex)
    n = min(z.size, p.size)
    h = np.full(s.shape[0], complex(gain))
    if n:
        h = h * np.prod((s - z[None, :n]) / (s - p[None, :n]), axis=1)
    if z.size > n:
        h = h * np.prod(s - z[None, n:], axis=1)
    if p.size > n:
        h = h / np.prod(s - p[None, n:], axis=1)
    return h


def magnitude_db(h: np.ndarray) -> np.ndarray:
    """20*log10|h| in dB, floored at :data:`MAGNITUDE_FLOOR_DB` (no warning at exact zeros)."""
    a = np.abs(h)
    floor = 10.0 ** (MAGNITUDE_FLOOR_DB / 20.0)
    return 20.0 * np.log10(np.maximum(a, floor))


def phase(zeros: np.ndarray, poles: np.ndarray, gain: float, w: np.ndarray) -> np.ndarray:
    """Unwrapped phase (rad) as the sum of the angles of every factor.

    The angle of each factor (jw - z) is continuous in w except at a zero on
    the jw axis, where the true phase jumps by pi (a grid point exactly on
    such a zero gets the limit from below); the sum is finally passed
    through :func:`numpy.unwrap` to remove any 2*pi branch jumps.

    Parameters
    ----------
    zeros, poles : ndarray of complex
        Roots in rad/s.
    gain : float
        Sign of k gives a constant pi.
    w : ndarray of float, shape (F,)
        Angular frequencies (rad/s), increasing.

    Returns
    -------
    ndarray of float64, shape (F,), radians.
    """
    s = 1j * np.asarray(w, dtype=float)[:, None]
    z = np.asarray(zeros, dtype=complex)
    p = np.asarray(poles, dtype=complex)
    ph = np.zeros(s.shape[0])
    if z.size:
        dz = s - z[None, :]
        # exactly on a jw-axis zero the angle is taken as its limit from below
        # (-pi/2), so the pi step falls after the point and unwrapping stays consistent
        ph = ph + np.sum(np.where(dz == 0, -np.pi / 2, np.angle(dz)), axis=1)
    if p.size:
        ph = ph - np.sum(np.angle(s - p[None, :]), axis=1)
    if gain < 0:
        ph = ph + np.pi
    return np.unwrap(ph)


def group_delay(zeros: np.ndarray, poles: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Analytic group delay tau(w) = -d(phase)/dw in seconds.

    For a factor (jw - a) with a = sigma + j*beta the phase is
    atan2(w - beta, -sigma), whose derivative is -sigma / (sigma^2 + (w - beta)^2);
    hence [1]_ (sec. 5.3)

        tau(w) = sum_p (-sigma_p) / |jw - p|^2  -  sum_z (-sigma_z) / |jw - z|^2 .

    A zero exactly on the jw axis contributes 0 (its phase step is a jump,
    not a delay), also at its own frequency.

    Parameters
    ----------
    zeros, poles : ndarray of complex
        Roots in rad/s.
    w : ndarray of float, shape (F,)
        Angular frequencies (rad/s).

    Returns
    -------
    ndarray of float64, shape (F,), seconds.
    """
    w = np.asarray(w, dtype=float)[:, None]
    tau = np.zeros(w.shape[0])
    for roots, sign in ((np.asarray(poles, dtype=complex), 1.0), (np.asarray(zeros, dtype=complex), -1.0)):
        if roots.size == 0:
            continue
        sigma = roots.real[None, :]
        d2 = sigma**2 + (w - roots.imag[None, :]) ** 2
        term = np.divide(-sigma, d2, out=np.zeros(np.broadcast(sigma, d2).shape), where=d2 > 0)
        tau = tau + sign * np.sum(term, axis=1)
    return tau


def dc_gain(zeros: np.ndarray, poles: np.ndarray, gain: float) -> complex:
    """H(0): k*prod(-z)/prod(-p); 0 when a zero sits at the origin."""
    return complex(freqresp(zeros, poles, gain, np.zeros(1))[0])


def hf_gain(zeros: np.ndarray, poles: np.ndarray, gain: float) -> float:
    """Limit of |H(jw)| as w -> infinity: |k| when nz == np, 0 when nz < np."""
    nz, npo = np.asarray(zeros).size, np.asarray(poles).size
    if nz > npo:
        return float("inf")
    return abs(float(gain)) if nz == npo else 0.0
