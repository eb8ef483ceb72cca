"""Evaluation of transfer functions given as zeros/poles/gain, and their loss.

References
----------
.. [1] A. V. Oppenheim, A. S. Willsky, Signals and Systems, 2nd ed., 1997,
       sec. 6.2 (group delay ``-d(phase)/dw`` of a first-order factor).
"""

from __future__ import annotations

import numpy as np


def zpk_response(zeros, poles, gain, w_rad_s) -> np.ndarray:
    """Frequency response ``H(j w) = k * prod(jw - z) / prod(jw - p)``.

    The product is formed as a running product of ratios, each pole factor
    carrying an equal share of ``|k|``, so no intermediate overflows for
    degree-40 transfer functions at 10 GHz.

    Parameters
    ----------
    zeros : array_like of complex, shape (nz,)
        Finite zeros, rad/s.
    poles : array_like of complex, shape (np,)
        Poles, rad/s (``np >= nz`` is not required).
    gain : float
        ``k``.
    w_rad_s : array_like of float, any shape
        Angular frequencies, rad/s.

    Returns
    -------
    ndarray of complex, same shape as ``w_rad_s``
    """
    z = np.atleast_1d(np.asarray(zeros, dtype=complex))
    p = np.atleast_1d(np.asarray(poles, dtype=complex))
    w = np.asarray(w_rad_s, dtype=float)
    s = 1j * w.reshape(-1)
    h = np.full(s.shape, complex(np.sign(gain) if gain != 0 else 0.0))
    m = min(z.size, p.size)
    extra = p.size - z.size
    share = abs(gain) ** (1.0 / abs(extra)) if extra != 0 and gain != 0 else 1.0
    if m:
        h = h * np.prod((s[:, None] - z[None, :m]) / (s[:, None] - p[None, :m]), axis=1)
    if extra > 0:
        h = h * np.prod(share / (s[:, None] - p[None, m:]), axis=1)
    elif extra < 0:
        h = h * np.prod(share * (s[:, None] - z[None, m:]), axis=1)
    else:
        h = h * abs(gain)
    return h.reshape(w.shape)


def loss_db(h) -> np.ndarray:
    """Loss ``-20*log10|h|`` (dB); ``inf`` where ``h == 0`` (no warning)."""
    mag = np.abs(np.asarray(h))
    out = np.full(mag.shape, np.inf)
    nz = mag > 0
    out[nz] = -20.0 * np.log10(mag[nz])
    return out


def group_delay_s(poles, zeros, w_rad_s) -> np.ndarray:
    """Group delay (s) of ``prod(s - z)/prod(s - p)`` at ``s = j w``.

    Each factor ``1/(s - p)`` contributes ``-Re p / (Re(p)**2 + (w - Im p)**2)``
    [1]_; a zero contributes the negative of that term.

    Parameters
    ----------
    poles, zeros : array_like of complex
        rad/s.
    w_rad_s : array_like of float, shape (F,)

    Returns
    -------
    ndarray of float, shape (F,)
    """
    w = np.asarray(w_rad_s, dtype=float).reshape(-1, 1)
    p = np.asarray(poles, dtype=complex).reshape(1, -1)
    z = np.asarray(zeros, dtype=complex).reshape(-1)
    z = z[z.real != 0].reshape(1, -1)      # zeros on the j-axis add no delay
    tp = (-p.real / (p.real ** 2 + (w - p.imag) ** 2)).sum(axis=1)
    tz = (-z.real / (z.real ** 2 + (w - z.imag) ** 2)).sum(axis=1) if z.size else 0.0
    return tp - tz
