"""Periodic inflow waveforms and their harmonics.

A periodic signal of period T is represented by samples evenly spaced over
one period, t_k = k T / N, k = 0..N-1 (the sample at t = T is the one at 0),
or by harmonic phasors Q_n, n = 0..K, with

    q(t) = Re[ sum_n Q_n e^(+i n omega t) ],   omega = 2 pi / T.

**Time convention** ``e^(+i omega t)``, as in every pulsatile module: a
harmonic pressure is P_n = Z(n omega) Q_n.  Q_0 is the mean (real); Q_n for
n >= 1 is the complex amplitude (twice the one-sided DFT coefficient over N).

Tabulated samples (a few points) are first resampled by periodic linear
interpolation (:func:`resample_periodic`), then analysed with
:func:`harmonics`.  :data:`DEFAULT_HARMONICS` (20) is justified by
:func:`harmonic_truncation` on the default ejection waveform.

Examples
--------
>>> import numpy as np
>>> q = ejection_waveform(70e-6, 70 / 60, 0.3, 512)
>>> c = harmonics(q, 20)
>>> print(f"{c[0].real * 60e3:.4f} L/min")          # mean = stroke volume x heart rate
4.9000 L/min
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .womersley import _check_positive, _invalid

__all__ = ["ejection_flow", "ejection_waveform", "resample_periodic", "harmonics",
           "synthesize", "harmonic_truncation", "HarmonicTruncation", "DEFAULT_HARMONICS",
           "BACKFLOW_DURATION_RATIO"]

DEFAULT_HARMONICS = 20
"""Harmonics kept by default.  On the default ejection waveform (70 mL, 70 bpm,
0.3 s ejection, 512 samples) 20 harmonics (up to 23 Hz) keep 99.99 % of the
pulsatile energy, with an rms error of 0.3 % and a largest error of 3.4 % of
the peak flow; the largest error sits at the corner where ejection starts
(a slope discontinuity, so it falls only like 1/K: 6.8 % with 10 harmonics,
2.3 % with 30).  Checked in ``tests/test_waveforms.py``.  Driving the
Windkessels of REFERENCES 5.4 with it, 20 harmonics reproduce the periodic
ODE pressure to 0.08 % of the pulse pressure behind a pure R-C bed and to
1.8 % for an RCR bed, whose proximal resistance passes the inflow's corner
error on (``tests/test_windkessel.py``)."""

BACKFLOW_DURATION_RATIO = 1.0 / 6.0
"""Duration of the optional early-diastolic backflow lobe, as a fraction of the
ejection time (50 ms for a 0.3 s ejection)."""


def _ejection_parameters(where, stroke_volume_m3, heart_rate_hz, ejection_time_s,
                         skew, backflow_fraction):
    sv = float(stroke_volume_m3)
    hr = float(heart_rate_hz)
    te = float(ejection_time_s)
    _check_positive(where, "stroke volume", np.asarray(sv), "m3", allow_zero=True)
    _check_positive(where, "heart rate", np.asarray(hr), "Hz")
    _check_positive(where, "ejection time", np.asarray(te), "s")
    if not 0.0 <= skew <= 1.0:
        raise _invalid(where, f"skew must lie in [0, 1], got {skew}",
                       "0 gives a half-sine, 1 (default) a peak at one third of ejection")
    if not 0.0 <= backflow_fraction < 0.5:
        raise _invalid(where, f"backflow_fraction must lie in [0, 0.5), got {backflow_fraction}",
                       "give the backflow volume as a fraction of the forward volume, e.g. 0.03")
    period = 1.0 / hr
    tb = te * BACKFLOW_DURATION_RATIO
    busy = te + (tb if backflow_fraction > 0 else 0.0)
    if busy > period:
        raise _invalid(where, f"ejection (plus backflow) lasts {busy:.4g} s, longer than the "
                       f"period {period:.4g} s at {hr * 60:.4g} bpm",
                       "shorten the ejection time or lower the heart rate")
    forward = sv / (1.0 - backflow_fraction)
    return period, te, tb, forward, forward * backflow_fraction


def ejection_flow(times_s, stroke_volume_m3, heart_rate_hz, ejection_time_s, *,
                  skew=1.0, backflow_fraction=0.0):
    """Analytic ventricular ejection flow at arbitrary times (periodic).

    Parameters
    ----------
    times_s : array_like
        Times [s], any shape; taken modulo the period 1 / heart_rate_hz, with
        ejection starting at t = 0.
    stroke_volume_m3 : float
        Net volume per beat [m^3] (forward minus backflow), >= 0; the mean
        flow is stroke volume x heart rate.
    heart_rate_hz : float
        Beats per second [Hz], > 0.
    ejection_time_s : float
        Duration of forward ejection T_e [s], > 0.
    skew : float, optional
        Shape parameter kappa in [0, 1]: 0 is a half-sine (peak at mid
        ejection), 1 (default) peaks at one third of ejection and ends smoothly.
    backflow_fraction : float, optional
        Early-diastolic backflow volume over forward volume, in [0, 0.5);
        default 0 (none).

    Returns
    -------
    ndarray
        Flow [m^3/s], shape of ``times_s``.

    Raises
    ------
    NetworkSpecError
        Non-positive heart rate or ejection time, ejection longer than the
        period, parameters out of range.

    Notes
    -----
    With s = t / T_e, during ejection (0 <= s < 1)

        q(t) = A [sin(pi s) + (kappa / 2) sin(2 pi s)],

    whose integral over the ejection is 2 A T_e / pi for every kappa; the peak
    lies where cos(pi s) = (sqrt(1 + 8 kappa^2) - 1) / (4 kappa).  The
    optional backflow lobe lasts T_b = T_e / 6 right after ejection,
    q = -B sin(pi (t - T_e) / T_b), with volume 2 B T_b / pi.  A and B are
    set so that the forward volume is V_f = SV / (1 - beta) and the backflow
    beta V_f: the net integral over a period is exactly the stroke volume.
    Flow is zero for the rest of diastole.  This is a shape of our own for
    test and demonstration inflows, not a fit to measured data.

    References
    ----------
    Shape chosen to resemble the aortic root flow of textbook physiology
    (fast upstroke, early peak, brief closing backflow) [common practice, no
    source].

    Examples
    --------
    >>> q = ejection_flow([0.0, 0.1, 0.3, 0.5], 70e-6, 70 / 60, 0.3)
    >>> print(np.round(q * 1e6, 2))                    # mL/s
    [  0.   476.12   0.     0.  ]
    """
    period, te, tb, forward, back = _ejection_parameters(
        "ejection_flow", stroke_volume_m3, heart_rate_hz, ejection_time_s, skew,
        backflow_fraction)
    t = np.mod(np.asarray(times_s, dtype=float), period)
    amp_f = forward * np.pi / (2.0 * te)
    s = t / te
    out = np.where(s < 1.0, amp_f * (np.sin(np.pi * s) + 0.5 * skew * np.sin(2 * np.pi * s)), 0.0)
    if back > 0:
        amp_b = back * np.pi / (2.0 * tb)
        sb = (t - te) / tb
        out = np.where((sb >= 0.0) & (sb < 1.0), -amp_b * np.sin(np.pi * sb), out)
    return out


def ejection_waveform(stroke_volume_m3, heart_rate_hz, ejection_time_s, n_samples, *,
                      skew=1.0, backflow_fraction=0.0):
    """Samples of :func:`ejection_flow` over one period, exact in volume.

    Parameters
    ----------
    stroke_volume_m3, heart_rate_hz, ejection_time_s : float
        As in :func:`ejection_flow`.
    n_samples : int
        Number of samples N >= 2, at t_k = k T / N, k = 0..N-1.
    skew, backflow_fraction : float, optional
        As in :func:`ejection_flow`.

    Returns
    -------
    ndarray
        Flow samples [m^3/s], shape (N,).

    Notes
    -----
    The point values of :func:`ejection_flow` are scaled by one factor,
    1 + O(N^-2), so that their periodic-trapezoid integral (mean x T) equals
    the stroke volume exactly: harmonic 0 of the samples is exactly
    stroke volume x heart rate.

    Examples
    --------
    >>> q = ejection_waveform(70e-6, 1.0, 0.3, 1000)
    >>> print(f"{q.mean() * 1.0 * 1e6:.6f} mL")         # mean x period
    70.000000 mL
    """
    n = int(n_samples)
    if n != n_samples or n < 2:
        raise _invalid("ejection_waveform", f"n_samples must be an integer >= 2, got {n_samples}",
                       "use a few hundred samples (for example 512)")
    period = 1.0 / float(heart_rate_hz) if heart_rate_hz > 0 else 0.0
    q = ejection_flow(np.arange(n) * period / n, stroke_volume_m3, heart_rate_hz,
                      ejection_time_s, skew=skew, backflow_fraction=backflow_fraction)
    volume = q.sum() * period / n
    return q * (stroke_volume_m3 / volume) if volume != 0 else q


def resample_periodic(samples, n_samples):
    """Resample evenly spaced periodic samples by periodic linear interpolation.

    Parameters
    ----------
    samples : array_like
        Shape (N, ...), N >= 1 samples evenly spaced over one period along
        axis 0 (the value at the period's end equals the first one).
    n_samples : int
        New number of samples M >= 1, again at t_j = j T / M.

    Returns
    -------
    ndarray
        Shape (M, ...).

    Notes
    -----
    Linear interpolation introduces no overshoot (a flow that is zero in
    diastole stays zero) and adds the decaying harmonics of a polygon.  The
    mean of the interpolant equals the mean of the input samples; the mean of
    the resampled values equals it exactly when M is a multiple of N, and to
    O(N^-2) otherwise.

    Examples
    --------
    >>> print(resample_periodic([0.0, 4.0], 4))
    [0. 2. 4. 2.]
    """
    s = np.asarray(samples, dtype=float)
    m = int(n_samples)
    if s.ndim == 0 or s.shape[0] < 1 or m != n_samples or m < 1:
        raise _invalid("resample_periodic", f"need samples along axis 0 and n_samples >= 1, "
                       f"got shape {s.shape} and {n_samples}", "pass a 1-D list of samples")
    n = s.shape[0]
    pos = np.arange(m) * (n / m)
    idx = np.floor(pos).astype(int) % n
    frac = (pos - np.floor(pos)).reshape((m,) + (1,) * (s.ndim - 1))
    return (1.0 - frac) * s[idx] + frac * s[(idx + 1) % n]


def harmonics(samples, n_harmonics=DEFAULT_HARMONICS):
    """Harmonic phasors of evenly spaced periodic samples.

    Parameters
    ----------
    samples : array_like
        Shape (N, ...), samples at t_k = k T / N along axis 0.
    n_harmonics : int, optional
        K, number of harmonics above the mean, 0 <= K <= N // 2; default
        :data:`DEFAULT_HARMONICS`.

    Returns
    -------
    ndarray
        Complex phasors Q_n, n = 0..K, shape (K + 1, ...): Q_0 is the mean,
        Q_n (n >= 1) the complex amplitude, so that
        q(t) = Re sum_n Q_n e^(+i n 2 pi t / T) (see :func:`synthesize`).

    Notes
    -----
    Q_0 = X_0 / N, Q_n = 2 X_n / N, with X = numpy.fft.rfft(samples, axis=0)
    (forward kernel e^(-2 pi i n k / N), which matches the e^(+i omega t)
    phasor convention).  For even N the Nyquist harmonic n = N/2 is X_n / N.

    Examples
    --------
    >>> t = np.arange(8) / 8
    >>> print(np.round(harmonics(3 + 2 * np.cos(2 * np.pi * t - 0.5), 2), 6))
    [3.      +0.j       1.755165-0.958851j 0.      +0.j      ]
    """
    s = np.asarray(samples, dtype=float)
    k = int(n_harmonics)
    if s.ndim == 0 or s.shape[0] < 1:
        raise _invalid("harmonics", f"need samples along axis 0, got shape {s.shape}",
                       "pass evenly spaced samples over one period")
    n = s.shape[0]
    if k != n_harmonics or not 0 <= k <= n // 2:
        raise _invalid("harmonics", f"n_harmonics must be an integer in [0, {n // 2}] for "
                       f"{n} samples, got {n_harmonics}",
                       "resample to more points first (resample_periodic)")
    coef = np.fft.rfft(s, axis=0)[: k + 1] / n
    coef[1:] *= 2.0
    if n % 2 == 0 and k == n // 2:
        coef[k] /= 2.0
    return coef


def synthesize(coefficients, times_s, period_s):
    """Time signal from harmonic phasors, q(t) = Re sum_n Q_n e^(+i n 2 pi t / T).

    Parameters
    ----------
    coefficients : array_like
        Complex phasors, shape (K + 1, ...), as from :func:`harmonics` (or
        harmonic pressures P_n = Z(n omega) Q_n).
    times_s : array_like
        Times [s], shape (M,).
    period_s : float
        Period T [s], > 0.

    Returns
    -------
    ndarray
        Real signal, shape (M, ...).

    Examples
    --------
    >>> print(np.round(synthesize([1.0, 1j], [0.0, 0.25], 1.0), 6) + 0.0)
    [1. 0.]
    """
    c = np.asarray(coefficients, dtype=complex)
    t = np.asarray(times_s, dtype=float).reshape(-1)
    _check_positive("synthesize", "period", np.asarray(float(period_s)), "s")
    if c.ndim == 0:
        raise _invalid("synthesize", "coefficients need a harmonic axis 0, got a scalar",
                       "pass [Q_0, Q_1, ...]")
    n = np.arange(c.shape[0])
    phase = np.exp(2j * np.pi / float(period_s) * np.outer(t, n))
    flat = c.reshape(c.shape[0], -1)
    return (phase @ flat).real.reshape((t.size,) + c.shape[1:])


@dataclass(frozen=True)
class HarmonicTruncation:
    """How well K harmonics reproduce a sampled waveform.

    Attributes
    ----------
    n_harmonics : int
        K.
    energy_fraction : float
        Share of the pulsatile energy (variance about the mean) kept, in [0, 1].
    max_error_fraction : float
        Largest |q - q_K| over the samples divided by the peak-to-peak range.
    rms_error_fraction : float
        RMS of q - q_K divided by the peak-to-peak range.
    """

    n_harmonics: int
    energy_fraction: float
    max_error_fraction: float
    rms_error_fraction: float

    def summary(self) -> str:
        """One line."""
        return (f"{self.n_harmonics} harmonics: {100 * self.energy_fraction:.3f} % of the "
                f"pulsatile energy, max error {100 * self.max_error_fraction:.3f} % and rms "
                f"{100 * self.rms_error_fraction:.3f} % of the peak-to-peak range")


def harmonic_truncation(samples, n_harmonics=DEFAULT_HARMONICS):
    """Report the energy kept and the error of keeping K harmonics.

    Parameters
    ----------
    samples : array_like
        Shape (N,), evenly spaced over one period.
    n_harmonics : int, optional
        K, 0 <= K <= N // 2; default :data:`DEFAULT_HARMONICS`.

    Returns
    -------
    HarmonicTruncation

    Notes
    -----
    q_K = synthesize(harmonics(q, K)) at the sample times.  By Parseval the
    energy fraction is var(q_K) / var(q) (1 for a constant signal).  Errors
    are relative to max q - min q (the pulse amplitude; for a flow that is
    zero in diastole, the peak flow).

    Examples
    --------
    >>> q = ejection_waveform(70e-6, 70 / 60, 0.3, 512)
    >>> print(harmonic_truncation(q, 20).summary())
    20 harmonics: 99.990 % of the pulsatile energy, max error 3.411 % and rms 0.315 % of the peak-to-peak range
    """
    q = np.asarray(samples, dtype=float)
    if q.ndim != 1:
        raise _invalid("harmonic_truncation", f"samples must be 1-D, got shape {q.shape}",
                       "report one waveform at a time")
    n = q.size
    coef = harmonics(q, n_harmonics)
    approx = synthesize(coef, np.arange(n) / n, 1.0)
    err = q - approx
    span = q.max() - q.min()
    var = q.var()
    energy = 1.0 if var == 0 else float(approx.var() / var)
    scale = span if span > 0 else 1.0
    return HarmonicTruncation(int(n_harmonics), energy, float(np.abs(err).max() / scale),
                              float(np.sqrt(np.mean(err ** 2)) / scale))
