"""Exact determinants of small pencils: the polynomial-arithmetic expansion against LAPACK's determinant
(numpy.linalg.det, an LU factorization) and its inverse, evaluated at complex points."""

from __future__ import annotations

import numpy as np
import pytest

from service.circuit.staged import _SmallPencil


def _values(poly: np.ndarray, sigma: complex) -> np.ndarray:
    """A polynomial over trials (coefficient rows first, ascending) at ``sigma``: (Tc,)."""
    return sum(poly[k] * sigma ** k for k in range(poly.shape[0]))


@pytest.mark.parametrize("n", [1, 2, 3])
def test_determinant_and_cofactors_match_lapack(n):
    rng = np.random.default_rng(n)
    trials, w_ref = 6, 2.0e3
    g = rng.normal(size=(n, n, trials))
    c = rng.normal(size=(n, n, trials)) * 1e-3
    g_pat = rng.random((n, n)) > 0.25
    c_pat = rng.random((n, n)) > 0.4
    np.fill_diagonal(g_pat, True)
    g, c = g * g_pat[:, :, None], c * c_pat[:, :, None]             # structural zeros where the patterns say
    pencil = _SmallPencil(g, c, g_pat, c_pat, w_ref)
    for sigma in (0.3 + 0.7j, -1.1 + 0.2j, 2.5j):
        m = np.moveaxis(g + sigma * w_ref * c, 2, 0)               # (Tc, n, n): G + s C at s = sigma w_ref
        want = np.linalg.det(m)
        det = pencil.det()
        got = np.zeros(trials) if det is None else _values(det, sigma)
        assert np.allclose(got, want, rtol=1e-12, atol=1e-12 * np.abs(want).max())
        inv_t = np.linalg.inv(m).transpose(0, 2, 1) * want[:, None, None]   # cofactor matrix = det inv^T
        for i in range(n):
            for kp in range(n):
                cof = pencil.cofactor(i, kp)
                got_c = np.zeros(trials) if cof is None else _values(cof, sigma) * np.ones(trials)
                assert np.allclose(got_c, inv_t[:, i, kp], rtol=1e-10, atol=1e-10 * np.abs(inv_t).max())
