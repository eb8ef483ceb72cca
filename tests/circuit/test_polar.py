"""PreparedAc.polar: |H|^2, the principal phase and the closed-form group delay without forming H."""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.circuit import OpAmpModel, PolarResponse, prepare_ac

from .builders import (butterworth8_sallen_key, lc_ladder_butterworth3, mfb_bandpass, sallen_key_lowpass,
                       state_variable)

GRID = np.concatenate([[0.0], np.geomspace(10.0, 1e5, 400)])
MODEL = OpAmpModel(gbw_hz=1e6, a0=2e5)


def _second_order_lowpass_delay(f_hz, f0, q):
    """Group delay (s) of w0^2 / (s^2 + s w0/Q + w0^2): the derivative of its phase -atan2(w w0/Q, w0^2 - w^2),
    tau = (w0/Q)(w0^2 + w^2) / ((w0^2 - w^2)^2 + (w w0/Q)^2)  (e.g. A. B. Williams, F. J. Taylor, Electronic
    Filter Design Handbook, 4th ed., 2006, sec. 2.3: delay of a second-order section; derived here)."""
    w, w0 = 2 * np.pi * f_hz, 2 * np.pi * f0
    return (w0 / q) * (w0 ** 2 + w ** 2) / ((w0 ** 2 - w ** 2) ** 2 + (w * w0 / q) ** 2)


def test_delay_of_an_ideal_sallen_key_stage_is_the_textbook_second_order_delay():
    f0, q = 1e3, 0.707
    prepared = prepare_ac(sallen_key_lowpass(f0=f0, q=q), GRID)
    got = prepared.polar(delay=True).delay_s[0]
    want = _second_order_lowpass_delay(GRID, f0, q)
    assert np.allclose(got, want, rtol=1e-9, atol=0)
    # DC: 1/(w0 Q), the limit of the formula
    assert got[0] == pytest.approx(1.0 / (2 * math.pi * f0 * q), rel=1e-12)


@pytest.mark.parametrize("build", [
    lambda: butterworth8_sallen_key(model=MODEL, trials=7, seed=3),      # one rational per trial, constant N
    lambda: mfb_bandpass(model=MODEL, trials=7, seed=4),                 # N = a s
    lambda: state_variable(model=MODEL, trials=5, seed=5, output="hp"),  # N = a s^2, a feedback loop
    lambda: lc_ladder_butterworth3(trials=5, seed=6),                    # passive, L and C
], ids=["sallen-key-8", "mfb-bandpass", "state-variable-hp", "lc-ladder"])
def test_polar_parts_agree_with_the_complex_response(build):
    circuit = build()
    prepared = prepare_ac(circuit, GRID)
    h = prepared.response()
    out = prepared.polar(phase=True, delay=True)
    # source: |H|^2 and arg H of numpy's complex values of the same analysis
    assert np.allclose(out.power, np.abs(h) ** 2, rtol=1e-12, atol=0)
    dphi = np.angle(np.exp(1j * (out.phase_rad - np.angle(h))))
    assert np.max(np.abs(dphi)) < 1e-12
    # the delay against a central difference of the phase, step 1e-7 f (independent of the closed form)
    f = GRID[1:]
    up, down = prepared.on_grid(f * (1 + 1e-7)).response(), prepared.on_grid(f * (1 - 1e-7)).response()
    numeric = -np.angle(up * np.conj(down)) / (2 * np.pi * f * 2e-7)
    scale = np.max(np.abs(numeric), axis=1, keepdims=True)
    assert np.max(np.abs(out.delay_s[:, 1:] - numeric) / scale) < 1e-6


def test_float32_outputs_are_computed_in_their_dtype_and_rows_do_not_depend_on_the_batch():
    circuit = butterworth8_sallen_key(model=MODEL, trials=40, seed=8)
    prepared = prepare_ac(circuit, GRID)
    whole = PolarResponse(np.empty((40, GRID.size)), np.empty((40, GRID.size), np.float32),
                          np.empty((40, GRID.size), np.float32))
    prepared.polar(phase=True, delay=True, out=whole)
    ref = prepared.polar(phase=True, delay=True)
    assert np.allclose(whole.phase_rad, ref.phase_rad, rtol=0, atol=2e-6)
    assert np.allclose(whole.delay_s, ref.delay_s, rtol=1e-6, atol=0)
    for a, b in ((0, 1), (3, 17), (17, 40)):
        part = prepared.polar(slice(a, b), phase=True, delay=True)
        assert np.array_equal(part.power, ref.power[a:b])
        assert np.array_equal(part.phase_rad, ref.phase_rad[a:b])
        assert np.array_equal(part.delay_s, ref.delay_s[a:b])


def test_outputs_may_be_transposed_views_of_frequency_major_stores():
    # the Monte Carlo hands over columns of (F, T) float32 stores, seen as (k, F): the same bits as contiguous
    circuit = butterworth8_sallen_key(model=MODEL, trials=40, seed=9)
    prepared = prepare_ac(circuit, GRID)
    contiguous = PolarResponse(np.empty((25, GRID.size)), np.empty((25, GRID.size), np.float32),
                               np.empty((25, GRID.size), np.float32))
    prepared.polar(slice(10, 35), phase=True, delay=True, out=contiguous)
    phase_store = np.full((GRID.size, 40), np.nan, np.float32)
    delay_store = np.full((GRID.size, 40), np.nan, np.float32)
    views = PolarResponse(np.empty((25, GRID.size)), phase_store[:, 10:35].T, delay_store[:, 10:35].T)
    prepared.polar(slice(10, 35), phase=True, delay=True, out=views)
    assert np.array_equal(phase_store[:, 10:35].T, contiguous.phase_rad)
    assert np.array_equal(delay_store[:, 10:35].T, contiguous.delay_s)
    assert np.isnan(phase_store[:, :10]).all() and np.isnan(delay_store[:, 35:]).all()   # nothing else written


def test_output_arrays_of_the_wrong_shape_are_refused():
    prepared = prepare_ac(sallen_key_lowpass(trials=3), GRID)
    with pytest.raises(Exception, match="shape"):
        prepared.polar(out=PolarResponse(np.empty((2, GRID.size))))
    with pytest.raises(Exception, match="shape"):
        prepared.polar(delay=True, out=PolarResponse(np.empty((3, GRID.size))))


@pytest.mark.parametrize("method", ["full", "staged"])
def test_the_difference_route_gives_the_closed_form_delay(method):
    """Where no single rational is at hand (the full MNA solve here) the delay is a central difference of the
    phase; it agrees with the closed form of the staged route to its truncation error (~1e-10 here)."""
    circuit = butterworth8_sallen_key(model=MODEL, trials=3, seed=9)
    closed = prepare_ac(circuit, GRID, method="staged").polar(phase=True, delay=True)
    other = prepare_ac(circuit, GRID, method=method).polar(phase=True, delay=True)
    assert np.allclose(other.power, closed.power, rtol=1e-9, atol=0)
    assert np.max(np.abs(np.angle(np.exp(1j * (other.phase_rad - closed.phase_rad))))) < 1e-9
    scale = np.max(np.abs(closed.delay_s), axis=1, keepdims=True)
    assert np.max(np.abs(other.delay_s - closed.delay_s) / scale) < 1e-7


def test_a_float32_phase_far_outside_float32s_range_is_taken_in_float64():
    """Up to 10 GHz an 8th-order cascade's |D|^2 reaches ~1e100: its parts would overflow float32, so the phase
    is computed in float64 and rounded once (no overflow, the float64 phase to float32 rounding)."""
    grid = np.geomspace(10.0, 1e10, 300)
    prepared = prepare_ac(butterworth8_sallen_key(trials=2, seed=1), grid)
    ref = prepared.polar(phase=True)
    out = PolarResponse(np.empty((2, grid.size)), np.empty((2, grid.size), np.float32))
    prepared.polar(phase=True, out=out)
    assert np.max(np.abs(np.angle(np.exp(1j * (out.phase_rad - ref.phase_rad))))) < 1e-6
