"""Lowpass-prototype frequency transformations on zeros/poles/gain (rad/s).

With the prototype variable ``p`` (normalized, rad/s):

- lowpass  ``p = s / w_c``
- highpass ``p = w_c / s``
- bandpass ``p = (s**2 + w_0**2) / (B s)``
- bandstop ``p = B s / (s**2 + w_0**2)``

``w_0`` is the geometric centre and ``B`` the bandwidth (rad/s) of the band
that the prototype's edge ``|p| = 1`` maps onto.

References
----------
.. [1] A. I. Zverev, Handbook of Filter Synthesis, Wiley 1967, ch. 2
       (frequency transformations of the lowpass prototype).
.. [2] A. Antoniou, Digital Filters: Analysis, Design, and Applications, 2nd
       ed., McGraw-Hill 1993, sec. 5.7, table 5.5 (analog-to-analog
       transformations).
"""

from __future__ import annotations

import numpy as np

from .types import ResponseType


def _pair_roots(x: np.ndarray, half_bw: float, w0: float) -> np.ndarray:
    """Roots of ``s**2 - 2 x (B/2) s + w0**2`` for every x: ``x B/2 +- sqrt((x B/2)**2 - w0**2)``."""
    a = x * half_bw
    r = np.sqrt(a * a - w0 * w0 + 0j)
    return np.concatenate([a + r, a - r])


def lowpass_scale(z, p, k, a: float):
    """``H(s/a)``: zeros and poles times ``a``, gain times ``a**(np - nz)``."""
    z = np.asarray(z, dtype=complex) * a
    p = np.asarray(p, dtype=complex) * a
    return z, p, float(k * a ** (p.size - z.size))


def transform(response: ResponseType, z, p, k, *, wc: float | None = None,
              w0: float | None = None, bw: float | None = None):
    """Map a normalized lowpass prototype onto ``response``.

    Parameters
    ----------
    response : ResponseType
    z, p : ndarray of complex
        Prototype zeros and poles (normalized rad/s).
    k : float
        Prototype gain.
    wc : float
        Edge (rad/s) for lowpass and highpass.
    w0, bw : float
        Centre (geometric) and bandwidth (rad/s) for bandpass and bandstop.

    Returns
    -------
    zeros : ndarray of complex, shape (nz',)
    poles : ndarray of complex, shape (degree,)
    gain : float
    """
    z = np.asarray(z, dtype=complex)
    p = np.asarray(p, dtype=complex)
    rel = p.size - z.size
    if response is ResponseType.LOWPASS:
        return lowpass_scale(z, p, k, wc)
    if response is ResponseType.HIGHPASS:
        k2 = float(k * np.real(np.prod(-z) / np.prod(-p)))
        return (np.concatenate([wc / z, np.zeros(rel, complex)]), wc / p, k2)
    if response is ResponseType.BANDPASS:
        zz = np.concatenate([_pair_roots(z, bw / 2.0, w0), np.zeros(rel, complex)])
        return zz, _pair_roots(p, bw / 2.0, w0), float(k * bw ** rel)
    if response is ResponseType.BANDSTOP:
        k2 = float(k * np.real(np.prod(-z) / np.prod(-p)))
        zh = (bw / 2.0) / z
        ph = (bw / 2.0) / p
        zz = np.concatenate([_pair_roots(zh, 1.0, w0),
                             np.full(rel, 1j * w0), np.full(rel, -1j * w0)])
        return zz, _pair_roots(ph, 1.0, w0), k2
    raise ValueError(f"unknown response {response!r}")
