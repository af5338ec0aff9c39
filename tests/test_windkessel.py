"""Tests of vesselnet.windkessel (2- and 3-element Windkessels and the RCR setup).

Sources:
- Westerhof, Lankhaar & Westerhof (2009) Med Biol Eng Comput 47:131-141 for the
  models; the impedance formulas in REFERENCES.md 5.4 are [M, standard] and its
  check values [C].
- REFERENCES.md 5.6 setup rules [M, describing common practice] and its [C] check.
- Reference tool: scipy.integrate.solve_ivp on the circuit ODEs
  C dP/dt = Q - (P - P_v)/R (2-element) and P = P_c + R1 Q,
  C dP_c/dt = Q - (P_c - P_v)/R2 (3-element), run until periodic.
"""

import numpy as np
import pytest
from scipy import integrate

from vesselnet.errors import NetworkSpecError
from vesselnet.units import MMHG_PA
from vesselnet.wall import inviscid_characteristic_impedance
from vesselnet.waveforms import DEFAULT_HARMONICS, ejection_flow, ejection_waveform, harmonics, synthesize
from vesselnet.windkessel import (bed_resistances_from_total, windkessel2_impedance,
                                  windkessel3_impedance, windkessel_parameters)

MMHG_S_ML = MMHG_PA / 1e-6        # Pa s/m^3
ML_MMHG = 1e-6 / MMHG_PA          # m^3/Pa
# REFERENCES 5.4 parameter set
R_TOTAL = 1.0 * MMHG_S_ML
C_TOTAL = 1.5 * ML_MMHG
ZC = 0.05 * MMHG_S_ML
P_VENOUS = 5.0 * MMHG_PA
# inflow: 70 mL, 70 bpm, 0.3 s ejection
SV, HR, TE = 70e-6, 70 / 60, 0.3
PERIOD = 1 / HR


@pytest.mark.parametrize("f_hz, mag2, deg2, mag3, deg3", [
    (0.0, 1.0000, 0.0, 1.0000, 0.0),
    (1.0, 0.1055, -83.94, 0.1216, -59.51),
    (10.0, 0.0106, -89.39, 0.0512, -11.95),
])
def test_impedance_check_values(f_hz, mag2, deg2, mag3, deg3):
    """REFERENCES 5.4 [C] table: |Z| in mmHg s/mL and arg Z in degrees."""
    z2 = windkessel2_impedance(2 * np.pi * f_hz, R_TOTAL, C_TOTAL)
    z3 = windkessel3_impedance(2 * np.pi * f_hz, ZC, R_TOTAL - ZC, C_TOTAL)
    assert abs(z2) / MMHG_S_ML == pytest.approx(mag2, abs=5e-5)
    assert np.degrees(np.angle(z2)) == pytest.approx(deg2, abs=5e-3)
    assert abs(z3) / MMHG_S_ML == pytest.approx(mag3, abs=5e-5)
    assert np.degrees(np.angle(z3)) == pytest.approx(deg3, abs=5e-3)


def test_three_element_limits():
    """Z3(0) = R1 + R2 and Z3 -> R1 = Zc at high frequency; R1 = 0 is the 2-element model
    (Westerhof et al. 2009)."""
    assert windkessel3_impedance(0.0, ZC, R_TOTAL - ZC, C_TOTAL) == R_TOTAL
    assert windkessel3_impedance(2 * np.pi * 1e4, ZC, R_TOTAL - ZC, C_TOTAL) == pytest.approx(ZC, rel=1e-3)
    omega = 2 * np.pi * np.array([0.3, 2.0, 9.0])
    assert np.allclose(windkessel3_impedance(omega, 0.0, R_TOTAL, C_TOTAL),
                       windkessel2_impedance(omega, R_TOTAL, C_TOTAL), rtol=1e-15)


def trig_inflow(t):
    """A known band-limited inflow (harmonics 0, 1, 2 and 5), m^3/s."""
    w = 2 * np.pi / PERIOD
    return 1e-6 * (80.0 + 60.0 * np.cos(w * t) + 25.0 * np.sin(2 * w * t + 0.4)
                   + 8.0 * np.cos(5 * w * t - 1.0))


def ejection_inflow(t):
    return ejection_flow(t, SV, HR, TE)


def periodic_ode_pressure(model, inflow, kinks, times_in_cycle, n_cycles=32):
    """Outlet pressure over the last cycle from solve_ivp, integrated cycle by cycle
    (split at the inflow's slope discontinuities), starting from the mean pressure.
    Also returns the change of the state over the last cycle (periodicity)."""
    if model == 2:
        r2, r1 = R_TOTAL, 0.0
    else:
        r2, r1 = R_TOTAL - ZC, ZC

    def rhs(t, pc):
        return (inflow(t) - (pc - P_VENOUS) / r2) / C_TOTAL

    state = np.array([P_VENOUS + R_TOTAL * SV * HR])
    bounds = np.unique(np.concatenate([[0.0], kinks, [PERIOD]]))
    for cycle in range(n_cycles):
        start_state = state.copy()
        t0 = cycle * PERIOD
        last = cycle == n_cycles - 1
        samples = []
        for a, b in zip(bounds[:-1], bounds[1:]):
            inside = times_in_cycle[(times_in_cycle >= a) & (times_in_cycle < b)] if last else None
            sol = integrate.solve_ivp(rhs, (t0 + a, t0 + b), state, method="DOP853",
                                      rtol=1e-11, atol=1e-9, dense_output=last)
            if last:
                samples.append(sol.sol(t0 + inside)[0])
            state = sol.y[:, -1]
    pc = np.concatenate(samples)
    return pc + r1 * inflow(times_in_cycle), float(abs(state - start_state)[0])


def frequency_pressure(model, q_samples, n_harmonics, times_in_cycle):
    """P(t) = P_v + Re sum Z(n omega) Q_n e^(i n omega t)."""
    q_n = harmonics(q_samples, n_harmonics)
    omega = 2 * np.pi / PERIOD * np.arange(n_harmonics + 1)
    if model == 2:
        z = windkessel2_impedance(omega, R_TOTAL, C_TOTAL)
    else:
        z = windkessel3_impedance(omega, ZC, R_TOTAL - ZC, C_TOTAL)
    return P_VENOUS + synthesize(z * q_n, times_in_cycle, PERIOD)


@pytest.mark.parametrize("model", [2, 3])
def test_trig_inflow_frequency_domain_equals_ode(model):
    """A band-limited inflow: the steady-periodic frequency-domain pressure equals the
    periodic solve_ivp solution to 1e-8 of the pulse pressure (no truncation error)."""
    n = 64
    times = np.arange(n) * PERIOD / n
    p_ode, drift = periodic_ode_pressure(model, trig_inflow, [], times)
    p_freq = frequency_pressure(model, trig_inflow(times), 10, times)
    pulse = p_ode.max() - p_ode.min()
    assert drift < 1e-7 * pulse                      # the ODE has become periodic
    assert np.max(np.abs(p_freq - p_ode)) < 1e-8 * pulse


@pytest.mark.parametrize("model, n_harmonics, tol", [
    (2, None, 1e-5), (3, None, 1e-5),
    (2, DEFAULT_HARMONICS, 2e-3), (3, DEFAULT_HARMONICS, 2.5e-2),
])
def test_ejection_inflow_frequency_domain_equals_ode(model, n_harmonics, tol):
    """The ejection waveform (a slope discontinuity at valve opening): all 2048
    harmonics of 4096 samples agree with solve_ivp to 1e-5 of the pulse pressure
    (measured 6e-7); the default 20 harmonics to 0.2 % (2-element, measured 0.08 %:
    C smooths the pressure) and 2.5 % (3-element, measured 1.8 %: P contains R1 Q,
    so the inflow's truncation error at the corner shows)."""
    n = 4096
    times = np.arange(n) * PERIOD / n
    p_ode, drift = periodic_ode_pressure(model, ejection_inflow, [TE], times)
    q = ejection_waveform(SV, HR, TE, n)
    p_freq = frequency_pressure(model, q, n // 2 if n_harmonics is None else n_harmonics, times)
    pulse = p_ode.max() - p_ode.min()
    assert drift < 1e-7 * pulse
    assert np.max(np.abs(p_freq - p_ode)) < tol * pulse


def test_setup_check_value():
    """REFERENCES 5.6 [C]: C_total = 1.5 mL/mmHg and a 10 % share give 0.15 mL/mmHg;
    R1 + R2 = R_T (REFERENCES 10.12)."""
    share = np.array([0.1, 0.9])
    rt = bed_resistances_from_total(R_TOTAL, share)
    z0 = np.array([0.2, 0.05]) * MMHG_S_ML
    p = windkessel_parameters(rt, z0, share, total_compliance_m3_pa=C_TOTAL,
                              conduit_compliance_m3_pa=0.0)
    assert p.compliance_m3_pa[0] / ML_MMHG == pytest.approx(0.15, rel=1e-12)
    assert np.allclose(p.proximal_resistance_pa_s_m3 + p.distal_resistance_pa_s_m3, rt, rtol=1e-15)
    assert np.array_equal(p.proximal_resistance_pa_s_m3, z0)


def test_setup_subtracts_conduit_compliance():
    """REFERENCES 5.6: C_periph = C_total - C_conduit, distributed by flow share, which
    equals C_periph R_T,total/R_T,i when all outlets see the same mean pressure."""
    share = np.array([0.2, 0.3, 0.5])
    rt = bed_resistances_from_total(R_TOTAL, share)
    conduit = 0.3 * ML_MMHG
    p = windkessel_parameters(rt, np.full(3, ZC), share, total_compliance_m3_pa=C_TOTAL,
                              conduit_compliance_m3_pa=conduit, ids=["a", "b", "c"])
    assert p.conduit_compliance_m3_pa == conduit
    assert p.peripheral_compliance_m3_pa == pytest.approx(1.2 * ML_MMHG, rel=1e-14)
    assert p.compliance_m3_pa.sum() == pytest.approx(p.peripheral_compliance_m3_pa, rel=1e-14)
    assert np.allclose(p.compliance_m3_pa, p.peripheral_compliance_m3_pa * R_TOTAL / rt, rtol=1e-14)
    assert 1 / np.sum(1 / rt) == pytest.approx(R_TOTAL, rel=1e-14)   # beds in parallel
    assert p.ids == ("a", "b", "c")
    assert list(p.table()["id"]) == ["a", "b", "c"]


def test_setup_with_aortic_terminal_impedance():
    """R1 = rho c/A of the terminal vessel: aorta 0.0771 mmHg s/mL with c0 (REFERENCES 5.3
    [C]), about 8 % of a total resistance of 1 mmHg s/mL (Zc ~ 5-10 %, REFERENCES 5.4 [M])."""
    z0 = inviscid_characteristic_impedance(12.5e-3, 1.5e-3, 0.4e6, 1060.0, poisson_ratio=0.0)
    p = windkessel_parameters([R_TOTAL], [z0], [1.0], total_compliance_m3_pa=C_TOTAL,
                              conduit_compliance_m3_pa=0.0)
    assert p.proximal_resistance_pa_s_m3[0] / MMHG_S_ML == pytest.approx(0.0771, abs=5e-5)
    assert p.distal_resistance_pa_s_m3[0] / MMHG_S_ML == pytest.approx(1 - 0.0771, abs=5e-5)


def test_setup_reports_all_problems_together():
    """R1 >= R_T in two beds and C_periph <= 0: one error naming both beds."""
    rt = np.array([0.5, 1.0, 2.0]) * MMHG_S_ML
    z0 = np.array([0.6, 0.1, 2.0]) * MMHG_S_ML
    with pytest.raises(NetworkSpecError) as info:
        windkessel_parameters(rt, z0, [0.5, 0.3, 0.2], total_compliance_m3_pa=C_TOTAL,
                              conduit_compliance_m3_pa=2.0 * ML_MMHG, ids=["arm", "leg", "gut"])
    message = str(info.value)
    assert "bed 'arm'" in message and "bed 'gut'" in message and "bed 'leg'" not in message
    assert "R2 = R_T - R1 would be <= 0" in message
    assert "peripheral compliance C_total - C_conduit must be > 0" in message
    assert len(info.value.problems) == 3


@pytest.mark.parametrize("conduit_ml_mmhg", [1.5, 2.0])
def test_setup_rejects_nonpositive_peripheral_compliance(conduit_ml_mmhg):
    with pytest.raises(NetworkSpecError, match="peripheral compliance .* must be > 0"):
        windkessel_parameters([R_TOTAL], [ZC], [1.0], total_compliance_m3_pa=C_TOTAL,
                              conduit_compliance_m3_pa=conduit_ml_mmhg * ML_MMHG)


def test_setup_warns_when_shares_do_not_sum_to_one():
    with pytest.warns(UserWarning, match="flow shares sum to 0.9"):
        windkessel_parameters([2 * R_TOTAL, 2 * R_TOTAL], [ZC, ZC], [0.45, 0.45],
                              total_compliance_m3_pa=C_TOTAL, conduit_compliance_m3_pa=0.0)


@pytest.mark.parametrize("share, match", [
    ([45.0, 55.0], r"flow shares must lie in \(0, 1\]"),
    ([0.0, 1.0], r"flow shares must lie in \(0, 1\]"),
    ([[0.5, 0.5]], "flow_share must be a 1-D array"),
])
def test_bad_shares(share, match):
    with pytest.raises(NetworkSpecError, match=match):
        bed_resistances_from_total(R_TOTAL, share)
