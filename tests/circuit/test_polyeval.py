"""Polynomials and ratios on the grid: agreement with three other evaluations, layout independence."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.circuit import CircuitError, ac_response, prepare_ac
from service.circuit.ac import reference_omega
from service.circuit.blocks import decompose
from service.circuit.mna import build_mna
from service.circuit.polyeval import SAFE_MAX, GridEvaluator
from tests.circuit.builders import MACRO, catalogue, rc_ladder

F = np.logspace(1, 5, 301)
OMEGA = 2 * np.pi * F
W_REF = reference_omega(F)


def _vandermonde_values(coef: np.ndarray, omega: np.ndarray, w_ref: float) -> np.ndarray:
    """The evaluation the engine used before: coefficients times a Vandermonde matrix of sigma (one matrix product)."""
    sig = 1j * omega / w_ref
    v = np.zeros((coef.shape[1], 2 * omega.size))
    for k in range(coef.shape[1]):
        p = sig ** k
        v[k, 0::2], v[k, 1::2] = p.real, p.imag
    return np.ascontiguousarray(coef @ v).view(np.complex128)


def _horner_values(coef: np.ndarray, omega: np.ndarray, w_ref: float) -> np.ndarray:
    """Horner's recurrence on the even and odd parts in v = -x^2, one numpy pass per step (element by element)."""
    x = omega / w_ref
    v = -x * x
    even, odd = coef[:, 0::2], coef[:, 1::2]
    re = np.broadcast_to(even[:, -1:], (coef.shape[0], x.size)).copy()
    for m in range(even.shape[1] - 2, -1, -1):
        re = re * v + even[:, m:m + 1]
    im = np.zeros_like(re)
    if odd.shape[1]:
        im[...] = odd[:, -1:]
        for m in range(odd.shape[1] - 2, -1, -1):
            im = im * v + odd[:, m:m + 1]
    return re + 1j * (im * x)


def _scale(coef: np.ndarray, omega: np.ndarray, w_ref: float) -> np.ndarray:
    """sum_k |c_k| |sigma|^k: the size of the terms, against which rounding is measured (T, F)."""
    x = omega / w_ref
    return np.abs(coef) @ (x[None, :] ** np.arange(coef.shape[1])[:, None])


@settings(max_examples=60, deadline=None)
@given(degree=st.integers(min_value=0, max_value=24), seed=st.integers(min_value=0, max_value=2**32 - 1),
       trials=st.integers(min_value=1, max_value=40))
def test_values_agree_with_vandermonde_horner_and_polyval(degree, seed, trials):
    rng = np.random.default_rng(seed)
    coef = rng.standard_normal((trials, degree + 1))
    ev = GridEvaluator(OMEGA, W_REF)
    got = ev.values(coef)
    scale = _scale(coef, OMEGA, W_REF)
    old = _vandermonde_values(coef, OMEGA, W_REF)       # the engine's former evaluation
    horner = _horner_values(coef, OMEGA, W_REF)
    # source: numpy.polynomial.polynomial.polyval (reference library), complex Horner in sigma
    ref = np.stack([np.polynomial.polynomial.polyval(1j * OMEGA / W_REF, c) for c in coef])
    for other in (old, horner, ref):
        assert np.all(np.abs(got - other) <= 1e-12 * scale)


def test_wide_grid_uses_several_column_blocks_with_the_same_bits():
    f = np.geomspace(1.0, 1e6, 5003)                     # wider than one product's column block
    omega, w_ref = 2 * np.pi * f, reference_omega(f)
    rng = np.random.default_rng(8)
    coef = rng.uniform(0.5, 1.5, (21, 25))
    ev = GridEvaluator(omega, w_ref)
    got = ev.values(coef)
    assert np.all(np.abs(got - _vandermonde_values(coef, omega, w_ref)) <= 1e-12 * _scale(coef, omega, w_ref))
    assert np.array_equal(ev.values(coef[5:6]), got[5:6])
    assert np.array_equal(ev.values(coef[::-1])[::-1], got)


@pytest.mark.parametrize("numerator_degree", [0, 3])
def test_ratio_agrees_with_complex_division(numerator_degree):
    rng = np.random.default_rng(5)
    # Hurwitz-like denominators (positive coefficients of a product of damped quadratics): no zero on the axis
    t = 40
    den = np.ones((t, 1))
    for _ in range(4):
        q = np.stack([np.ones(t), rng.uniform(0.2, 2.0, t), rng.uniform(0.3, 3.0, t)], axis=1)
        den = np.stack([np.convolve(a, b) for a, b in zip(den, q)])
    num = rng.uniform(0.5, 2.0, (t, numerator_degree + 1))
    ev = GridEvaluator(OMEGA, W_REF)
    out = np.empty((t, F.size), dtype=complex)
    ev.ratio(num, den, out)
    ref = _vandermonde_values(num, OMEGA, W_REF) / _vandermonde_values(den, OMEGA, W_REF)
    np.testing.assert_allclose(out, ref, rtol=1e-12)


def test_ratio_outside_the_safe_range_and_a_zero_numerator():
    # |D|^2 above SAFE_MAX at the top of the band, below SAFE_MIN at the bottom: element-wise fallback
    omega = np.array([1e-160, 1.0, 1e150]) * W_REF
    ev = GridEvaluator(omega, W_REF)
    den = np.array([[1e-150, 1.0], [1.0, 1.0], [2.0, 0.5]])
    num = np.array([[1.0, 0.0], [0.0, 0.0], [3.0, 0.0]])[:, :1]
    out = np.empty((3, 3), dtype=complex)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ev.ratio(num, den, out)
    sig = 1j * omega / W_REF
    ref = num / (den[:, :1] + den[:, 1:] * sig[None, :])
    assert abs(den[0, 1] * 1e150) ** 2 > SAFE_MAX
    np.testing.assert_allclose(out, ref, rtol=1e-14, atol=0)
    assert np.all(out[1] == 0)               # a zero numerator gives exactly zero


CIRCUITS = [(tag, name) for tag in ("ideal", "macro") for name in catalogue(None)]


@pytest.mark.parametrize("tag,name", CIRCUITS)
def test_a_trial_gives_the_same_bits_alone_or_in_any_batch(tag, name):
    ckt = catalogue(None if tag == "ideal" else MACRO)[name](trials=37, seed=11)
    h = ac_response(ckt, F)
    prepared = prepare_ac(ckt, F)
    for a, b in ((0, 1), (5, 6), (3, 20), (20, 37)):
        assert np.array_equal(prepared.response(slice(a, b)), h[a:b])
    for i in (0, 17, 36):
        assert np.array_equal(ac_response(ckt.trial(i), F)[0], h[i])
    sub = ckt.with_values({el.name: el.value[9:30] for el in ckt.elements if isinstance(el.value, np.ndarray)})
    assert np.array_equal(ac_response(sub, F, memory_limit_bytes=2**20), h[9:30])


def test_prepared_full_method_and_bad_slices():
    ckt = rc_ladder(12, trials=6)
    prepared = prepare_ac(ckt, F)
    assert prepared.method == "full"
    np.testing.assert_array_equal(prepared.response(slice(2, 5)), ac_response(ckt, F)[2:5])
    assert prepared.response(slice(4, 4)).shape == (0, F.size)
    with pytest.raises(CircuitError, match="trials"):
        prepared.response(slice(0, 6, 2))


def test_memoized_decomposition_hands_out_copies():
    system = build_mna(catalogue(None)["sallen_key"]())
    col = system.node_index["out"]
    first = decompose(system, col)
    first[0].cols.append(99)
    first[-1].needed.clear()
    again = decompose(system, col)
    assert 99 not in again[0].cols and again[-1].needed
