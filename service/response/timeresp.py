"""Exact step and impulse responses of a zero-pole-gain transfer function.

Method
------
The transfer function is split into first- and second-order factors, each
realised in controllable canonical form, and the factors are connected in
cascade; this block-triangular state-space model is far better conditioned
than one companion form of the whole polynomial [2]_. Time is normalised by
the largest pole magnitude. Because a unit step is constant between samples,
the zero-order-hold discretisation

    x[k+1] = Ad x[k] + Bd,   Ad = expm(A*dt),   Bd = A^-1 (Ad - I) B

is exact at the sample instants, whatever the step dt [1]_ (sec. 4.3.3);
the step is folded into the state as a constant extra state, so
y(t) = C_aug expm(A_aug t) x0_aug holds at every t, also between samples,
which the metrics use to refine crossings and peaks. The impulse response is
C expm(A t) B plus D*delta(t) (its weight reported apart). Repeated poles
(e.g. Linkwitz-Riley) need no special handling, unlike a partial-fraction
expansion.

Sample states are computed by blocks of matrix powers (sqrt(N) products),
not by a Python loop over every time point.

References
----------
.. [1] G. F. Franklin, J. D. Powell, M. L. Workman, *Digital Control of
   Dynamic Systems*, 3rd ed., Addison-Wesley, 1998, sec. 4.3.3 (ZOH
   equivalent, exact for piecewise-constant inputs).
.. [2] C. Moler, C. Van Loan, "Nineteen dubious ways to compute the
   exponential of a matrix, twenty-five years later", *SIAM Review* 45(1),
   2003 (scaling and squaring; conditioning of companion forms).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg import expm

from service.response.errors import ImproperSystem

#: Decay of the slowest mode's envelope over the automatic span (e^-11.5 ~ 1e-5),
#: enough to see the 0.1 % settling band with margin.
SPAN_DECAY_NEPERS = 11.5
#: Samples per period of the fastest pole on the automatic grid (before capping).
SAMPLES_PER_FASTEST_PERIOD = 24


def _pair_roots(roots: np.ndarray, tol: float = 1e-9) -> tuple[list[np.ndarray], list[float]]:
    """Split roots into quadratic coefficient pairs and leftover real roots.

    Returns quadratics as (c1, c0) of s^2 + c1 s + c0 and single real roots.
    """
    r = np.asarray(roots, dtype=complex)
    scale = np.maximum(np.abs(r), 1e-300)
    is_real = np.abs(r.imag) <= tol * scale
    cplx = r[~is_real & (r.imag > 0)]
    n_lower = int(np.sum(~is_real & (r.imag < 0)))
    if n_lower != cplx.size:
        raise ImproperSystem("complex roots must come in conjugate pairs", field="poles")
    quads = [np.array([-2.0 * c.real, abs(c) ** 2]) for c in sorted(cplx, key=abs)]
    reals = sorted(r[is_real].real.tolist(), key=abs)
    while len(reals) >= 2:
        a, b = reals.pop(0), reals.pop(0)
        quads.append(np.array([-(a + b), a * b]))
    return quads, reals


def cascade_state_space(zeros, poles, gain, w_ref: float):
    """Cascade state-space (A, B, C, D) of H in normalised time t_n = w_ref * t.

    Parameters
    ----------
    zeros, poles : ndarray of complex
        Roots in rad/s; len(zeros) <= len(poles).
    gain : float
    w_ref : float
        Normalising angular frequency (rad/s).

    Returns
    -------
    A : ndarray (n, n); B : ndarray (n,); C : ndarray (n,); D : float
    """
    z = np.asarray(zeros, dtype=complex) / w_ref
    p = np.asarray(poles, dtype=complex) / w_ref
    k = float(gain) * w_ref ** (z.size - p.size)
    pq, pr = _pair_roots(p)
    zq, zr = _pair_roots(z)
    # Denominators: quadratics then at most one linear factor.
    dens = [np.array([1.0, q[0], q[1]]) for q in pq] + [np.array([1.0, -x]) for x in pr]
    nums: list[np.ndarray | None] = [None] * len(dens)
    quad_idx = list(range(len(pq)))
    lin_idx = list(range(len(pq), len(dens)))
    zq_list = [np.array([1.0, q[0], q[1]]) for q in zq]
    zl_list = [np.array([1.0, -x]) for x in zr]
    for num in zq_list:
        if not quad_idx:
            raise ImproperSystem("more zeros than poles", field="zeros")
        nums[quad_idx.pop(0)] = num
    for num in zl_list:
        if lin_idx:
            nums[lin_idx.pop(0)] = num
        elif quad_idx:
            nums[quad_idx.pop(0)] = num
        else:
            raise ImproperSystem("more zeros than poles", field="zeros")
    blocks = []
    for den, num in zip(dens, nums):
        order = den.size - 1
        num = np.zeros(1) + 1.0 if num is None else num
        num = np.concatenate([np.zeros(order + 1 - num.size), num])
        # scale each section so the largest of |H(0)|, |H(j wn)|, |H(inf)| is 1,
        # which keeps the states O(1) (a zero may sit exactly at j wn)
        wn = abs(den[-1]) ** (1.0 / order)
        sn = 1j * wn
        level = max(abs(num[-1] / den[-1]), abs(np.polyval(num, sn) / np.polyval(den, sn)), abs(num[0]))
        g = 1.0 / level
        num = num * g
        k /= g
        d = num[0]
        c = num[1:] - d * den[1:]
        a = np.zeros((order, order))
        a[0, :] = -den[1:]
        if order == 2:
            a[1, 0] = 1.0
        b = np.zeros(order)
        b[0] = 1.0
        blocks.append((a, b, c, d))
    n = sum(bl[0].shape[0] for bl in blocks)
    A = np.zeros((n, n))
    B = np.zeros(n)
    C = np.zeros(n)
    D = 1.0
    # Series connection: u -> block0 -> block1 -> ...; keep (Cc, Dc) the map from
    # the cascade state/input to the current block's output.
    off = 0
    Cprev = np.zeros(n)
    Dprev = 1.0
    for a, b, c, d in blocks:
        m = a.shape[0]
        sl = slice(off, off + m)
        A[sl, sl] = a
        A[sl, :] += np.outer(b, Cprev)
        B[sl] = b * Dprev
        Cnew = d * Cprev
        Cnew[sl] += c
        Dprev = d * Dprev
        Cprev = Cnew
        off += m
    C = k * Cprev
    D = k * Dprev
    return A, B, C, D


def automatic_span(poles: np.ndarray) -> tuple[float, float]:
    """(stop_s, dt_s) of the automatic time grid from the slowest and fastest poles.

    The span lets the slowest mode decay by :data:`SPAN_DECAY_NEPERS` nepers
    (and adds the time for a repeated pole's t*e^-at term); the step resolves
    the fastest pole with :data:`SAMPLES_PER_FASTEST_PERIOD` samples a period.
    """
    p = np.asarray(poles, dtype=complex)
    sigma = float(np.min(-p.real))
    mult = 1 + int(np.max(np.sum(np.isclose(p[:, None], p[None, :], rtol=1e-6, atol=0), axis=1)) - 1)
    stop = (SPAN_DECAY_NEPERS + 2.0 * math.log(mult) + 2.0 * (mult - 1)) / sigma
    dt = 2.0 * math.pi / (float(np.max(np.abs(p))) * SAMPLES_PER_FASTEST_PERIOD)
    return stop, dt


@dataclass
class StateSpaceResponse:
    """Exact sampled step/impulse responses with the data to evaluate between samples.

    Attributes
    ----------
    time_s : ndarray (N,) uniform from 0
    step : ndarray (N,)
    impulse : ndarray (N,)  (without the D*delta term)
    dirac_weight : float    weight D of the delta in the impulse response
    final_value : float     H(0), the limit of the step response
    """

    time_s: np.ndarray
    step: np.ndarray
    impulse: np.ndarray
    dirac_weight: float
    final_value: float
    _A_aug: np.ndarray
    _C_aug: np.ndarray
    _X: np.ndarray  # augmented states at samples, (N, n+1)
    _w_ref: float

    def _walk(self, starts: np.ndarray, h_s: float, points: int) -> np.ndarray:
        """Augmented states at starts + j*h (j = 0..points-1); starts (M, n+1) -> (M, points, n+1)."""
        e_t = expm(self._A_aug * (h_s * self._w_ref)).T
        out = np.empty((starts.shape[0], points, starts.shape[1]))
        out[:, 0] = starts
        for j in range(1, points):
            out[:, j] = out[:, j - 1] @ e_t
        return out

    def refine_roots(self, index: np.ndarray, func, passes: int = 6, points: int = 17) -> np.ndarray:
        """Instants (s) where ``func`` of the step changes sign, one per sample interval.

        Multisection of each interval [t_i, t_i+1] on the exact response: every
        pass walks the state across the interval with one matrix exponential
        shared by all intervals, keeps the sub-interval where the sign changes
        and ends with a false-position step.

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
        starts = self._X[idx]
        h = dt
        rows = np.arange(m)
        for _ in range(passes):
            h = h / (points - 1)
            states = self._walk(starts, h, points)
            g = func(states @ self._C_aug)
            sgn = np.signbit(g)
            change = (sgn[:, 1:] != sgn[:, :-1]) | (g[:, 1:] == 0)
            j = np.where(change.any(axis=1), np.argmax(change, axis=1), 0)
            ga, gb = g[rows, j], g[rows, j + 1]
            a = a + j * h
            starts = states[rows, j]
        den = gb - ga
        frac = np.divide(-ga, den, out=np.full(m, 0.5), where=den != 0)
        return a + h * np.clip(frac, 0.0, 1.0)

    def refine_peak(self, k: int, sign: float = 1.0, passes: int = 6, points: int = 17) -> float:
        """Largest value of sign*step over [t_k-1, t_k+1], refined on the exact response."""
        dt = float(self.time_s[1] - self.time_s[0])
        k0 = max(k - 1, 0)
        start = self._X[k0][None, :]
        width = dt * (min(k + 1, self.time_s.size - 1) - k0)
        best = -np.inf
        for _ in range(passes):
            h = width / (points - 1)
            states = self._walk(start, h, points)
            v = sign * (states[0] @ self._C_aug)
            j = int(np.argmax(v))
            best = max(best, float(v[j]))
            lo_j = max(j - 1, 0)
            start = states[:, lo_j]
            width = h * (min(j + 1, points - 1) - lo_j)
        return best

    def step_at(self, t_s: float) -> float:
        """Step response at any time t >= 0 (s), exact: C expm(A (t - t_k)) x_k."""
        dt = self.time_s[1] - self.time_s[0] if self.time_s.size > 1 else 1.0
        kidx = int(min(max(math.floor(t_s / dt), 0), self.time_s.size - 1))
        tau = (t_s - self.time_s[kidx]) * self._w_ref
        x = expm(self._A_aug * tau) @ self._X[kidx]
        return float(self._C_aug @ x)


def _powers_apply(Ad: np.ndarray, x0: np.ndarray, count: int) -> np.ndarray:
    """States x_k = Ad^k x0 for k = 0..count-1 by blocks of powers; shape (count, n)."""
    n = Ad.shape[0]
    bsz = max(1, int(math.ceil(math.sqrt(count))))
    powers = np.empty((bsz, n, n))
    powers[0] = np.eye(n)
    for j in range(1, bsz):
        powers[j] = Ad @ powers[j - 1]
    step_b = Ad @ powers[bsz - 1]
    nblk = int(math.ceil(count / bsz))
    starts = np.empty((nblk, n))
    starts[0] = x0
    for m in range(1, nblk):
        starts[m] = step_b @ starts[m - 1]
    # x[m*b + j] = P_j @ start_m
    X = np.einsum("jab,mb->mja", powers, starts).reshape(nblk * bsz, n)
    return X[:count]


def simulate(zeros, poles, gain, time_s: np.ndarray, impulse: bool = True) -> StateSpaceResponse:
    """Exact step and impulse responses on a uniform grid starting at 0.

    Parameters
    ----------
    zeros, poles : ndarray of complex (rad/s); gain : float
    time_s : ndarray of float, shape (N,), uniform, time_s[0] == 0.
    impulse : bool
        Also compute the impulse response (else ``impulse`` is left empty).

    Returns
    -------
    StateSpaceResponse
    """
    p = np.asarray(poles, dtype=complex)
    w_ref = float(np.max(np.abs(p)))
    A, B, C, D = cascade_state_space(zeros, poles, gain, w_ref)
    n = A.shape[0]
    # augmented: [x; u] with u' = 0 (u = 1 for the step)
    A_aug = np.zeros((n + 1, n + 1))
    A_aug[:n, :n] = A
    A_aug[:n, n] = B
    C_aug = np.concatenate([C, [D]])
    t = np.asarray(time_s, dtype=float)
    N = t.size
    dt_n = (t[1] - t[0]) * w_ref if N > 1 else 0.0
    Ad_aug = expm(A_aug * dt_n)
    x0 = np.zeros(n + 1)
    x0[n] = 1.0
    X = _powers_apply(Ad_aug, x0, N)
    step = X @ C_aug
    # impulse: x(0+) = B, y = C x
    if impulse:
        Xi = _powers_apply(Ad_aug[:n, :n], B, N)
        imp = (Xi @ C) * w_ref
    else:
        imp = np.zeros(0)
    final = float(-C @ np.linalg.solve(A, B) + D)
    return StateSpaceResponse(t, step, imp, float(D), final, A_aug, C_aug, X, w_ref)
