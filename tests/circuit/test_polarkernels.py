"""The compiled element-wise steps of the polar evaluation give the bits of the numpy expressions they replace.

Three references, none of them the kernels: the numpy passes of ``GridEvaluator._numpy_polar_block`` (the whole
``ratio_polar`` forced through them), plain numpy expressions written out here element by element (numpy's
IEEE ufuncs, the same operation order), and numpy's complex division ``N/D`` for the values themselves.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.circuit import OpAmpModel, PolarResponse, polarkernels, prepare_ac
from service.circuit.polyeval import SAFE_MAX, SAFE_MIN, GridEvaluator

from .builders import butterworth8_sallen_key, mfb_bandpass

MC_GRID = np.geomspace(10.0, 1e5, 501)            # the reference Monte Carlo grid (log, 10 Hz ... 100 kHz)
EXTRA = np.geomspace(200.0, 5e3, 130)             # a second grid of the same prepared circuit (metric points)
BOUNDS = np.array([1e-290, 1e290, 1e-60, 1e60])
NO_TURN = np.zeros((2, 1))                        # the reference phasors' placeholder (not read)


@pytest.fixture
def numpy_only(monkeypatch):
    """``ratio_polar`` with every block done by the numpy passes (the compiled block reports 'out of range')."""
    calls = []

    def refuse(self, *args):
        calls.append(1)
        return False
    monkeypatch.setattr(GridEvaluator, "_compiled_polar_block", refuse)
    return calls


def _spy_fallback(monkeypatch) -> list:
    calls = []
    original = GridEvaluator._numpy_polar_block

    def spy(self, *args):
        calls.append(args[0] is None)
        return original(self, *args)
    monkeypatch.setattr(GridEvaluator, "_numpy_polar_block", spy)
    return calls


def _store_sweep(prepared, extra, trials: int, chunk: int) -> list[np.ndarray]:
    """As the Monte Carlo does: float32 phase and delay into frequency-major stores through transposed views,
    the power into a column block of a wider array (the other columns: the extra grid, power only)."""
    f, x = prepared.frequency_hz.size, extra.frequency_hz.size
    phase = np.full((f, trials), np.nan, np.float32)
    delay = np.full((f, trials), np.nan, np.float32)
    power = np.full((trials, f + x), np.nan)
    for t0 in range(0, trials, chunk):
        sl = slice(t0, min(trials, t0 + chunk))
        prepared.polar(sl, phase=True, delay=True, out=PolarResponse(power[sl, :f], phase[:, sl].T, delay[:, sl].T))
        extra.polar(sl, out=PolarResponse(power[sl, f:]))
    return [power, phase, delay]


def _same_bits(a: np.ndarray, b: np.ndarray) -> bool:
    return a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()


def test_reference_design_chunks_give_the_bits_of_the_numpy_path(monkeypatch):
    circuit = butterworth8_sallen_key(model=OpAmpModel(gbw_hz=1e6, a0=2e5), trials=2500, seed=1)
    full = prepare_ac(circuit, np.concatenate([MC_GRID, EXTRA]))
    main, extra = full.on_grid(MC_GRID), full.on_grid(EXTRA)
    fallback = _spy_fallback(monkeypatch)
    got = _store_sweep(main, extra, 2500, 1024)
    wide = main.polar(phase=True, delay=True)                         # float64 outputs, one call
    assert not fallback                                               # every block compiled
    monkeypatch.setattr(GridEvaluator, "_compiled_polar_block", lambda self, *a: False)
    want = _store_sweep(main, extra, 2500, 1024)
    wide_numpy = main.polar(phase=True, delay=True)
    assert len(fallback) > 0
    for g, w in zip(got, want):
        assert not np.isnan(g).any()
        assert _same_bits(g, w)
    for g, w in zip((wide.power, wide.phase_rad, wide.delay_s), (wide_numpy.power, wide_numpy.phase_rad,
                                                                 wide_numpy.delay_s)):
        assert _same_bits(g, w)


def _stable_denominators(rng, trials: int, degree: int) -> np.ndarray:
    """Ascending real coefficients of polynomials with random roots in the left half plane (pairs)."""
    out = np.empty((trials, degree + 1))
    for t in range(trials):
        w = rng.uniform(0.2, 5.0, degree // 2)
        z = rng.uniform(0.05, 1.0, degree // 2)
        roots = np.concatenate([-z * w + 1j * w * np.sqrt(1 - z * z), -z * w - 1j * w * np.sqrt(1 - z * z)])
        if degree % 2:
            roots = np.append(roots, -rng.uniform(0.2, 5.0))
        out[t] = np.real(np.poly(roots))[::-1] * rng.uniform(0.5, 2.0)
    return out


NUMERATORS = {
    "constant": lambda rng, t: rng.uniform(0.5, 2.0, (t, 1)),
    "zero-constant-rows": lambda rng, t: np.where(np.arange(t)[:, None] % 3 == 0, 0.0, rng.uniform(0.5, 2, (t, 1))),
    "a-s": lambda rng, t: np.column_stack([np.zeros(t), rng.uniform(0.5, 2.0, t)]),
    "a-s2": lambda rng, t: np.column_stack([np.zeros((t, 2)), rng.uniform(0.5, 2.0, t)]),
    "general": lambda rng, t: rng.standard_normal((t, 4)),
}


@pytest.mark.parametrize("kind", list(NUMERATORS))
@pytest.mark.parametrize("degree", [3, 6])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_random_stable_polynomials_give_the_bits_of_the_numpy_path(kind, degree, dtype, monkeypatch):
    rng = np.random.default_rng(degree * 7 + len(kind))
    t = 150                                                           # several blocks and a partial one
    den = _stable_denominators(rng, t, degree)
    num = NUMERATORS[kind](rng, t)
    omega = np.concatenate([[0.0], np.geomspace(0.01, 100.0, 300)])   # 0: N = 0 for a-s and a-s2
    ev = GridEvaluator(omega, 1.0)
    ev.block = 64
    outs = [np.empty((t, omega.size)), np.empty((t, omega.size), dtype), np.empty((t, omega.size), dtype)]
    fallback = _spy_fallback(monkeypatch)
    ev.ratio_polar(num, den, *outs)
    assert not fallback
    power_only = np.empty((t, omega.size))
    ev.ratio_polar(num, den, power_only)
    monkeypatch.setattr(GridEvaluator, "_compiled_polar_block", lambda self, *a: False)
    ref = [np.empty_like(a) for a in outs]
    ev.ratio_polar(num, den, *ref)
    for g, w in zip(outs, ref):
        assert _same_bits(g, w)
    assert _same_bits(power_only, ref[0])
    # the values themselves against numpy's complex division (scaled by the largest, for the delay)
    pv = np.polynomial.polynomial.polyval
    h = pv(1j * omega, num.T) / pv(1j * omega, den.T)                  # (t, F)
    assert np.allclose(outs[0], np.abs(h) ** 2, rtol=1e-9, atol=0)
    live = np.abs(h) > 0
    err = np.abs(np.angle(np.exp(1j * (outs[1].astype(float) - np.angle(h)))))
    assert np.max(err[live]) < (1e-6 if dtype == np.float32 else 1e-9)


def test_a_block_out_of_the_safe_range_is_done_by_the_numpy_path(monkeypatch):
    """One trial's |D|^2 beyond SAFE_MAX: its block goes through complex division, the others compiled; the
    values are numpy's complex division's, and every block the bits of the numpy path."""
    rng = np.random.default_rng(5)
    t = 130
    den = _stable_denominators(rng, t, 4)
    num = rng.uniform(0.5, 2.0, (t, 1))
    num[70] = 1e-150                                                  # D/a ~ 1e150: |D/a|^2 > SAFE_MAX
    omega = np.geomspace(0.01, 1.0, 200)
    ev = GridEvaluator(omega, 1.0)
    ev.block = 64
    fallback = _spy_fallback(monkeypatch)
    outs = [np.empty((t, omega.size)), np.empty((t, omega.size), np.float32), np.empty((t, omega.size), np.float32)]
    ev.ratio_polar(num, den, *outs)
    assert fallback == [True]                                         # the block of trial 70 only
    h = num[70, 0] / np.polynomial.polynomial.polyval(1j * omega, den[70])
    assert np.allclose(outs[0][70], np.abs(h) ** 2, rtol=1e-9, atol=0)
    assert (den[70, 0] / num[70, 0]) ** 2 > SAFE_MAX
    monkeypatch.setattr(GridEvaluator, "_compiled_polar_block", lambda self, *a: False)
    ref = [np.empty_like(a) for a in outs]
    ev.ratio_polar(num, den, *ref)
    for g, w in zip(outs, ref):
        assert _same_bits(g, w)


def test_a_tiny_nonzero_numerator_sends_the_delay_to_the_numpy_path(monkeypatch):
    """|N|^2 below SAFE_MIN with N != 0: Re(N'/N) by complex division (the kernel's quotient would be inexact)."""
    rng = np.random.default_rng(6)
    t = 20
    den = _stable_denominators(rng, t, 4)
    num = np.column_stack([np.full(t, 1e-160), np.ones(t)])          # N(0) = 1e-160: |N|^2 = 1e-320
    omega = np.concatenate([[0.0], np.geomspace(0.01, 100.0, 50)])
    ev = GridEvaluator(omega, 1.0)
    fallback = _spy_fallback(monkeypatch)
    outs = [np.empty((t, omega.size)), None, np.empty((t, omega.size))]
    ev.ratio_polar(num, den, *outs)
    assert fallback == [False]
    assert 1e-320 < SAFE_MIN
    # source: the delay at DC of (s + a)/D is Re(D'/D) - 1/a, here -1/1e-160 dominating
    d1 = den[:, 1] / den[:, 0]
    assert np.allclose(outs[2][:, 0], d1 - 1e160, rtol=1e-12)
    monkeypatch.setattr(GridEvaluator, "_compiled_polar_block", lambda self, *a: False)
    ref = [np.empty_like(outs[0]), None, np.empty_like(outs[2])]
    ev.ratio_polar(num, den, *ref)
    assert _same_bits(outs[0], ref[0]) and _same_bits(outs[2], ref[2])


def test_constant_kernel_against_written_out_numpy_expressions():
    rng = np.random.default_rng(7)
    c, ec, d_re, d_im = (rng.standard_normal((9, 33)) * 10.0 ** rng.uniform(-8, 8, (9, 33)) for _ in range(4))
    power = np.empty((9, 40))[:, :33]
    c32, ec32 = np.empty((9, 33), np.float32), np.empty((9, 33), np.float32)
    store = np.empty((33, 12), np.float32)
    safe, narrow = polarkernels.polar_constant(c, ec, d_re, d_im, power, c32, ec32, store[:, 2:11].T, NO_TURN,
                                               BOUNDS, True, True, False)
    m = c * c + ec * ec
    r = 1.0 / m
    assert safe and narrow == bool(((m > 1e-60) & (m < 1e60)).all())
    assert _same_bits(power, r)
    assert _same_bits(c32, c.astype(np.float32)) and _same_bits(ec32, ec.astype(np.float32))
    assert _same_bits(store[:, 2:11].T, ((c * d_im + ec * d_re) * r).astype(np.float32))
    c[4, 5] = 0.0
    ec[4, 5] = 1e-150                                                 # |D|^2 = 1e-300 < SAFE_MIN
    assert polarkernels.polar_constant(c, ec, d_re, d_im, power, c32, ec32, store[:, 2:11].T, NO_TURN, BOUNDS,
                                       False, False, False) == (False, False)
    c[4, 5] = np.nan
    assert not polarkernels.polar_constant(c, ec, d_re, d_im, power, c32, ec32, power, NO_TURN, BOUNDS, False,
                                           False, False)[0]


def test_general_kernel_against_written_out_numpy_expressions():
    rng = np.random.default_rng(8)
    a = [rng.standard_normal((5, 21)) * 10.0 ** rng.uniform(-5, 5, (5, 21)) for _ in range(8)]
    c, ec, n_re, n_im, sd_re, sd_im, sn_re, sn_im = a
    n_re[2, 3] = n_im[2, 3] = 0.0                                     # N = 0: Re(N'/N) taken as 0
    power, u, v, delay = (np.empty((5, 21)) for _ in range(4))
    assert polarkernels.polar_general(c, ec, n_re, n_im, sd_re, sd_im, sn_re, sn_im, power, u, v, delay, NO_TURN,
                                      BOUNDS, True, True, False)
    r = 1.0 / (c * c + ec * ec)
    nn = n_re * n_re + n_im * n_im
    assert _same_bits(power, nn * r)
    assert _same_bits(u, n_re * c - n_im * ec) and _same_bits(v, n_re * ec + n_im * c)
    with np.errstate(invalid="ignore"):
        ls = np.where(nn > 0, (n_re * sn_im - n_im * sn_re) / nn, 0.0)
    assert _same_bits(delay, (c * sd_im + ec * sd_re) * r - ls)
    n_re[2, 3] = 1e-200                                               # |N|^2 = 1e-400: out of range, N != 0
    assert not polarkernels.polar_general(c, ec, n_re, n_im, sd_re, sd_im, sn_re, sn_im, power, u, v, delay,
                                          NO_TURN, BOUNDS, True, True, False)
    assert polarkernels.polar_general(c, ec, n_re, n_im, sd_re, sd_im, sn_re, sn_im, power, u, v, delay,
                                      NO_TURN, BOUNDS, True, False, False)   # without the delay |N|^2 is not used


def test_kernels_turn_the_phase_parts_by_the_reference_as_the_written_out_expressions():
    """With a reference: the float32 parts (constant numerator) and the float64 parts of N conj D turned by
    conj r, ``x cr + y sr`` and ``y cr - x sr``, the bits of the numpy expressions."""
    rng = np.random.default_rng(10)
    c, ec, n_re, n_im = (rng.standard_normal((6, 25)) for _ in range(4))
    angle = rng.uniform(-np.pi, np.pi, 25)
    rot = np.stack([np.cos(angle), np.sin(angle)])
    power = np.empty((6, 25))
    c32, ec32 = np.empty((6, 25), np.float32), np.empty((6, 25), np.float32)
    assert polarkernels.polar_constant(c, ec, c, c, power, c32, ec32, power, rot, BOUNDS, True, False, True)[0]
    assert _same_bits(c32, (c * rot[0] + ec * rot[1]).astype(np.float32))
    assert _same_bits(ec32, (ec * rot[0] - c * rot[1]).astype(np.float32))
    u, v = np.empty((6, 25)), np.empty((6, 25))
    assert polarkernels.polar_general(c, ec, n_re, n_im, c, c, c, c, power, u, v, power, rot, BOUNDS, True, False,
                                      True)
    pu, pv = n_re * c - n_im * ec, n_re * ec + n_im * c
    assert _same_bits(u, pu * rot[0] + pv * rot[1]) and _same_bits(v, pv * rot[0] - pu * rot[1])


@pytest.mark.parametrize("kind", ["constant", "general"])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_phase_relative_to_a_reference_is_the_principal_angle_of_h_conj_r(kind, dtype, monkeypatch):
    """``arg(H conj r)`` against numpy's complex arithmetic on ``N/D`` (numpy.polynomial values), the kernel
    path and the numpy path the same bits, and a reference of zeros (no direction) leaving ``arg H``."""
    rng = np.random.default_rng(11)
    t = 90
    den = _stable_denominators(rng, t, 6)
    num = NUMERATORS[kind](rng, t)
    omega = np.geomspace(0.01, 100.0, 200)
    pv = np.polynomial.polynomial.polyval
    h = pv(1j * omega, num.T) / pv(1j * omega, den.T)
    reference = 3.0 * np.exp(1j * rng.uniform(-np.pi, np.pi, omega.size))   # any modulus: its unit phasor
    ev = GridEvaluator(omega, 1.0)
    ev.block = 64
    got = [np.empty((t, omega.size)), np.empty((t, omega.size), dtype)]
    ev.ratio_polar(num, den, *got, reference=reference)
    want = np.angle(h * np.conj(reference))
    err = np.abs(np.angle(np.exp(1j * (got[1].astype(float) - want))))
    assert np.max(err) < (3e-7 if dtype == np.float32 else 1e-9)
    assert np.all(np.abs(got[1]) <= np.pi)
    monkeypatch.setattr(GridEvaluator, "_compiled_polar_block", lambda self, *a: False)
    ref = [np.empty_like(a) for a in got]
    ev.ratio_polar(num, den, *ref, reference=reference)
    assert all(_same_bits(g, w) for g, w in zip(got, ref))
    plain = np.empty((t, omega.size), dtype)
    ev.ratio_polar(num, den, np.empty((t, omega.size)), plain, reference=np.zeros(omega.size))
    absolute = np.empty((t, omega.size), dtype)
    ev.ratio_polar(num, den, np.empty((t, omega.size)), absolute)
    assert _same_bits(plain, absolute)
