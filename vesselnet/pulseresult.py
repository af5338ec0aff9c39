"""The pulsatile solution of a network: harmonics, waveforms and clinical indices.

A :class:`PulseResult` stores the harmonic phasors (SI, convention
``e^(+i omega t)``, harmonic 0 the steady mean) of every nodal pressure, of
the flow at both ends of every vessel and of every bed's flow, plus the
input impedance spectrum at the inlet.  Waveforms over one cycle and the
indices derived from them (systolic, diastolic and pulse pressure, peak and
minimum flow, pulsatility index, reversed-flow fraction) are properties
computed from the stored harmonics, so they cannot drift from the solution.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.pulse import solve_pulse
>>> net = Network.build(
...     nodes={"heart": {"inflow_m3_s": 7e-5}},
...     vessels=[{"id": "aorta", "from": "heart", "to": "tip", "length_m": 0.3, "radius_m": 0.012,
...               "wall_thickness_m": 1.2e-3, "wall_modulus_pa": 5e5}],
...     beds=[{"id": "body", "node": "tip", "resistance_pa_s_m3": 1.2e8,
...            "windkessel_proximal_pa_s_m3": 6e6, "windkessel_compliance_m3_pa": 1e-8}],
...     inflow_waveforms={"heart": {"stroke_volume_m3": 6e-5, "heart_rate_hz": 7 / 6,
...                                 "ejection_time_s": 0.3}})
>>> result = solve_pulse(net)
>>> print(result.summary())   # doctest: +ELLIPSIS
network: 1.167 Hz (70 bpm), 20 harmonics; inlet 'heart' ...
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field

import numpy as np

from .model import Network
from .result import SteadyResult
from .units import MMHG_PA
from .waveforms import synthesize

REVERSAL_MARGIN = 0.01
"""Flow counts as reversed where it runs against the vessel's mean direction by
more than this fraction of the vessel's peak-to-peak flow, so that rounding-level
wiggles (a dead-end vessel) are not counted.  It does not hide the ringing of a
truncated harmonic series at a sharp corner: with 20 harmonics the ejection
waveform itself dips to -1.2 % of its peak just before ejection starts (-2.4 %
with 10, -0.8 % with 30), so reversal of that size next to a flow source with a
corner is at the resolution of the series (raise the harmonic count to check)."""

PI_MEAN_FLOOR = 1e-9
"""The pulsatility index is NaN where |mean flow| is below this fraction of the
largest mean vessel flow in the network (no meaningful mean to divide by)."""


@dataclass(frozen=True, eq=False)
class PulseResult:
    """Pulsatile pressures and flows of one network over one cardiac cycle.

    Attributes
    ----------
    network : Network
        The network analysed (never modified).
    steady : SteadyResult
        The steady solution; it is harmonic 0 of every quantity.
    period_s : float
        Cycle length T (s).
    n_samples : int
        Time samples per cycle of the waveforms (t_k = k T / n_samples).
    inlet : int
        Node row of the inlet (input impedance, default plots).
    node_pressure_harmonics_pa : ndarray, complex, shape (K + 1, n_nodes)
        Pressure phasors; row 0 is the steady pressure; NaN in parts cut off
        from every pressure reference.
    vessel_flow_in_harmonics_m3_s : ndarray, complex, shape (K + 1, n_vessels)
        Flow phasors at each vessel's ``from`` end, positive from ``from`` to ``to``.
    vessel_flow_out_harmonics_m3_s : ndarray, complex, shape (K + 1, n_vessels)
        Flow phasors at each vessel's ``to`` end (same sign convention); the
        difference from the ``from`` end is the flow stored in the wall.
    bed_flow_harmonics_m3_s : ndarray, complex, shape (K + 1, n_beds)
        Flow phasors into each bed.
    input_impedance_pa_s_m3 : ndarray, complex, shape (K + 1,)
        Small-signal impedance seen at the inlet (pressure over inflow at
        each harmonic, every other source held constant).
    vessel_pwv_m_s : ndarray, shape (n_vessels,)
        Moens-Korteweg pulse wave velocity with the tethering factor,
        c0 / sqrt(1 - nu^2), at the mean radius; NaN for rigid vessels.
    vessel_phase_velocity_m_s : ndarray, shape (n_vessels,)
        omega_1 / Im(gamma) of the viscous line at the first harmonic, at the
        mean radius; NaN for rigid vessels.
    zero_harmonic_difference : float
        Largest difference between the 0 Hz nodal system (the two-port
        stamps at omega = 0) and the steady solution, relative to the largest
        steady pressure and flow; NaN with lesions (harmonic 0 is then the
        nonlinear steady solution itself).
    harmonic_residual : float
        Largest nodal flow imbalance over harmonics 1..K relative to the
        largest flow amplitude.
    warnings, notes : tuple of str
        Things the user should know / modelling choices made.
    harmonic_solver : str
        The linear solver of the harmonic nodal systems, ``method (ordering)``
        (see :mod:`vesselnet.linsolve`); empty when none ran.
    """

    network: Network
    steady: SteadyResult
    period_s: float
    n_samples: int
    inlet: int
    node_pressure_harmonics_pa: np.ndarray
    vessel_flow_in_harmonics_m3_s: np.ndarray
    vessel_flow_out_harmonics_m3_s: np.ndarray
    bed_flow_harmonics_m3_s: np.ndarray
    input_impedance_pa_s_m3: np.ndarray
    vessel_pwv_m_s: np.ndarray
    vessel_phase_velocity_m_s: np.ndarray
    zero_harmonic_difference: float
    harmonic_residual: float
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)
    harmonic_solver: str = ""

    # ---------------------------------------------------------------- axes
    @property
    def n_harmonics(self) -> int:
        """K, harmonics above the mean."""
        return self.node_pressure_harmonics_pa.shape[0] - 1

    @property
    def heart_rate_hz(self) -> float:
        """1 / T (Hz)."""
        return 1.0 / self.period_s

    @property
    def frequencies_hz(self) -> np.ndarray:
        """n / T for n = 0..K (Hz)."""
        return np.arange(self.n_harmonics + 1) / self.period_s

    @property
    def times_s(self) -> np.ndarray:
        """Sample times k T / n_samples, k = 0..n_samples-1 (s)."""
        return np.arange(self.n_samples) * self.period_s / self.n_samples

    def _waveform(self, coefficients: np.ndarray) -> np.ndarray:
        return synthesize(np.nan_to_num(coefficients), self.times_s, self.period_s)

    # ---------------------------------------------------------------- nodes
    @functools.cached_property
    def node_pressure_waveform_pa(self) -> np.ndarray:
        """Pressure over one cycle, shape (n_samples, n_nodes) (Pa); NaN where cut off."""
        wave = self._waveform(self.node_pressure_harmonics_pa)
        wave[:, np.isnan(self.node_pressure_harmonics_pa[0].real)] = np.nan
        return wave

    @property
    def node_systolic_pa(self) -> np.ndarray:
        """Largest sampled pressure of the cycle (Pa)."""
        return self.node_pressure_waveform_pa.max(axis=0)

    @property
    def node_diastolic_pa(self) -> np.ndarray:
        """Smallest sampled pressure of the cycle (Pa)."""
        return self.node_pressure_waveform_pa.min(axis=0)

    @property
    def node_mean_pa(self) -> np.ndarray:
        """Cycle mean, harmonic 0: the steady pressure (Pa)."""
        return self.node_pressure_harmonics_pa[0].real.copy()

    @property
    def node_pulse_pressure_pa(self) -> np.ndarray:
        """Systolic minus diastolic (Pa)."""
        return self.node_systolic_pa - self.node_diastolic_pa

    # ---------------------------------------------------------------- vessels
    @functools.cached_property
    def vessel_flow_waveform_m3_s(self) -> np.ndarray:
        """Flow at each vessel's ``from`` end over one cycle, shape (n_samples, n_vessels)."""
        return self._waveform(self.vessel_flow_in_harmonics_m3_s)

    @property
    def vessel_flow_peak_m3_s(self) -> np.ndarray:
        """Largest sampled flow at the ``from`` end (m^3/s, signed)."""
        return self.vessel_flow_waveform_m3_s.max(axis=0)

    @property
    def vessel_flow_min_m3_s(self) -> np.ndarray:
        """Smallest sampled flow at the ``from`` end (m^3/s, signed)."""
        return self.vessel_flow_waveform_m3_s.min(axis=0)

    @property
    def vessel_flow_mean_m3_s(self) -> np.ndarray:
        """Cycle-mean flow, harmonic 0: the steady flow (m^3/s)."""
        return self.vessel_flow_in_harmonics_m3_s[0].real.copy()

    @property
    def vessel_pulsatility_index(self) -> np.ndarray:
        """(Qmax - Qmin) / |Qmean| at the ``from`` end; NaN where the mean is ~0."""
        return pulsatility_index(self.vessel_flow_waveform_m3_s, self.vessel_flow_mean_m3_s,
                                 self._flow_scale)

    @property
    def vessel_reversed_fraction(self) -> np.ndarray:
        """Fraction of the cycle with flow against the mean direction (see REVERSAL_MARGIN)."""
        return reversed_fraction(self.vessel_flow_waveform_m3_s, self.vessel_flow_mean_m3_s)

    @functools.cached_property
    def _flow_scale(self) -> float:
        return max(float(np.abs(self.vessel_flow_mean_m3_s).max(initial=0.0)),
                   float(np.abs(self.bed_flow_mean_m3_s).max(initial=0.0)), 1e-300)

    # ---------------------------------------------------------------- beds
    @functools.cached_property
    def bed_flow_waveform_m3_s(self) -> np.ndarray:
        """Flow into each bed over one cycle, shape (n_samples, n_beds)."""
        return self._waveform(self.bed_flow_harmonics_m3_s)

    @property
    def bed_flow_mean_m3_s(self) -> np.ndarray:
        """Cycle-mean bed flow, harmonic 0: the steady flow (m^3/s)."""
        return self.bed_flow_harmonics_m3_s[0].real.copy()

    @property
    def bed_flow_peak_m3_s(self) -> np.ndarray:
        return self.bed_flow_waveform_m3_s.max(axis=0)

    @property
    def bed_flow_min_m3_s(self) -> np.ndarray:
        return self.bed_flow_waveform_m3_s.min(axis=0)

    @property
    def bed_pulsatility_index(self) -> np.ndarray:
        """(Qmax - Qmin) / |Qmean| of each bed's inflow."""
        return pulsatility_index(self.bed_flow_waveform_m3_s, self.bed_flow_mean_m3_s,
                                 self._flow_scale)

    # ---------------------------------------------------------------- tables
    def node_table(self) -> dict[str, np.ndarray]:
        """Per-node columns (SI): systolic, diastolic, mean and pulse pressure."""
        return {"id": np.array(self.network.nodes.ids, dtype=object),
                "systolic_pa": self.node_systolic_pa, "diastolic_pa": self.node_diastolic_pa,
                "mean_pa": self.node_mean_pa, "pulse_pressure_pa": self.node_pulse_pressure_pa}

    def vessel_table(self) -> dict[str, np.ndarray]:
        """Per-vessel columns (SI): mean, peak and minimum flow, PI, reversal, wave speeds."""
        v = self.network.vessels
        nodes = np.array(self.network.nodes.ids, dtype=object)
        return {"id": np.array(v.ids, dtype=object), "from": nodes[v.from_node],
                "to": nodes[v.to_node], "flow_mean_m3_s": self.vessel_flow_mean_m3_s,
                "flow_peak_m3_s": self.vessel_flow_peak_m3_s,
                "flow_min_m3_s": self.vessel_flow_min_m3_s,
                "pulsatility_index": self.vessel_pulsatility_index,
                "reversed_fraction": self.vessel_reversed_fraction,
                "pwv_m_s": self.vessel_pwv_m_s, "phase_velocity_m_s": self.vessel_phase_velocity_m_s}

    def bed_table(self) -> dict[str, np.ndarray]:
        """Per-bed columns (SI): mean, peak and minimum inflow, PI, node pressures."""
        beds = self.network.beds
        nodes = np.array(self.network.nodes.ids, dtype=object)
        return {"id": np.array(beds.ids, dtype=object), "node": nodes[beds.node],
                "flow_mean_m3_s": self.bed_flow_mean_m3_s, "flow_peak_m3_s": self.bed_flow_peak_m3_s,
                "flow_min_m3_s": self.bed_flow_min_m3_s,
                "pulsatility_index": self.bed_pulsatility_index,
                "systolic_pa": self.node_systolic_pa[beds.node],
                "diastolic_pa": self.node_diastolic_pa[beds.node]}

    def impedance_table(self) -> dict[str, np.ndarray]:
        """Input impedance spectrum at the inlet: frequency, modulus (Pa*s/m^3), phase (rad)."""
        z = self.input_impedance_pa_s_m3
        return {"harmonic": np.arange(z.size), "frequency_hz": self.frequencies_hz,
                "modulus_pa_s_m3": np.abs(z), "phase_rad": np.angle(z)}

    def summary(self) -> str:
        """One line: rate, harmonics, inlet pressures and the largest pulse pressure."""
        ids = self.network.nodes.ids
        k = self.inlet
        pp = self.node_pulse_pressure_pa
        j = int(np.nanargmax(pp)) if np.isfinite(pp).any() else k
        return (f"{self.network.name}: {self.heart_rate_hz:.4g} Hz ({60 * self.heart_rate_hz:.0f} bpm), "
                f"{self.n_harmonics} harmonics; inlet '{ids[k]}' "
                f"{self.node_systolic_pa[k] / MMHG_PA:.1f}/{self.node_diastolic_pa[k] / MMHG_PA:.1f} "
                f"mmHg (mean {self.node_mean_pa[k] / MMHG_PA:.1f}); largest pulse pressure "
                f"{pp[j] / MMHG_PA:.1f} mmHg at '{ids[j]}'")


def pulsatility_index(waveform: np.ndarray, mean: np.ndarray, scale: float) -> np.ndarray:
    """(max - min) / |mean| per column; NaN where |mean| <= PI_MEAN_FLOOR * scale.

    Parameters
    ----------
    waveform : ndarray, shape (n_samples, n)
    mean : ndarray, shape (n,)
    scale : float
        A flow to measure "about zero" against (the largest mean flow).

    Notes
    -----
    PI = (Qmax - Qmin) / Qmean, the convention of intraoperative transit-time
    graft flow measurement (REFERENCES 8.9 [M]); |Qmean| keeps the index
    positive for a vessel whose mean flow runs against its nominal direction.

    Examples
    --------
    >>> t = np.arange(8) / 8
    >>> q = (2.0 + np.cos(2 * np.pi * t))[:, None]
    >>> print(pulsatility_index(q, np.array([2.0]), 2.0))
    [1.]
    """
    mean = np.asarray(mean, dtype=float)
    span = waveform.max(axis=0) - waveform.min(axis=0)
    small = np.abs(mean) <= PI_MEAN_FLOOR * scale
    return np.where(small, np.nan, span / np.where(small, 1.0, np.abs(mean)))


def reversed_fraction(waveform: np.ndarray, mean: np.ndarray) -> np.ndarray:
    """Fraction of the samples with flow against the mean direction, per column.

    Parameters
    ----------
    waveform : ndarray, shape (n_samples, n)
    mean : ndarray, shape (n,)
        Mean flow; its sign sets the forward direction (nominal where 0).

    Notes
    -----
    A sample counts as reversed where s q < -m (q_max - q_min), s the sign
    of the mean and m = :data:`REVERSAL_MARGIN`.  The resolution is one
    sample, 1 / n_samples of the cycle.

    Examples
    --------
    >>> t = np.arange(600) / 600
    >>> q = (1.0 + 2.0 * np.cos(2 * np.pi * t))[:, None]      # 1 - arccos(-0.52)/pi = 0.326 with the margin
    >>> print(np.round(reversed_fraction(q, np.array([1.0])), 3))
    [0.325]
    """
    sign = np.where(np.asarray(mean) < 0, -1.0, 1.0)
    span = waveform.max(axis=0) - waveform.min(axis=0)
    return ((sign * waveform) < -REVERSAL_MARGIN * span).mean(axis=0)
