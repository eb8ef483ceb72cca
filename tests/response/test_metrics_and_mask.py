"""Frequency metrics, requirement verdicts in a response, and the guarantee between grid points."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as ss

from service.circuit.roots import RootSet
from service.errors import LimitExceeded, RolloffError
from service.response import FrequencyGrid, ImproperSystem, InvalidGrid, InvalidMask, ZpkSystem, analyze
from service.response.verification import Band, Criteria, LossLimit, verify
from service.workflows import Requirement


def _requirement(response, pb, sb, rip, att):
    return Requirement(response=response, passband_hz=pb, stopband_hz=sb, passband_ripple_db=rip,
                       stopband_attenuation_db=att).criteria(finite_opamps=False)


def _analyze(sysm, grid, criteria):
    """A response with its verdict, as the response workflow gives it."""
    verdict = verify(RootSet.from_zpk(sysm.zeros, sysm.poles, sysm.gain), criteria).verdict()
    return analyze(sysm, grid, verdict=verdict)

W0 = 2 * math.pi * 1000.0


def test_butterworth_half_power_frequency_is_the_cutoff():
    for n in (1, 2, 5, 8):
        z, p, k = ss.lp2lp_zpk(*ss.buttap(n), W0)
        r = analyze(ZpkSystem(z, p, k), FrequencyGrid(10, 1e5, 7), response_type="lowpass")
        # source: S. Butterworth, "On the theory of filter amplifiers", Wireless Engineer 7, 1930:
        # |H|^2 = 1/(1 + (w/wc)^2n) is half power at wc
        assert r.metrics.f3db_hz == pytest.approx(1000.0, rel=1e-10)
        assert r.metrics.passband_gain_db == pytest.approx(0.0, abs=1e-12)


def test_bandpass_half_power_edges_and_centre():
    z, p, k = ss.lp2bp_zpk(*ss.buttap(4), 2 * math.pi * 40e3, 2 * math.pi * 10e3)
    r = analyze(ZpkSystem(z, p, k), FrequencyGrid(1e3, 1e6, 11))
    lo, hi = r.metrics.f3db_hz
    # source: scipy.signal (reference library) -- lp2bp maps w -> (s^2 + w0^2)/(s*bw):
    # edges at sqrt(w0^2 + bw^2/4) -+ bw/2, geometric centre w0
    bw, f0 = 10e3, 40e3
    assert lo == pytest.approx(math.sqrt(f0**2 + bw**2 / 4) - bw / 2, rel=1e-9)
    assert hi == pytest.approx(math.sqrt(f0**2 + bw**2 / 4) + bw / 2, rel=1e-9)
    assert r.response_type.value == "bandpass"


def test_chebyshev_ripple_and_peaks():
    z, p, k = ss.lp2lp_zpk(*ss.cheb1ap(6, 0.75), W0)
    r = analyze(ZpkSystem(z, p, k), FrequencyGrid(10, 1e5, 31), response_type="lowpass", passband_hz=1000.0)
    # source: scipy.signal (reference library) -- cheb1ap equiripple of rp dB over [0, 1] rad/s
    assert r.metrics.passband_ripple_db == pytest.approx(0.75, abs=1e-9)
    assert r.metrics.passband_gain_db == pytest.approx(0.0, abs=1e-9)
    assert r.metrics.peak_gain_db == pytest.approx(0.0, abs=1e-9)


def test_attenuation_at_requested_frequencies_against_closed_form():
    z, p, k = ss.lp2lp_zpk(*ss.buttap(5), W0)
    r = analyze(ZpkSystem(z, p, k), [100.0], response_type="lowpass", attenuation_at_hz=[2000.0, 5000.0])
    # source: Butterworth magnitude 10 log10(1 + (f/fc)^2n) (Williams & Taylor, 4th ed., eq. 2-11) (from memory)
    got = {a["frequency_hz"]: a["loss_db"] for a in r.metrics.attenuation_db}
    for f in (2000.0, 5000.0):
        assert got[f] == pytest.approx(10 * math.log10(1 + (f / 1000.0) ** 10), rel=1e-10)


@pytest.mark.parametrize("n", [2, 3, 4, 6, 8])
def test_bessel_delay_flatness(n):
    z, p, k = ss.besselap(n, "delay")  # unit delay at DC, w in rad/s
    sysm = ZpkSystem(z, p, k)
    w = np.linspace(0.05, 3.0, 60)
    tau = sysm.group_delay(w / (2 * math.pi))
    theta = np.poly(p).real  # the reverse Bessel polynomial, monic
    # source: W. E. Thomson, "Delay networks having maximally flat frequency characteristics",
    # Proc. IEE 96 (1949): delay error of the unit-delay Bessel filter
    # 1 - tau(w) = w^(2n) / |theta_n(jw)|^2 (from memory)
    err = w ** (2 * n) / np.abs(np.polyval(theta, 1j * w)) ** 2
    np.testing.assert_allclose(1.0 - tau, err, atol=1e-12)
    # source: Williams & Taylor, Electronic Filter Design Handbook, 4th ed., Bessel group-delay
    # curves: a 4th-order unit-delay Bessel is flat within 1 % beyond w = 1.5 (from memory)
    if n == 4:
        assert 1.0 - sysm.group_delay(np.array([1.5 / (2 * math.pi)]))[0] < 0.01
    r = analyze(sysm, [0.01], response_type="lowpass")
    assert r.metrics.group_delay_s == pytest.approx(1.0, rel=1e-12)


def _cheb_case():
    z, p, k = ss.lp2lp_zpk(*ss.cheb1ap(7, 1.0), W0)
    return ZpkSystem(z, p, k)


def test_mask_failure_between_coarse_grid_points_is_found():
    sysm = _cheb_case()
    coarse = np.array([10.0, 3000.0, 10000.0])  # no sample near any ripple valley
    tight = Criteria((LossLimit(Band.PASSBAND, 0.0, 1000.0, 0.95),
                      LossLimit(Band.STOPBAND, 3000.0, math.inf, 40.0, open_end=True)))
    r = _analyze(sysm, coarse, tight)
    # the display grid alone would pass the mask ...
    assert -r.magnitude_db[0] < 0.95 and -r.magnitude_db[1] > 40.0
    # ... but a 1 dB equiripple (scipy.signal cheb1ap, reference library) misses 0.95 dB by 0.05 dB
    assert r.verdict.meets is False
    assert r.verdict.worst_margin_db == pytest.approx(-0.05, abs=1e-9)
    assert 0.0 <= r.verdict.worst.worst_hz < 1000.0
    assert r.verdict.segments[0].met is False and r.verdict.segments[1].met is True


def test_mask_at_the_ripple_passes_and_worst_point_is_a_ripple_valley():
    sysm = _cheb_case()
    ok = _requirement("lowpass", 1000.0, 3000.0, 1.0, 40.0)
    r = _analyze(sysm, [10.0, 3000.0], ok)
    assert r.verdict.meets
    assert abs(r.verdict.worst_margin_db) < 1e-9
    # a valley of T_7: |H| = 1/sqrt(1+eps^2) where cos(7 acos w) = +-1, w = cos(k pi/7)
    valleys = 1000.0 * np.cos(np.arange(0, 4) * math.pi / 7)
    assert np.min(np.abs(valleys - r.verdict.worst.worst_hz)) < 1e-3


def test_stopband_lobe_between_grid_points_is_found():
    z, p, k = ss.lp2lp_zpk(*ss.ellipap(6, 0.5, 60.0), W0)
    sysm = ZpkSystem(z, p, k)
    m = Criteria((LossLimit(Band.PASSBAND, 0.0, 1000.0, 0.5),
                  LossLimit(Band.STOPBAND, 1500.0, math.inf, 60.05, open_end=True)))
    r = _analyze(sysm, [10.0, 1e5], m)
    # source: scipy.signal (reference library) -- ellipap stopband equiripple at rs = 60 dB
    assert not r.verdict.meets
    assert r.verdict.segments[1].margin_db == pytest.approx(-0.05, abs=1e-7)


def test_requirement_segments_shapes_and_errors():
    m = _requirement("bandpass", [35e3, 45e3], [25e3, 60e3], 1.0, 30.0)
    assert [(s.start_hz, s.stop_hz) for s in m.limits] == [(0.0, 25e3), (35e3, 45e3), (60e3, math.inf)]
    m = _requirement("bandstop", [40.0, 70.0], [49.0, 61.0], 1.0, 40.0)
    assert [s.band is Band.PASSBAND for s in m.limits] == [True, False, True]
    assert m.limits[2].stop_hz == 700.0 and m.limits[2].open_end      # an open passband: 10 x its edge
    with pytest.raises(RolloffError) as e:
        _requirement("lowpass", 2000.0, 1000.0, 1.0, 40.0)
    assert e.value.field == "stopband_hz"
    with pytest.raises(RolloffError) as e:
        _requirement("bandpass", 1000.0, [500.0, 2000.0], 1.0, 40.0)
    assert e.value.field == "passband_hz"
    with pytest.raises(RolloffError) as e:
        _requirement("lowpass", 1000.0, 2000.0, 1.0, 0.5)
    assert e.value.field == "stopband_attenuation_db"
    with pytest.raises(InvalidMask):
        LossLimit(Band.PASSBAND, 100.0, 50.0, 1.0)
    with pytest.raises(InvalidMask):
        LossLimit(Band.PASSBAND, 100.0, math.inf, 1.0)     # only a stopband may run to infinity


def test_grid_and_system_validation():
    sysm = _cheb_case()
    with pytest.raises(LimitExceeded) as e:
        analyze(sysm, FrequencyGrid(1.0, 1e4, 10_001))
    assert e.value.setting == "ROLLOFF_MAX_FREQUENCY_POINTS" and e.value.limit == "max_frequency_points"
    with pytest.raises(LimitExceeded):
        analyze(sysm, np.linspace(1, 10, 50), max_points=20)
    with pytest.raises(InvalidGrid):
        analyze(sysm, [10.0, 5.0])
    with pytest.raises(InvalidGrid):
        FrequencyGrid(0.0, 10.0, 5, spacing="log")
    with pytest.raises(InvalidGrid):
        FrequencyGrid(1.0, 10.0, 5, spacing="octave")
    with pytest.raises(ImproperSystem):
        ZpkSystem([1j, -1j, 0.0], [-1.0, -2.0], 1.0)
    with pytest.raises(ImproperSystem):
        ZpkSystem([], [1.0 + 1j, 1.0 - 1j], 1.0)
    from service.response import TimeGrid

    with pytest.raises(LimitExceeded) as e:
        analyze(sysm, [10.0], time=TimeGrid(points=20_000))
    assert e.value.setting == "ROLLOFF_MAX_TIME_POINTS"


def test_result_forms_table_json_svg():
    sysm = _cheb_case()
    r = _analyze(sysm, FrequencyGrid(10, 1e5, 200), _requirement("lowpass", 1000, 3000, 1.0, 40.0))
    t = r.table()
    assert list(t) == ["frequency_hz", "magnitude_db", "phase_deg", "group_delay_s"]
    assert all(v.shape == (200,) for v in t.values())
    tt = r.table("time")
    assert list(tt) == ["time_s", "step", "impulse"] and len(set(v.size for v in tt.values())) == 1
    import json

    doc = json.loads(json.dumps(r.as_dict(), allow_nan=False))
    assert doc["mask_result"]["pass"] is True and len(doc["magnitude_db"]) == 200
    from service.response import table_to_csv

    text = table_to_csv(t)
    lines = text.strip().split("\r\n")
    assert lines[0] == "frequency_hz,magnitude_db,phase_deg,group_delay_s" and len(lines) == 201
    svg = r.svg()
    assert svg.startswith(b"<?xml") and b"<svg" in svg and b"frequency (Hz)" in svg and b"gain (dB)" in svg


def test_matplotlib_is_not_imported_by_the_package():
    import subprocess
    import sys

    code = "import sys, service.response; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
