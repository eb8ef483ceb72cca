"""Magnitude, phase and group delay of transfer functions against scipy.signal."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as ss

from service.approximation.types import Section, SectionKind
from service.response import FrequencyGrid, ZpkSystem, analyze, section_zpk

W0 = 2 * math.pi * 1000.0

CASES = {
    "butterworth8": ss.buttap(8),
    "chebyshev1_5": ss.cheb1ap(5, 1.0),
    "chebyshev2_6": ss.cheb2ap(6, 50.0),
    "elliptic7": ss.ellipap(7, 0.5, 60.0),
    "bessel6": ss.besselap(6, "phase"),
}


def _systems():
    for name, proto in CASES.items():
        yield name + "_lp", ss.lp2lp_zpk(*proto, W0)
        yield name + "_hp", ss.lp2hp_zpk(*proto, W0)
        yield name + "_bp", ss.lp2bp_zpk(*proto, W0, W0 / 4)
        yield name + "_bs", ss.lp2bs_zpk(*proto, W0, W0 / 2)


@pytest.mark.parametrize("name,zpk", list(_systems()), ids=lambda v: v if isinstance(v, str) else "")
def test_magnitude_phase_delay_match_scipy(name, zpk):
    z, p, k = zpk
    f = np.geomspace(10.0, 1e5, 4001)
    r = analyze(ZpkSystem(z, p, k), f)
    # source: scipy.signal (reference library) -- freqs_zpk
    _, h = ss.freqs_zpk(z, p, k, worN=2 * math.pi * f)
    ref_db = 20 * np.log10(np.maximum(np.abs(h), 1e-20))
    visible = ref_db > -300
    np.testing.assert_allclose(r.magnitude_db[visible], ref_db[visible], atol=1e-9)
    ph = np.radians(r.phase_deg)
    # the same angle modulo a turn at every point (a grid point exactly on a
    # zero has no phase of its own: skipped) ...
    axis_w = np.abs(np.asarray(z).imag[np.abs(np.asarray(z).real) < 1e-9])
    on_zero = np.any(np.abs(2 * math.pi * f[:, None] - axis_w[None, :]) < 1e-9 * axis_w[None, :], axis=1)
    np.testing.assert_allclose(np.angle(np.exp(1j * (ph - np.angle(h))))[~on_zero], 0.0, atol=1e-7)
    # ... and unwrapped: without zeros on the jw axis the phase is continuous, and
    # equals scipy's phase unwrapped on a 32x finer grid (up to whole turns)
    if axis_w.size == 0:
        ff = np.geomspace(f[0], f[-1], 32 * (f.size - 1) + 1)
        _, hf = ss.freqs_zpk(z, p, k, worN=2 * math.pi * ff)
        fine = np.unwrap(np.angle(hf))[::32]
        turns = np.round((ph[0] - fine[0]) / (2 * math.pi))
        np.testing.assert_allclose(ph, fine + 2 * math.pi * turns, atol=1e-7)
    else:
        # with them, steps of about pi (odd multiplicity) happen only at those zeros
        big = np.nonzero(np.abs(np.diff(ph)) > 3.0)[0]
        for i in big:
            assert np.any((axis_w >= 2 * math.pi * f[i]) & (axis_w <= 2 * math.pi * f[i + 1]))
    # source: scipy.signal (reference library) -- group delay from its phase by a
    # central finite difference of relative step 1e-6 at every grid point
    d = 1e-6
    _, hp = ss.freqs_zpk(z, p, k, worN=2 * math.pi * f * (1 + d))
    _, hm = ss.freqs_zpk(z, p, k, worN=2 * math.pi * f * (1 - d))
    tau_fd = -np.angle(hp / hm) / (2 * math.pi * f * 2 * d)
    # away from jw-axis zeros, where the phase jumps by pi and no delay exists
    wm = 2 * math.pi * f
    zero_w = np.abs(np.asarray(z).imag[np.abs(np.asarray(z).real) < 1e-9])
    ok = np.ones(f.size, dtype=bool)
    for wz in zero_w:
        ok &= np.abs(wm - wz) > 1e-4 * wz
    scale = np.max(np.abs(r.group_delay_s))
    np.testing.assert_allclose(r.group_delay_s[ok], tau_fd[ok], atol=1e-6 * scale)


def test_group_delay_matches_fine_finite_difference_exactly():
    z, p, k = ss.lp2lp_zpk(*ss.ellipap(6, 0.2, 70.0), W0)
    f = np.linspace(100.0, 990.0, 50)
    sysm = ZpkSystem(z, p, k)
    h = 1e-4
    # source: scipy.signal (reference library) -- freqs_zpk, central difference of its phase
    _, hp = ss.freqs_zpk(z, p, k, worN=2 * math.pi * (f + h))
    _, hm = ss.freqs_zpk(z, p, k, worN=2 * math.pi * (f - h))
    dphi = np.angle(hp / hm)
    tau = -dphi / (2 * math.pi * 2 * h)
    np.testing.assert_allclose(sysm.group_delay(f), tau, rtol=1e-6)


def test_sections_cascade_matches_zpk_product():
    secs = [
        Section(SectionKind.LOWPASS, 2, 1000.0, 0.7071, None, 1.0),
        Section(SectionKind.HIGHPASS, 1, 50.0, None, None, 2.0),
        Section(SectionKind.LOWPASS_NOTCH, 2, 1200.0, 3.0, 4000.0, 1.0),
        Section(SectionKind.BANDPASS, 2, 800.0, 5.0, None, 1.5),
        Section(SectionKind.ALLPASS, 2, 600.0, 0.9, None, 1.0),
    ]
    sysm = ZpkSystem.from_sections(secs)
    f = np.geomspace(1.0, 1e5, 300)
    s = 2j * math.pi * f
    w0 = lambda fr: 2 * math.pi * fr  # noqa: E731
    # the standard forms written out (DESIGN notes), evaluated directly
    h = (1.0 * w0(1000) ** 2 / (s**2 + s * w0(1000) / 0.7071 + w0(1000) ** 2)
         * 2.0 * s / (s + w0(50))
         * (w0(1200) ** 2 / w0(4000) ** 2) * (s**2 + w0(4000) ** 2) / (s**2 + s * w0(1200) / 3.0 + w0(1200) ** 2)
         * 1.5 * (w0(800) / 5.0) * s / (s**2 + s * w0(800) / 5.0 + w0(800) ** 2)
         * (s**2 - s * w0(600) / 0.9 + w0(600) ** 2) / (s**2 + s * w0(600) / 0.9 + w0(600) ** 2))
    np.testing.assert_allclose(sysm.evaluate(f), h, rtol=1e-10)


def test_bandpass_section_gain_at_f0_and_notch_dc_gain():
    z, p, k = section_zpk(Section(SectionKind.BANDPASS, 2, 1000.0, 4.0, None, 2.5))
    assert abs(ZpkSystem(z, p, k).evaluate(np.array([1000.0]))[0] - 2.5) < 1e-12
    z, p, k = section_zpk(Section(SectionKind.HIGHPASS_NOTCH, 2, 1000.0, 2.0, 500.0, 0.5))
    assert abs(ZpkSystem(z, p, k).evaluate(np.array([0.0]))[0] - 0.5) < 1e-12


def test_exact_transmission_zero_on_the_grid_is_floored_not_infinite():
    z, p, k = ss.lp2lp_zpk(*ss.ellipap(4, 0.5, 40.0), W0)
    fz = abs(z[0].imag) / (2 * math.pi)
    r = analyze(ZpkSystem(z, p, k), [100.0, fz, 5000.0])
    assert np.all(np.isfinite(r.magnitude_db)) and r.magnitude_db[1] < -250
    assert np.all(np.isfinite(r.group_delay_s))


def test_log_and_linear_grids():
    g = FrequencyGrid(10.0, 1000.0, 3)
    np.testing.assert_allclose(g.frequencies(), [10.0, 100.0, 1000.0])
    g = FrequencyGrid(0.0, 1000.0, 3, spacing="linear")
    np.testing.assert_allclose(g.frequencies(), [0.0, 500.0, 1000.0])
