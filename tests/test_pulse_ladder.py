"""One elastic vessel as a long lumped R-L-C ladder, simulated in the time domain by ngspice,
against the frequency-domain network analysis.

Reference tool: ngspice transient analysis (tests/spice_oracle.py, MACRO scaling 1 V = 1 mmHg,
1 A = 1 mL/s).  The ladder is built from published per-length constants only, not from
vesselnet's transmission code: R' = 8 mu / (pi r^4) (Poiseuille), L' = (4/3) rho / (pi r^2)
(the low-frequency Womersley inertance) (REFERENCES 5.2 [M]: both limits hold to 1.000000 at
alpha = 0.138) and C' = 3 pi r^3 / (2 E h) (tethered thin wall, REFERENCES 5.3 [M]).  At the
drive frequency chosen, 1 Hz in a 0.36 mm artery, alpha = 0.50, where Womersley's Z_L differs
from R' + i w L' by 5e-5: "low frequency".  The line is 0.3 m long, |gamma L| = 1.1 (a strongly
distributed line), cut into 150 pi-sections (gamma dx = 8e-3, discretisation error ~ 1e-5), and
closed by a three-element Windkessel.  Driven by Q0 + Q1 sin(w t), the periodic steady state's
first harmonic (least-squares fit over the last two periods, after eight) is compared in
amplitude and phase with the harmonic solution.
"""

import numpy as np
import pytest

from vesselnet.model import Network
from vesselnet.pulse import solve_pulse

from spice_oracle import MACRO, Sine, ngspice_available, transient

pytestmark = pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")

MU, RHO = 3.5e-3, 1060.0
R, H, E, LENGTH = 0.36e-3, 0.1e-3, 0.5e6, 0.3
F_HZ, Q0, Q1 = 1.0, 0.01e-6, 0.008e-6                # m^3/s
R1, R2, C_BED = 3e9, 2.0e10, 2e-11                     # Pa*s/m^3, m^3/Pa
N_SECTIONS = 150


def fit_harmonic(t, y, f_hz):
    """(a, b, c) of y = a sin(wt) + b cos(wt) + c, least squares."""
    w = 2 * np.pi * f_hz
    basis = np.column_stack([np.sin(w * t), np.cos(w * t), np.ones_like(t)])
    return np.linalg.lstsq(basis, y, rcond=None)[0]


def ladder():
    """Nodes 0..N the line, N+1 the Windkessel's capacitor node; elements in MACRO units."""
    dx = LENGTH / N_SECTIONS
    r_sec = MACRO.ohms(8 * MU / (np.pi * R**4) * dx)
    l_sec = MACRO.henries(4 / 3 * RHO / (np.pi * R**2) * dx)
    c_sec = MACRO.farads(3 * np.pi * R**3 / (2 * E * H) * dx)
    n = N_SECTIONS
    mid = lambda k: n + 2 + k                                      # noqa: E731 (R-L junctions)
    elements = []
    for k in range(n):
        elements += [("R", k, mid(k), r_sec), ("L", mid(k), k + 1, l_sec)]
    elements += [("C", k, None, c_sec * (0.5 if k in (0, n) else 1.0)) for k in range(n + 1)]
    elements += [("R", n, n + 1, MACRO.ohms(R1)), ("R", n + 1, None, MACRO.ohms(R2)),
                 ("C", n + 1, None, MACRO.farads(C_BED))]
    return 2 * n + 2, elements


def test_ladder_against_frequency_domain():
    period = 1 / F_HZ
    t = np.arange(512) / 512 * period
    net = Network.build(
        nodes={"in": {"inflow_m3_s": Q0}},
        vessels=[{"id": "v", "from": "in", "to": "out", "length_m": LENGTH, "radius_m": R,
                  "wall_thickness_m": H, "wall_modulus_pa": E}],
        beds=[{"id": "b", "node": "out", "resistance_pa_s_m3": R1 + R2,
               "windkessel_proximal_pa_s_m3": R1, "windkessel_compliance_m3_pa": C_BED}],
        venous_pressure_pa=0.0,
        inflow_waveforms={"in": {"period_s": period,
                                 "samples_m3_s": tuple(Q0 + Q1 * np.sin(2 * np.pi * F_HZ * t))}})
    result = solve_pulse(net, n_harmonics=2)

    n_nodes, elements = ladder()
    n = N_SECTIONS
    run = transient(n_nodes, elements, [("I", 0, Sine(MACRO.amperes(Q0), MACRO.amperes(Q1), F_HZ))],
                    tstep=period / 200, tstop=10 * period, tstart=8 * period, tmax=period / 4000,
                    nodes=[0, n], currents=[3 * n + 1])        # current through the Windkessel's R1
    for column, node in ((0, 0), (1, 1)):          # inlet and outlet pressures
        a, b, c = fit_harmonic(run.time_s, MACRO.pressure_pa_from(run.node_voltages[:, column]), F_HZ)
        phasor = result.node_pressure_harmonics_pa[1, node]      # Re[P e^(iwt)] = Re P cos - Im P sin
        assert abs(complex(b, -a)) == pytest.approx(abs(phasor), rel=2e-4)
        assert np.angle(complex(b, -a) / phasor) == pytest.approx(0.0, abs=2e-4)
        assert c == pytest.approx(result.node_mean_pa[node], rel=1e-5)
    a, b, _ = fit_harmonic(run.time_s, MACRO.flow_m3_s_from(run.element_currents[:, 0]), F_HZ)
    q_out = result.bed_flow_harmonics_m3_s[1, 0]
    assert abs(complex(b, -a)) == pytest.approx(abs(q_out), rel=2e-4)
    assert np.angle(complex(b, -a) / q_out) == pytest.approx(0.0, abs=2e-4)
    # the line matters: amplitude and phase change from inlet to outlet
    p = result.node_pressure_harmonics_pa[1]
    assert abs(p[1] / p[0]) < 0.9 and abs(np.angle(p[1] / p[0])) > 0.1
