"""Tests of the network pulsatile analysis (vesselnet.pulse, vesselnet.pulseresult).

Outside references, named beside each check:
- the steady solver at 0 Hz (the zero-frequency harmonic must reduce to it);
- closed-form transmission-line results (REFERENCES 5.5 [M, standard]:
  Z_in = Z0 (Z_T + Z0 tanh gL) / (Z0 + Z_T tanh gL), the parallel load of
  daughters at a bifurcation, P_out = P_in / (cosh gL + Z0 sinh gL / Z_T)),
  evaluated here with Womersley's Z_L from scipy's Bessel functions
  (REFERENCES 5.2, formula [M]) and the tethered thin-wall compliance
  (REFERENCES 5.3 [M]) -- not with vesselnet's transmission module;
- the Young-Tsai lesion law (REFERENCES 4.1 [M]) for the linearised lesion;
- the definitions of the pulsatility index (REFERENCES 8.9 [M]) and of
  reversed flow on analytic waveforms;
- pulse pressure amplification from the aortic root toward the periphery
  (common practice, no source).
"""

import dataclasses

import numpy as np
import pytest
from scipy import special

from vesselnet.demos import demo_path
from vesselnet.errors import NetworkSpecError
from vesselnet.model import Network
from vesselnet.harmonic import HarmonicNetwork, solve_harmonic
from vesselnet.pulse import solve_pulse
from vesselnet.pulsesources import source_harmonics
from vesselnet.pulsesetup import aortic_pressure_waveform, setup_windkessels, shape_constant_inflows
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.units import MMHG_PA

MU, RHO = 3.5e-3, 1060.0
HR = 70 / 60
OMEGA1 = 2 * np.pi * HR
WAVE = {"stroke_volume_m3": 70e-6, "heart_rate_hz": HR, "ejection_time_s": 0.3}


# --------------------------------------------------------------------------- references
def womersley_zl(omega, r):
    """Z_L = i w rho / (pi r^2 (1 - F10)), F10 = 2 J1(z)/(z J0(z)), z = alpha e^(3i pi/4)
    (REFERENCES 5.2 [M]; scipy.special.jv directly, fine below alpha ~ 700); Poiseuille at 0."""
    if omega == 0:
        return 8 * MU / (np.pi * r**4) + 0j
    alpha = r * np.sqrt(omega * RHO / MU)
    z = alpha * np.exp(0.75j * np.pi)
    f10 = 2 * special.jv(1, z) / (z * special.jv(0, z))
    return 1j * omega * RHO / (np.pi * r**2 * (1 - f10))


def tethered_yt(omega, r, h, e):
    """Y_T = i w C', C' = 3 pi r^3 / (2 E h) (thin tethered wall, nu = 0.5; REFERENCES 5.3 [M])."""
    return 1j * omega * 3 * np.pi * r**3 / (2 * e * h)


def line_input_impedance(omega, length, r, h, e, load):
    """REFERENCES 5.5: Z_in = Z0 (Z_T + Z0 tanh x)/(Z0 + Z_T tanh x), x = gamma L."""
    zl, yt = womersley_zl(omega, r), tethered_yt(omega, r, h, e)
    if omega == 0:
        return load + zl * length
    gamma = np.sqrt(zl * yt)
    z0 = zl / gamma
    t = np.tanh(gamma * length)
    return z0 * (load + z0 * t) / (z0 + load * t)


def wk3(omega, r1, r2, c):
    """Three-element Windkessel R1 + R2/(1 + i w R2 C) (Westerhof et al. 2009, REFERENCES 5.4 [M])."""
    return r1 + r2 / (1 + 1j * omega * r2 * c)


def single_vessel(*, wall=True, windkessel=True, wave=WAVE, fixed_pa=None, **vessel):
    v = {"id": "v", "from": "in", "to": "out", "length_m": 0.25, "radius_m": 3e-3}
    if wall:
        v.update(wall_thickness_m=0.6e-3, wall_modulus_pa=0.8e6)
    v.update(vessel)
    bed = {"id": "b", "node": "out", "resistance_pa_s_m3": 1.5e9}
    if windkessel:
        bed.update(windkessel_proximal_pa_s_m3=2.5e8, windkessel_compliance_m3_pa=3e-10)
    nodes = {"in": {"pressure_pa": fixed_pa}} if fixed_pa is not None else \
        {"in": {"inflow_m3_s": wave["stroke_volume_m3"] * wave["heart_rate_hz"]}}
    return Network.build(nodes=nodes, vessels=[v], beds=[bed], venous_pressure_pa=0.0,
                         inflow_waveforms=None if fixed_pa is not None else {"in": wave})


def random_network(seed):
    """A random tree with a few loops: tapers, walls or none, beds to ground and into nodes."""
    rng = np.random.default_rng(seed)
    n = 14
    parent = [None] + [int(rng.integers(0, k)) for k in range(1, n)]
    edges = [(parent[k], k) for k in range(1, n)]
    for _ in range(3):
        a, b = rng.choice(n, size=2, replace=False)
        edges.append((int(a), int(b)))
    vessels = []
    for j, (a, b) in enumerate(edges):
        r0 = rng.uniform(0.6e-3, 5e-3)
        v = {"id": f"v{j}", "from": f"n{a}", "to": f"n{b}", "length_m": rng.uniform(0.01, 0.2),
             "radius_in_m": r0, "radius_out_m": r0 * (rng.uniform(0.7, 1.0) if rng.random() < 0.6 else 1.0)}
        if rng.random() < 0.7:
            v.update(wall_thickness_m=0.15 * r0, wall_modulus_pa=rng.uniform(0.3e6, 1.2e6))
        vessels.append(v)
    leaves = [k for k in range(n) if k not in parent]
    beds = [{"id": f"b{k}", "node": f"n{k}", "resistance_pa_s_m3": rng.uniform(2e8, 5e9)} for k in leaves]
    beds.append({"id": "series", "node": f"n{leaves[0]}", "resistance_pa_s_m3": 3e9,
                 "outflow_node": f"n{leaves[-1]}"})
    nodes = {"n0": {"inflow_m3_s": 2e-5}, f"n{leaves[1]}": {"pressure_pa": 20 * MMHG_PA}}
    return Network.build(nodes=nodes, vessels=vessels, beds=beds)


# --------------------------------------------------------------------------- harmonic 0
ZERO_HZ_CASES = [("leg", None, 1e-12), ("collateral", None, 1e-12)] + \
    [(None, seed, 1e-12) for seed in (20240611, 7741, 90210)] + [("whole_body", None, 5e-11)]


@pytest.mark.parametrize("demo, seed, tol", ZERO_HZ_CASES)
def test_zero_hz_nodal_system_is_the_steady_solve(demo, seed, tol):
    """The 0 Hz complex nodal system (two-port stamps, Windkessels at omega = 0) equals the
    steady solve (REFERENCES 5.5: at omega = 0 the two-port reduces to Poiseuille).
    whole_body: both solvers sit at the float64 floor of its conditioning (the steady solve
    itself differs by 1.1e-11 from a 40-digit mpmath solution of the same system), so 5e-11."""
    net = load_network(demo_path(demo)) if demo else random_network(seed)
    steady = solve(net)
    p, q_in, q_out, q_bed = solve_harmonic(net, 0.0, steady=steady)
    ok = np.isfinite(steady.pressure_pa)
    assert np.abs(p[ok] - steady.pressure_pa[ok]).max() <= tol * np.abs(steady.pressure_pa[ok]).max()
    q = np.concatenate([steady.vessel_flow_m3_s, steady.bed_flow_m3_s])
    scale = np.abs(q).max()
    assert np.abs(np.concatenate([q_in, q_bed]) - q).max() <= tol * scale
    assert np.abs(q_out - q_in).max() <= tol * scale          # nothing is stored at 0 Hz


@pytest.mark.parametrize("seed", [31337, 4242])
def test_harmonic_zero_of_the_result_is_the_steady_result(seed):
    """By construction: harmonic 0 is the steady solution, and the cycle mean of every
    synthesised waveform is harmonic 0 (sum of full periods of cos vanishes, common practice)."""
    rng = np.random.default_rng(seed)
    net = random_network(int(rng.integers(1, 10**6)))
    net = shape_constant_inflows(net)
    steady = solve(net)
    result = solve_pulse(net, steady=steady)
    assert np.array_equal(result.node_mean_pa, steady.pressure_pa, equal_nan=True)
    assert np.array_equal(result.vessel_flow_mean_m3_s, steady.vessel_flow_m3_s)
    assert result.zero_harmonic_difference < 1e-12
    assert np.allclose(result.node_pressure_waveform_pa.mean(axis=0), steady.pressure_pa, rtol=1e-12)
    assert np.allclose(result.vessel_flow_waveform_m3_s.mean(axis=0), steady.vessel_flow_m3_s,
                       rtol=1e-10, atol=1e-12 * np.abs(steady.vessel_flow_m3_s).max())


# --------------------------------------------------------------------------- closed forms
@pytest.mark.parametrize("wall, windkessel", [(True, True), (True, False), (False, True)])
def test_single_vessel_input_impedance(wall, windkessel):
    """Z_in at the inlet against REFERENCES 5.5's closed form with a Windkessel (or resistive)
    load; a rigid vessel is the lumped Z_L L in series (Y_T = 0).  Also P_n = Z_in Q_n at the
    driven inlet (a second code path: the source column, not the impedance probe)."""
    net = single_vessel(wall=wall, windkessel=windkessel)
    result = solve_pulse(net, n_harmonics=12)
    for n in range(13):
        w = n * OMEGA1
        load = wk3(w, 2.5e8, 1.5e9 - 2.5e8, 3e-10) if windkessel else 1.5e9
        if wall:
            expected = line_input_impedance(w, 0.25, 3e-3, 0.6e-3, 0.8e6, load)
        else:
            expected = load + womersley_zl(w, 3e-3) * 0.25
        assert result.input_impedance_pa_s_m3[n] == pytest.approx(expected, rel=1e-9)
    q_n = source_harmonics(net, n_harmonics=12).inflow_m3_s[:, 0]
    p_n = result.node_pressure_harmonics_pa[1:, 0]
    assert np.allclose(p_n, result.input_impedance_pa_s_m3[1:] * q_n[1:], rtol=1e-9)


def test_bifurcation_input_impedance():
    """Parent line loaded by two daughter lines in parallel (REFERENCES 5.5: the load seen by the
    parent is 1/sum(1/Z_in,daughter)), each daughter closed by its own Windkessel."""
    wall = {"wall_thickness_m": 0.5e-3}
    net = Network.build(
        nodes={"root": {"inflow_m3_s": 1e-4}},
        vessels=[{"id": "p", "from": "root", "to": "j", "length_m": 0.15, "radius_m": 4e-3,
                  "wall_modulus_pa": 0.6e6, **wall},
                 {"id": "d1", "from": "j", "to": "t1", "length_m": 0.2, "radius_m": 2.5e-3,
                  "wall_modulus_pa": 0.9e6, **wall},
                 {"id": "d2", "from": "j", "to": "t2", "length_m": 0.3, "radius_m": 2e-3,
                  "wall_modulus_pa": 1.1e6, **wall}],
        beds=[{"id": "b1", "node": "t1", "resistance_pa_s_m3": 2e9,
               "windkessel_proximal_pa_s_m3": 2e8, "windkessel_compliance_m3_pa": 1e-10},
              {"id": "b2", "node": "t2", "resistance_pa_s_m3": 3e9,
               "windkessel_proximal_pa_s_m3": 4e8, "windkessel_compliance_m3_pa": 5e-11}],
        venous_pressure_pa=0.0, inflow_waveforms={"root": WAVE})
    result = solve_pulse(net, n_harmonics=10)
    for n in range(11):
        w = n * OMEGA1
        z1 = line_input_impedance(w, 0.2, 2.5e-3, 0.5e-3, 0.9e6, wk3(w, 2e8, 1.8e9, 1e-10))
        z2 = line_input_impedance(w, 0.3, 2e-3, 0.5e-3, 1.1e6, wk3(w, 4e8, 2.6e9, 5e-11))
        expected = line_input_impedance(w, 0.15, 4e-3, 0.5e-3, 0.6e6, 1 / (1 / z1 + 1 / z2))
        assert result.input_impedance_pa_s_m3[n] == pytest.approx(expected, rel=1e-9)


def test_pressure_driven_inlet_transmits_to_the_load():
    """A fixed-pressure inlet holding a waveform: the load pressure is
    P_out = P_in / (cosh x + Z0 sinh x / Z_T) and the bed flow P_out / Z_T (REFERENCES 5.5 ABCD)."""
    mean = 90 * MMHG_PA
    net = single_vessel(fixed_pa=mean)
    samples = aortic_pressure_waveform(mean, 40 * MMHG_PA, HR)
    result = solve_pulse(net, pressure_waveforms={"in": {"period_s": 1 / HR, "samples_pa": samples}},
                         n_harmonics=15)
    p_in = result.node_pressure_harmonics_pa[:, 0]
    assert p_in[0] == mean
    for n in range(1, 16):
        w = n * OMEGA1
        zl, yt = womersley_zl(w, 3e-3), tethered_yt(w, 3e-3, 0.6e-3, 0.8e6)
        gamma = np.sqrt(zl * yt)
        z0, x = zl / gamma, gamma * 0.25
        zt = wk3(w, 2.5e8, 1.25e9, 3e-10)
        p_out = p_in[n] / (np.cosh(x) + z0 * np.sinh(x) / zt)
        assert result.node_pressure_harmonics_pa[n, 1] == pytest.approx(p_out, rel=1e-9)
        assert result.bed_flow_harmonics_m3_s[n, 0] == pytest.approx(p_out / zt, rel=1e-9)
    assert result.node_pulse_pressure_pa[0] / MMHG_PA == pytest.approx(40.0, rel=2e-3)


@pytest.mark.parametrize("at", [0.0, 0.35, 1.0])
def test_lesion_is_linearised_about_its_mean_flow(at):
    """A lesion on a rigid uniform vessel: at every harmonic the impedance in series is
    Z_L (L - Ls) + R_v + 2 K_t |Q_mean| + i w Ku rho Ls / A0 (Young-Tsai, REFERENCES 4.1 [M]:
    R_v = 128 mu La/(pi Ds^4), La = 0.83 Ls + 1.64 Ds, K_t = Kt rho/2 (1/As - 1/A0)^2,
    Kt = 1.52, Ku = 1.2), plus the Windkessel; harmonic 0 is the nonlinear steady solve."""
    d0, red, ls = 6e-3, 0.7, 0.02
    net = single_vessel(wall=False, stenosis_reduction=red, stenosis_length_m=ls, stenosis_at=at)
    steady = solve(net)
    result = solve_pulse(net, steady=steady, n_harmonics=8)
    q = steady.vessel_flow_m3_s[0]
    ds = d0 * (1 - red)
    a0, a_s = np.pi * d0**2 / 4, np.pi * ds**2 / 4
    r_v = 128 * MU * (0.83 * ls + 1.64 * ds) / (np.pi * ds**4)
    k_t = 1.52 * RHO / 2 * (1 / a_s - 1 / a0) ** 2
    for n in range(9):
        w = n * OMEGA1
        z_lesion = r_v + 2 * k_t * abs(q) + 1j * w * 1.2 * RHO * ls / a0
        expected = womersley_zl(w, d0 / 2) * (0.25 - ls) + z_lesion + wk3(w, 2.5e8, 1.25e9, 3e-10)
        assert result.input_impedance_pa_s_m3[n] == pytest.approx(expected, rel=1e-9)
    assert np.array_equal(result.node_mean_pa, steady.pressure_pa)
    assert np.isnan(result.zero_harmonic_difference)
    assert any("linearised" in note for note in result.notes)


@pytest.mark.parametrize("at", [0.0, 0.3, 0.8])
def test_lesion_on_an_elastic_vessel_sits_where_given(at):
    """Elastic uniform vessel, lesion of length Ls centred at 'at' (clipped to the vessel): the
    line above the lesion, the lesion's series impedance, the line below, the Windkessel --
    input impedances chained with REFERENCES 5.5 (the load of the upper line is the lesion plus
    the input impedance of the lower line)."""
    ls, length = 0.02, 0.25
    net = single_vessel(stenosis_reduction=0.6, stenosis_length_m=ls, stenosis_at=at)
    steady = solve(net)
    result = solve_pulse(net, steady=steady, n_harmonics=6)
    start = min(max(at * length - ls / 2, 0.0), length - ls)
    d0, ds = 6e-3, 6e-3 * 0.4
    a0, a_s = np.pi * d0**2 / 4, np.pi * ds**2 / 4
    r_v = 128 * MU * (0.83 * ls + 1.64 * ds) / (np.pi * ds**4)
    k_t = 1.52 * RHO / 2 * (1 / a_s - 1 / a0) ** 2
    q = abs(steady.vessel_flow_m3_s[0])
    for n in range(7):
        w = n * OMEGA1
        zt = wk3(w, 2.5e8, 1.25e9, 3e-10)
        down = length - start - ls
        z = line_input_impedance(w, down, 3e-3, 0.6e-3, 0.8e6, zt) if down > 0 else zt
        z = z + r_v + 2 * k_t * q + 1j * w * 1.2 * RHO * ls / a0
        if start > 0:
            z = line_input_impedance(w, start, 3e-3, 0.6e-3, 0.8e6, z)
        assert result.input_impedance_pa_s_m3[n] == pytest.approx(z, rel=1e-9)


def test_lesion_on_an_elastic_vessel_keeps_reciprocity_and_mass():
    """Elastic vessel with a lesion: the cascaded two-port stays reciprocal (equal transfer
    admittances both ways, a property of passive linear networks; common practice) though not
    symmetric, and the flow stored in the wall (flow in minus flow out) vanishes as the wall
    stiffens (C' -> 0, REFERENCES 5.3)."""
    soft = single_vessel(stenosis_reduction=0.6, stenosis_length_m=0.02, stenosis_at=0.3)
    stiff = single_vessel(stenosis_reduction=0.6, stenosis_length_m=0.02, stenosis_at=0.3,
                          wall_modulus_pa=0.8e12)
    r_soft, r_stiff = solve_pulse(soft, n_harmonics=5), solve_pulse(stiff, n_harmonics=5)
    stored_soft = np.abs(r_soft.vessel_flow_in_harmonics_m3_s - r_soft.vessel_flow_out_harmonics_m3_s)[1:]
    stored_stiff = np.abs(r_stiff.vessel_flow_in_harmonics_m3_s - r_stiff.vessel_flow_out_harmonics_m3_s)[1:]
    assert stored_soft.min() > 0 and stored_stiff.max() < 1e-5 * stored_soft.max()
    d_aa, d_ab, d_ba, d_bb = HarmonicNetwork(soft, solve(soft)).stamps(3 * OMEGA1)
    assert d_ab[0] == d_ba[0] and d_aa[0] != d_bb[0]      # reciprocal, not symmetric (lesion at 0.3)


# --------------------------------------------------------------------------- indices
def sampled_network(samples, *, n_harmonics):
    """Inflow waveform into a short rigid vessel and a resistive bed: the vessel flow is the
    inflow (no storage in a rigid vessel)."""
    wave = {"period_s": 1.0, "samples_m3_s": tuple(samples)}
    return Network.build(nodes={"in": {"inflow_m3_s": float(np.mean(samples))}},
                         vessels=[{"id": "v", "from": "in", "to": "out", "length_m": 0.05, "radius_m": 3e-3}],
                         beds=[{"id": "b", "node": "out", "resistance_pa_s_m3": 1e9}],
                         inflow_waveforms={"in": wave}), n_harmonics


@pytest.mark.parametrize("mean, amplitude", [(1.0, 2.0), (-1.0, 0.5), (2.0, 1.0)])
def test_pulsatility_index_and_reversed_fraction(mean, amplitude):
    """q = Q0 + A cos(2 pi t): PI = (Qmax - Qmin)/|Qmean| = 2A/|Q0| (REFERENCES 8.9 [M] definition);
    flow runs against the mean direction (by more than the 1 % margin of the peak-to-peak range)
    while sign(Q0)(Q0 + A cos) < -0.02 A, a fraction 1 - arccos(-(|Q0| + 0.02 A)/A)/pi of the cycle
    (0 when |Q0| > A)."""
    t = np.arange(512) / 512
    net, k = sampled_network(1e-6 * (mean + amplitude * np.cos(2 * np.pi * t)), n_harmonics=3)
    result = solve_pulse(net, n_harmonics=k, n_samples=2000)
    assert result.vessel_pulsatility_index[0] == pytest.approx(2 * amplitude / abs(mean), rel=1e-9)
    threshold = (abs(mean) + 0.02 * amplitude) / amplitude
    expected = 1 - np.arccos(-threshold) / np.pi if threshold < 1 else 0.0
    assert result.vessel_reversed_fraction[0] == pytest.approx(expected, abs=2 / 2000)
    assert result.vessel_flow_peak_m3_s[0] == pytest.approx(1e-6 * (mean + amplitude), rel=1e-9)
    assert result.vessel_flow_min_m3_s[0] == pytest.approx(1e-6 * (mean - amplitude), rel=1e-9)


def test_pulsatility_index_is_nan_without_mean_flow():
    """PI divides by the mean flow; a vessel with zero mean flow has no PI (guard)."""
    t = np.arange(512) / 512
    net = Network.build(nodes={"in": {"inflow_m3_s": 1e-6}},
                        vessels=[{"id": "v", "from": "in", "to": "out", "length_m": 0.05, "radius_m": 3e-3},
                                 {"id": "stub", "from": "out", "to": "end", "length_m": 0.05, "radius_m": 1e-3}],
                        beds=[{"id": "b", "node": "out", "resistance_pa_s_m3": 1e9}],
                        inflow_waveforms={"in": {"period_s": 1.0, "samples_m3_s": tuple(1e-6 * (1 + np.cos(2 * np.pi * t)))}})
    result = solve_pulse(net, n_harmonics=2)
    assert np.isnan(result.vessel_pulsatility_index[1])
    assert result.vessel_pulsatility_index[0] == pytest.approx(2.0, rel=1e-9)


def test_wave_speeds_match_reference_check_values():
    """REFERENCES 5.5 [C]: r 3 mm, h 0.6 mm, E 0.8 MPa, nu 0.5, f 1.2 Hz: phase velocity 8.746 m/s,
    c0/sqrt(1 - nu^2) = 10.031 m/s (REFERENCES 5.3 table)."""
    net = single_vessel(length_m=0.2)
    net = dataclasses.replace(net, nodes=dataclasses.replace(
        net.nodes, inflow_waveforms={0: {**WAVE, "heart_rate_hz": 1.2}}))
    result = solve_pulse(net, n_harmonics=4)
    assert result.vessel_pwv_m_s[0] == pytest.approx(10.031, abs=5e-4)
    assert result.vessel_phase_velocity_m_s[0] == pytest.approx(8.746, abs=5e-4)
    rigid = solve_pulse(single_vessel(wall=False), n_harmonics=4)
    assert np.isnan(rigid.vessel_pwv_m_s[0]) and np.isnan(rigid.vessel_phase_velocity_m_s[0])


# --------------------------------------------------------------------------- networks
def demo_pulse(name):
    net = load_network(demo_path(name))
    steady = solve(net)
    net = shape_constant_inflows(setup_windkessels(net, steady=steady).network)
    waves = {}
    for i in np.flatnonzero(~np.isnan(net.nodes.pressure_pa)):
        if steady.boundary_inflow_m3_s[i] > 0:
            waves[net.nodes.ids[i]] = {"period_s": 1 / HR, "samples_pa": aortic_pressure_waveform(
                net.nodes.pressure_pa[i], 40 * MMHG_PA, HR)}
    return solve_pulse(net, steady=steady, pressure_waveforms=waves or None)


AORTA_TO_FOOT = ["heart", "isthmus", "thoracic_t6", "coeliac_origin", "renal_origin", "aortic_bifurcation",
                 "iliac_bifurcation_right", "groin_right", "femoral_bifurcation_right",
                 "adductor_hiatus_right", "popliteal_bifurcation_right", "foot_right"]


def test_pulse_pressure_grows_from_the_aortic_root_toward_the_foot():
    """Pulse pressure amplification along the aorta into the leg (common practice, no source):
    pulse pressure rises node by node from the aortic root to the foot, while the mean pressure
    falls (steady pressure drop along the path)."""
    result = demo_pulse("whole_body")
    rows = [result.network.nodes.index[n] for n in AORTA_TO_FOOT]
    pp = result.node_pulse_pressure_pa[rows]
    mean = result.node_mean_pa[rows]
    assert np.all(np.diff(pp) > 0), np.round(pp / MMHG_PA, 1)
    assert np.all(np.diff(mean) <= 0)
    assert pp[-1] > 1.3 * pp[0]
    assert 30 * MMHG_PA < pp[0] < 70 * MMHG_PA        # a physiological aortic pulse pressure


def test_stenosis_damps_the_distal_pulse():
    """A 75 % stenosis in the superficial femoral artery of the leg demo: downstream the pulse is
    damped (lower pulse pressure and mean pressure at the popliteal bifurcation; the "parvus"
    distal waveform, common practice, no source), upstream nearly unchanged."""
    net = load_network(demo_path("leg"))
    sfa = net.vessels.index["sfa_mid"]
    reduction = np.array(net.vessels.stenosis_reduction)
    length = np.array(net.vessels.stenosis_length_m)
    reduction[sfa], length[sfa] = 0.75, 0.03
    narrowed = dataclasses.replace(net, vessels=dataclasses.replace(
        net.vessels, stenosis_reduction=reduction, stenosis_length_m=length))

    def run(network):
        steady = solve(network)
        wk = shape_constant_inflows(setup_windkessels(network, steady=steady).network)
        root = network.nodes.index["aortic_bifurcation"]
        wave = aortic_pressure_waveform(network.nodes.pressure_pa[root], 40 * MMHG_PA, HR)
        return solve_pulse(wk, steady=steady,
                           pressure_waveforms={"aortic_bifurcation": {"period_s": 1 / HR, "samples_pa": wave}})

    before, after = run(net), run(narrowed)
    distal = net.nodes.index["popliteal_bifurcation"]
    proximal = net.nodes.index["femoral_bifurcation"]
    assert after.node_pulse_pressure_pa[distal] < 0.8 * before.node_pulse_pressure_pa[distal]
    assert after.node_mean_pa[distal] < before.node_mean_pa[distal] - 5 * MMHG_PA
    assert after.node_pulse_pressure_pa[proximal] == pytest.approx(before.node_pulse_pressure_pa[proximal], rel=0.1)


@pytest.mark.parametrize("name", ["whole_body", "leg", "collateral"])
def test_every_harmonic_conserves_mass(name):
    """Kirchhoff at every node whose pressure is free, harmonic by harmonic: flow out into vessels
    (at their from ends) and beds minus flow in (at vessel to ends and from beds draining into
    the node) equals the injected flow (common practice, nodal analysis)."""
    result = demo_pulse(name)
    net = result.network
    v, beds = net.vessels, net.beds
    n = len(net.nodes)
    free = np.isnan(net.nodes.pressure_pa)
    src = source_harmonics(net, n_harmonics=result.n_harmonics).inflow_m3_s if net.nodes.inflow_waveforms \
        else np.zeros((result.n_harmonics + 1, n))
    into = beds.outflow_node >= 0
    for k in range(1, result.n_harmonics + 1):
        qi, qo, qb = (result.vessel_flow_in_harmonics_m3_s[k], result.vessel_flow_out_harmonics_m3_s[k],
                      result.bed_flow_harmonics_m3_s[k])
        out = np.zeros(n, dtype=complex)
        np.add.at(out, v.from_node, qi)
        np.add.at(out, v.to_node, -qo)
        np.add.at(out, beds.node, qb)
        np.add.at(out, beds.outflow_node[into], -qb[into])
        scale = np.abs(qi).max()
        assert np.abs(out - src[k])[free].max() < 1e-10 * scale


def test_constant_sources_do_not_oscillate():
    """A constant inflow injects nothing above harmonic 0; a constant fixed pressure stays put."""
    net = Network.build(
        nodes={"heart": {"inflow_m3_s": 8e-5}, "side": {"inflow_m3_s": 1e-6},
               "vein": {"pressure_pa": 10 * MMHG_PA}},
        vessels=[{"id": "a", "from": "heart", "to": "j", "length_m": 0.2, "radius_m": 0.01,
                  "wall_thickness_m": 1e-3, "wall_modulus_pa": 5e5},
                 {"id": "s", "from": "side", "to": "j", "length_m": 0.1, "radius_m": 2e-3},
                 {"id": "d", "from": "j", "to": "vein", "length_m": 0.1, "radius_m": 2e-3}],
        beds=[{"id": "b", "node": "j", "resistance_pa_s_m3": 1e8}],
        inflow_waveforms={"heart": WAVE | {"stroke_volume_m3": 8e-5 / HR}})
    result = solve_pulse(net, n_harmonics=6)
    vein = net.nodes.index["vein"]
    assert np.all(result.node_pressure_harmonics_pa[1:, vein] == 0)
    side_flow = result.vessel_flow_in_harmonics_m3_s[1:, net.vessels.index["s"]]
    assert np.abs(side_flow).max() < 1e-12 * np.abs(result.vessel_flow_in_harmonics_m3_s[1:, 0]).max()
    assert result.node_pulse_pressure_pa[vein] == 0
    assert any("constant inflow" in n and "'side'" in n for n in result.notes)


def test_cut_off_part_is_left_out():
    """An occlusion that cuts a branch off every pressure reference: its pressures are NaN at
    every harmonic and its flows zero, as in the steady solve."""
    extra = Network.build(
        nodes={"in": {"inflow_m3_s": WAVE["stroke_volume_m3"] * HR}},
        vessels=[{"id": "v", "from": "in", "to": "out", "length_m": 0.25, "radius_m": 3e-3},
                 {"id": "x", "from": "out", "to": "dead", "length_m": 0.1, "radius_m": 1e-3},
                 {"id": "y", "from": "dead", "to": "end", "length_m": 0.1, "radius_m": 1e-3}],
        beds=[{"id": "b", "node": "out", "resistance_pa_s_m3": 1.5e9}],
        inflow_waveforms={"in": WAVE})
    occluded = dataclasses.replace(extra, vessels=dataclasses.replace(
        extra.vessels, occluded=np.array([False, True, False])))
    result = solve_pulse(occluded, n_harmonics=4)
    dead = [occluded.nodes.index["dead"], occluded.nodes.index["end"]]
    assert np.isnan(result.node_pressure_harmonics_pa[:, dead].real).all()
    assert np.isnan(result.node_pulse_pressure_pa[dead]).all()
    assert np.all(result.vessel_flow_in_harmonics_m3_s[:, 1:] == 0)
    assert np.isfinite(result.node_pulse_pressure_pa[:2]).all()


# --------------------------------------------------------------------------- bad input
def test_no_pulsatile_source_is_an_error():
    net = single_vessel()
    plain = dataclasses.replace(net, nodes=dataclasses.replace(net.nodes, inflow_waveforms={}))
    with pytest.raises(NetworkSpecError, match="no pulsatile source"):
        solve_pulse(plain)


def test_waveforms_of_different_periods_are_an_error():
    net = Network.build(nodes={"a": {"inflow_m3_s": 1e-5}, "b": {"inflow_m3_s": 1e-5}},
                        vessels=[{"id": "v", "from": "a", "to": "j", "length_m": 0.1, "radius_m": 2e-3},
                                 {"id": "w", "from": "b", "to": "j", "length_m": 0.1, "radius_m": 2e-3}],
                        beds=[{"id": "bed", "node": "j", "resistance_pa_s_m3": 1e9}],
                        inflow_waveforms={"a": {"period_s": 1.0, "samples_m3_s": (0, 2e-5)},
                                          "b": {"period_s": 0.8, "samples_m3_s": (0, 2e-5)}})
    with pytest.raises(NetworkSpecError, match="different periods"):
        solve_pulse(net)


@pytest.mark.parametrize("options, match", [
    ({"pressure_waveforms": {"out": {"period_s": 1 / HR, "samples_pa": (1.0, 2.0)}}}, "no fixed pressure"),
    ({"pressure_waveforms": {"nowhere": {"period_s": 1 / HR, "samples_pa": (1.0, 2.0)}}}, "no such node"),
    ({"n_samples": 10}, "cannot show"),
    ({"n_harmonics": 0}, "n_harmonics"),
    ({"inlet": "nowhere"}, "no such node"),
])
def test_bad_options(options, match):
    with pytest.raises(NetworkSpecError, match=match):
        solve_pulse(single_vessel(), **options)
