"""Tests of vesselnet.waveforms (inflow shapes, harmonics, convention e^(+i omega t)).

Sources: scipy.integrate.quad and scipy.optimize as reference tools; the
discrete Fourier series / Parseval identities (standard); numpy.interp for
periodic linear interpolation.  The ejection shape is our own (documented in
the module), so its checks are against its stated definition.
"""

import numpy as np
import pytest
from scipy import integrate, optimize

from vesselnet.errors import NetworkSpecError
from vesselnet.waveforms import (BACKFLOW_DURATION_RATIO, DEFAULT_HARMONICS, ejection_flow,
                                 ejection_waveform, harmonic_truncation, harmonics,
                                 resample_periodic, synthesize)

SV, HR, TE = 70e-6, 70 / 60, 0.3     # 70 mL, 70 bpm, 0.3 s (REFERENCES 8.1 typical resting values [M])
PERIOD = 1 / HR


@pytest.mark.parametrize("skew", [0.0, 0.5, 1.0])
@pytest.mark.parametrize("backflow", [0.0, 0.05])
def test_ejection_integrates_to_stroke_volume(skew, backflow):
    """Net volume per beat = stroke volume, reference scipy.integrate.quad over one period
    (split at the lobe boundaries)."""
    tb = TE * BACKFLOW_DURATION_RATIO
    pieces = [(0.0, TE), (TE, TE + tb), (TE + tb, PERIOD)]
    volume = sum(integrate.quad(lambda t: ejection_flow(t, SV, HR, TE, skew=skew,
                                                        backflow_fraction=backflow),
                                a, b, epsabs=0.0, epsrel=1e-13)[0] for a, b in pieces)
    assert volume == pytest.approx(SV, rel=1e-12)
    if backflow:
        back, _ = integrate.quad(lambda t: ejection_flow(t, SV, HR, TE, skew=skew,
                                                         backflow_fraction=backflow),
                                 TE, TE + tb, epsabs=0.0, epsrel=1e-13)
        assert -back == pytest.approx(backflow * SV / (1 - backflow), rel=1e-12)


@pytest.mark.parametrize("n", [64, 513, 2048])
def test_samples_hold_the_stroke_volume_exactly(n):
    """Sample mean x period = stroke volume (to rounding), and the samples are the analytic
    flow within the documented 1 + O(N^-2) factor."""
    q = ejection_waveform(SV, HR, TE, n, backflow_fraction=0.03)
    assert q.mean() * PERIOD == pytest.approx(SV, rel=1e-13)
    exact = ejection_flow(np.arange(n) * PERIOD / n, SV, HR, TE, backflow_fraction=0.03)
    assert np.max(np.abs(q - exact)) <= 20.0 / n ** 2 * np.max(exact)
    assert harmonics(q, 0)[0].real == pytest.approx(SV * HR, rel=1e-13)


@pytest.mark.parametrize("skew, peak_fraction", [(0.0, 0.5), (1.0, 1 / 3),
                                                 (0.6, np.arccos((np.sqrt(1 + 8 * 0.36) - 1) / 2.4) / np.pi)])
def test_ejection_peak_time(skew, peak_fraction):
    """Peak where cos(pi s) = (sqrt(1 + 8 k^2) - 1)/(4 k) (module Notes), located with
    scipy.optimize.minimize_scalar."""
    res = optimize.minimize_scalar(lambda t: -ejection_flow(t, SV, HR, TE, skew=skew),
                                   bounds=(0.0, TE), method="bounded", options={"xatol": 1e-10})
    assert res.x / TE == pytest.approx(peak_fraction, abs=1e-6)


def test_diastole_and_backflow_shape():
    """Zero flow in diastole; the backflow lobe is negative only in [T_e, T_e + T_e/6)."""
    t = np.linspace(0, PERIOD, 2001, endpoint=False)
    q = ejection_flow(t, SV, HR, TE, backflow_fraction=0.04)
    tb = TE * BACKFLOW_DURATION_RATIO
    assert np.all(q[(t > 0) & (t < TE)] > 0)
    assert np.all(q[(t > TE) & (t < TE + tb)] < 0)
    assert np.all(q[t >= TE + tb] == 0.0)
    shifted = ejection_flow(t + 3 * PERIOD, SV, HR, TE, backflow_fraction=0.04)
    assert np.allclose(shifted, q, rtol=0, atol=1e-10 * q.max())     # periodic


@pytest.mark.parametrize("n", [16, 17, 256])
def test_harmonic_round_trip(n):
    """All harmonics (K = N // 2) re-synthesised at the sample times give the samples back
    (discrete Fourier inversion); several signals at once along axis 1."""
    rng = np.random.default_rng(73019 + n)
    samples = rng.normal(size=(n, 3))
    coef = harmonics(samples, n // 2)
    assert coef.shape == (n // 2 + 1, 3)
    back = synthesize(coef, np.arange(n) * 0.8 / n, 0.8)
    assert np.allclose(back, samples, rtol=0, atol=1e-12)


def test_phasor_convention():
    """q = 2 + 3 cos(w t - 0.7) + 0.5 sin(4 w t) has Q_0 = 2, Q_1 = 3 e^(-0.7 i) and
    Q_4 = 0.5 e^(-i pi/2) under q = Re sum Q_n e^(+i n w t) (REFERENCES 10.11);
    synthesis between samples is exact for a band-limited signal."""
    n, period = 40, 0.9
    w = 2 * np.pi / period

    def signal(t):
        return 2 + 3 * np.cos(w * t - 0.7) + 0.5 * np.sin(4 * w * t)

    coef = harmonics(signal(np.arange(n) * period / n), 6)
    expected = np.zeros(7, dtype=complex)
    expected[0], expected[1], expected[4] = 2, 3 * np.exp(-0.7j), 0.5 * np.exp(-0.5j * np.pi)
    assert np.allclose(coef, expected, atol=1e-14)
    t = np.random.default_rng(5521).uniform(0, 3 * period, 50)
    assert np.allclose(synthesize(coef, t, period), signal(t), atol=1e-13)


def test_default_harmonics_reproduce_the_ejection_waveform():
    """DEFAULT_HARMONICS (20) on the default ejection waveform: >= 99.98 % of the pulsatile
    energy, rms error <= 0.5 % and max error <= 4 % of the peak flow, measured both at
    the samples and against the analytic flow between them; the max error sits at the
    valve-opening corner and falls like 1/K (halves from 20 to 40 harmonics)."""
    n = 512
    q = ejection_waveform(SV, HR, TE, n)
    report = harmonic_truncation(q, DEFAULT_HARMONICS)
    assert report.n_harmonics == 20
    assert report.energy_fraction >= 0.9998
    assert report.rms_error_fraction <= 0.005
    assert report.max_error_fraction <= 0.04
    fine = np.linspace(0, PERIOD, 20000, endpoint=False)
    exact = ejection_flow(fine, SV, HR, TE)
    approx = synthesize(harmonics(q, DEFAULT_HARMONICS), fine, PERIOD)
    err = np.abs(approx - exact)
    assert err.max() <= 0.04 * exact.max()
    assert fine[np.argmax(err)] < 0.05 * TE or fine[np.argmax(err)] > PERIOD - 0.05 * TE
    ratio = harmonic_truncation(q, 40).max_error_fraction / report.max_error_fraction
    assert 0.4 < ratio < 0.6


def test_truncation_energy_is_parseval():
    """energy_fraction = sum of |Q_n|^2/2 over kept harmonics / variance (Parseval)."""
    rng = np.random.default_rng(90411)
    q = rng.normal(size=101)
    coef = harmonics(q, 50)
    kept = np.sum(np.abs(coef[1:8]) ** 2) / 2
    assert harmonic_truncation(q, 7).energy_fraction == pytest.approx(kept / q.var(), rel=1e-12)
    assert harmonic_truncation(q, 50).energy_fraction == pytest.approx(1.0, rel=1e-12)
    assert harmonic_truncation(q, 50).max_error_fraction < 1e-13


@pytest.mark.parametrize("n_new", [30, 37, 7])
def test_resample_is_periodic_linear_interpolation(n_new):
    """Equals numpy.interp with period T; the mean is kept exactly when the new count
    is a multiple of the old one."""
    samples = np.array([0, 120, 380, 420, 300, 120, 10, 0, 0, 0], dtype=float)   # SPEC 7 example
    t_old = np.arange(10) / 10
    t_new = np.arange(n_new) / n_new
    ref = np.interp(t_new, t_old, samples, period=1.0)
    out = resample_periodic(samples, n_new)
    assert np.allclose(out, ref, rtol=0, atol=1e-12)
    if n_new % 10 == 0:
        assert out.mean() == pytest.approx(samples.mean(), rel=1e-14)


@pytest.mark.parametrize("call, match", [
    (lambda: ejection_waveform(SV, HR, 0.9, 64), "longer than the period"),
    (lambda: ejection_waveform(SV, HR, TE, 1), "n_samples must be an integer >= 2"),
    (lambda: ejection_flow(0.0, SV, HR, TE, skew=2.0), r"skew must lie in \[0, 1\]"),
    (lambda: ejection_flow(0.0, SV, HR, TE, backflow_fraction=0.6), "backflow_fraction must lie"),
    (lambda: ejection_flow(0.0, SV, 0.0, TE), "heart rate must be finite and > 0"),
    (lambda: harmonics(np.zeros(10), 6), r"n_harmonics must be an integer in \[0, 5\]"),
    (lambda: synthesize([1.0], [0.0], -1.0), "period must be finite and > 0"),
])
def test_bad_input(call, match):
    with pytest.raises(NetworkSpecError, match=match):
        call()
