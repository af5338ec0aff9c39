"""The network analysis of a Windkessel bed against a scipy ODE integration of the same circuit.

Reference tool: scipy.integrate.solve_ivp (DOP853) on the circuit equations of the two- and
three-element Windkessel (Westerhof, Lankhaar & Westerhof 2009, REFERENCES 5.4 [M, standard]):
P = P_c + R1 Q, C dP_c/dt = Q - (P_c - P_v)/R2, run for 40 cycles (28 time constants) until
periodic.  The bed sits behind a rigid vessel, which passes its inflow on unchanged (no wall
storage), so the bed node's pressure is the Windkessel's response to the inflow.  Both sides are
driven by the same band-limited inflow: the first 20 harmonics of the ejection waveform, taken
here with numpy's FFT.  Parameters are REFERENCES 5.4's set (R_total 1 mmHg*s/mL, C 1.5 mL/mmHg,
Zc 0.05 mmHg*s/mL), P_v = 5 mmHg.
"""

import numpy as np
import pytest
from scipy import integrate

from vesselnet.model import Network
from vesselnet.pulse import solve_pulse
from vesselnet.units import MMHG_PA
from vesselnet.waveforms import ejection_waveform

MMHG_S_ML = MMHG_PA / 1e-6
ML_MMHG = 1e-6 / MMHG_PA
SV, HR, TE, K = 70e-6, 70 / 60, 0.3, 20
R_TOTAL, C, P_V = 1.0 * MMHG_S_ML, 1.5 * ML_MMHG, 5 * MMHG_PA


def band_limited_inflow():
    """Q(t) = Re sum_{n<=K} Q_n e^(i n w t) with Q_n from numpy.fft of 512 ejection samples."""
    x = np.fft.rfft(ejection_waveform(SV, HR, TE, 512)) / 512
    coef = x[: K + 1].copy()
    coef[1:] *= 2
    n = np.arange(K + 1)
    return lambda t: float(np.real(np.sum(coef * np.exp(2j * np.pi * HR * n * t))))


@pytest.mark.parametrize("r1_mmhg_s_ml", [0.05, 0.0])          # three- and two-element
def test_windkessel_bed_against_ode(r1_mmhg_s_ml):
    r1 = r1_mmhg_s_ml * MMHG_S_ML
    r2 = R_TOTAL - r1
    net = Network.build(
        nodes={"heart": {"inflow_m3_s": SV * HR}},
        vessels=[{"id": "root", "from": "heart", "to": "body_node", "length_m": 0.02, "radius_m": 0.012}],
        beds=[{"id": "body", "node": "body_node", "resistance_pa_s_m3": R_TOTAL,
               "windkessel_proximal_pa_s_m3": r1, "windkessel_compliance_m3_pa": C}],
        venous_pressure_pa=P_V,
        inflow_waveforms={"heart": {"stroke_volume_m3": SV, "heart_rate_hz": HR, "ejection_time_s": TE}})
    result = solve_pulse(net, n_harmonics=K, n_samples=200)
    pressure = result.node_pressure_waveform_pa[:, net.nodes.index["body_node"]]

    q = band_limited_inflow()
    period, cycles = 1 / HR, 40
    sol = integrate.solve_ivp(lambda t, y: [(q(t) - (y[0] - P_V) / r2) / C], (0, cycles * period),
                              [P_V + r2 * SV * HR], method="DOP853", rtol=1e-11, atol=1e-9,
                              dense_output=True)
    t = (cycles - 1) * period + result.times_s
    ode = sol.sol(t)[0] + r1 * np.array([q(x) for x in t])
    span = np.ptp(ode)
    assert np.max(np.abs(pressure - ode)) < 1e-6 * span
    assert result.node_pulse_pressure_pa[1] == pytest.approx(span, rel=1e-6)
    # the inflow flows through the rigid vessel unchanged
    assert np.allclose(result.vessel_flow_in_harmonics_m3_s, result.vessel_flow_out_harmonics_m3_s,
                       rtol=0, atol=1e-12 * SV * HR)
