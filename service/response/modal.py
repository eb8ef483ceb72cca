"""Step response by partial fractions, evaluated at any set of instants in one broadcast.

For a proper H(s) with simple poles p_i the step response is

    y(t) = H(0) + sum_i (r_i / p_i) exp(p_i t),
    r_i = k * prod_j (p_i - z_j) / prod_{j != i} (p_i - p_j),

the residue of H(s)/s at each pole plus H(0) at s = 0 ([1]_ sec. 9.5 and
the appendix on partial-fraction expansion). Every instant costs one complex
exponential per pole, with no matrix exponential and no stepping, so the
crossing and peak searches of the step metrics evaluate all their candidate
instants in one call.

The expansion is only as good as its cancellation: the rounding error of the
sum is bounded by about n * eps * sum_i |r_i / p_i| ([2]_ sec. 4.2). When
that bound is not far below the response itself -- repeated poles (a
Linkwitz-Riley cascade), or poles so close that the residues are huge --
:func:`modal_step` declines (returns None) and the caller uses the exact
state-space method of :mod:`service.response.timeresp`.

References
----------
.. [1] A. V. Oppenheim, A. S. Willsky, S. H. Nawab, *Signals and Systems*,
   2nd ed., Prentice Hall, 1997, sec. 9.5 (inverse Laplace transform by
   partial fractions) and appendix (partial-fraction expansion).
.. [2] N. J. Higham, *Accuracy and Stability of Numerical Algorithms*,
   2nd ed., SIAM, 2002, sec. 4.2 (error bound of recursive summation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Largest accepted rounding bound of the expansion, relative to the larger of
#: |H(0)| and the largest |y| on the grid.
MODAL_RELATIVE_ERROR = 1e-11


@dataclass
class ModalStepResponse:
    """Sampled step response with its partial-fraction expansion.

    Offers the part of :class:`service.response.timeresp.StateSpaceResponse`
    that :func:`service.response.metrics.step_metrics` uses.

    Attributes
    ----------
    time_s : ndarray of float64, shape (N,), uniform from 0
    step : ndarray of float64, shape (N,)
    final_value : float
        H(0), the limit of the step response.
    """

    time_s: np.ndarray
    step: np.ndarray
    final_value: float
    _poles: np.ndarray  # (n,) complex, rad/s
    _coef: np.ndarray  # (n,) complex, r_i / p_i

    def step_at_times(self, t_s: np.ndarray) -> np.ndarray:
        """y(t) at any instants (s) >= 0, float64 of the shape of ``t_s``."""
        t = np.asarray(t_s, dtype=float)
        e = np.exp(t[..., None] * self._poles)
        return self.final_value + np.real(e @ self._coef)

    def refine_roots(self, index: np.ndarray, func, passes: int = 6, points: int = 17) -> np.ndarray:
        """Instants (s) where ``func`` of the step changes sign, one per sample interval.

        The multisection of :meth:`StateSpaceResponse.refine_roots
        <service.response.timeresp.StateSpaceResponse.refine_roots>`, with
        every pass evaluating all brackets at once.

        Parameters
        ----------
        index : ndarray of int (M,)
            Sample i of each bracket [t_i, t_i+1].
        func : callable
            ``func(y) -> g`` on arrays of shape (M, points); row m belongs to bracket m.
        """
        idx = np.asarray(index, dtype=int)
        m = idx.size
        if m == 0:
            return np.zeros(0)
        dt = float(self.time_s[1] - self.time_s[0])
        a = self.time_s[idx].astype(float)
        h = dt
        rows = np.arange(m)
        steps = np.arange(points)
        for _ in range(passes):
            h = h / (points - 1)
            g = func(self.step_at_times(a[:, None] + h * steps[None, :]))
            sgn = np.signbit(g)
            change = (sgn[:, 1:] != sgn[:, :-1]) | (g[:, 1:] == 0)
            j = np.where(change.any(axis=1), np.argmax(change, axis=1), 0)
            ga, gb = g[rows, j], g[rows, j + 1]
            a = a + j * h
        den = gb - ga
        frac = np.divide(-ga, den, out=np.full(m, 0.5), where=den != 0)
        return a + h * np.clip(frac, 0.0, 1.0)

    def refine_peak(self, k: int, sign: float = 1.0, passes: int = 6, points: int = 17) -> float:
        """Largest value of sign*step over [t_k-1, t_k+1] by a nested uniform search."""
        dt = float(self.time_s[1] - self.time_s[0])
        k0 = max(k - 1, 0)
        start = float(self.time_s[k0])
        width = dt * (min(k + 1, self.time_s.size - 1) - k0)
        steps = np.arange(points)
        best = -np.inf
        for _ in range(passes):
            h = width / (points - 1)
            v = sign * self.step_at_times(start + h * steps)
            j = int(np.argmax(v))
            best = max(best, float(v[j]))
            lo_j = max(j - 1, 0)
            start = start + lo_j * h
            width = h * (min(j + 1, points - 1) - lo_j)
        return best


def step_coefficients(zeros, poles, gain) -> tuple[np.ndarray, float, float]:
    """Partial-fraction coefficients r_i / p_i of the step response and their rounding bound.

    Parameters
    ----------
    zeros, poles : array_like of complex (rad/s); len(zeros) <= len(poles), poles != 0
    gain : float

    Returns
    -------
    coef : ndarray of complex128, shape (n,)
    h0 : float
        H(0) (real part).
    bound : float
        n * eps * sum |coef| (inf when two poles coincide).
    """
    z = np.asarray(zeros, dtype=complex).ravel()
    p = np.asarray(poles, dtype=complex).ravel()
    n = p.size
    dp = p[:, None] - p[None, :]
    np.fill_diagonal(dp, 1.0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        num = np.prod(p[:, None] - z[None, :], axis=1) if z.size else np.ones(n, dtype=complex)
        coef = gain * num / np.prod(dp, axis=1) / p
        bound = n * np.finfo(float).eps * float(np.sum(np.abs(coef)))
    h0 = float(np.real(gain * np.prod(-z) / np.prod(-p)))
    if not np.isfinite(bound):
        bound = np.inf
    return coef, h0, bound


def modal_step(zeros, poles, gain, time_s: np.ndarray,
               relative_error: float = MODAL_RELATIVE_ERROR) -> ModalStepResponse | None:
    """Step response by partial fractions, or None when the expansion is not accurate.

    Parameters
    ----------
    zeros, poles : array_like of complex (rad/s)
        A stable, proper transfer function.
    gain : float
    time_s : ndarray of float, shape (N,), uniform, time_s[0] == 0.
    relative_error : float
        Largest accepted rounding bound relative to max(|H(0)|, max |y|).

    Returns
    -------
    ModalStepResponse or None
    """
    coef, h0, bound = step_coefficients(zeros, poles, gain)
    if not np.isfinite(bound):
        return None
    p = np.asarray(poles, dtype=complex).ravel()
    t = np.asarray(time_s, dtype=float)
    resp = ModalStepResponse(t, np.zeros(0), h0, p, coef)
    y = resp.step_at_times(t)
    scale = max(abs(h0), float(np.max(np.abs(y))) if y.size else 0.0)
    if not bound <= relative_error * scale:
        return None
    resp.step = y
    return resp
