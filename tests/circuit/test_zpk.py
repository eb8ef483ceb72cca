"""Zeros, poles and gain against scipy.signal and against the AC solve."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from service.circuit import CircuitError, ac_response, transfer_function_zpk
from tests.circuit.builders import MACRO, butterworth8_sallen_key, catalogue, rc_ladder, sallen_key_lowpass, series_rlc

F = np.logspace(1, 5, 201)


def _assert_same_roots(actual, desired, rtol):
    """Each root of ``desired`` has a distinct root of ``actual`` within rtol * |root| (order-free)."""
    actual = list(np.asarray(actual, dtype=complex))
    assert len(actual) == len(desired)
    for d in desired:
        dist = np.abs(np.asarray(actual) - d)
        i = int(np.argmin(dist))
        assert dist[i] <= rtol * abs(d), f"no root near {d}: closest {actual[i]}"
        actual.pop(i)


def _matches(z, p, k, h):
    _, hz = signal.freqs_zpk(z, p, k, worN=2 * np.pi * F)
    return np.max(np.abs(20 * np.log10(np.abs(hz / h)))), np.max(np.abs(np.angle(hz / h, deg=True)))


def test_butterworth8_poles_match_scipy():
    # source: scipy.signal (reference library) -- buttap, scaled to 1 kHz
    z, p, k = transfer_function_zpk(butterworth8_sallen_key(fc=1e3))
    _, pref, _ = signal.buttap(8)
    pref = pref * 2 * math.pi * 1e3
    assert z.size == 0
    _assert_same_roots(p, pref, 1e-9)
    assert k == pytest.approx(np.prod(np.abs(pref)), rel=1e-9)


def test_series_rlc_matches_scipy_tf2zpk():
    # source: scipy.signal (reference library) -- tf2zpk of 1/(LC s^2 + RC s + 1)
    r, l, c = 100.0, 10e-3, 100e-9
    zr, pr, kr = signal.tf2zpk([1.0], [l * c, r * c, 1.0])
    z, p, k = transfer_function_zpk(series_rlc(r, l, c))
    assert z.size == 0
    _assert_same_roots(p, pr, 1e-10)
    assert k == pytest.approx(kr, rel=1e-10)


def test_loaded_rc_ladder_poles():
    # two loaded sections: poles are the roots of (sRC)^2 + 3 sRC + 1
    r, c = 1.6e3, 10e-9
    z, p, k = transfer_function_zpk(rc_ladder(2, r=r, c=c))
    ref = np.roots([(r * c) ** 2, 3 * r * c, 1.0])
    np.testing.assert_allclose(np.sort(p.real), np.sort(ref.real), rtol=1e-10)
    assert np.all(p.imag == 0)


def test_highpass_zeros_at_origin():
    # state-variable highpass output: H = s^2 ... / (s^2 + s w0/Q + w0^2), a double zero at s = 0
    ckt = catalogue(None)["state_variable_hp"]()
    z, p, k = transfer_function_zpk(ckt)
    assert z.size == 2 and np.all(np.abs(z) < 1e-6 * 2 * math.pi * 1e3)
    assert p.size == 2
    np.testing.assert_allclose(np.abs(p), 2 * math.pi * 1e3, rtol=1e-9)


CASES = [(n, m) for m in (None, MACRO) for n in catalogue(m)]


@pytest.mark.parametrize(("name", "model"), CASES,
                         ids=[f"{n}-{'ideal' if m is None else 'macro'}" for n, m in CASES])
def test_zpk_reproduces_ac_response(name, model):
    ckt = catalogue(model)[name]()
    z, p, k = transfer_function_zpk(ckt)
    assert np.all(p.real < 0)             # every reference circuit is stable
    h = ac_response(ckt, F)[0]
    ddb, ddeg = _matches(z, p, k, h)
    assert ddb < 1e-6 and ddeg < 1e-5


def test_macromodel_adds_the_amplifier_pole():
    z0, p0, _ = transfer_function_zpk(sallen_key_lowpass(None))
    z1, p1, _ = transfer_function_zpk(sallen_key_lowpass(MACRO))
    assert p0.size == 2 and p1.size == 3


def test_multi_trial_rejected():
    with pytest.raises(CircuitError, match="single-trial"):
        transfer_function_zpk(rc_ladder(2, trials=3))
