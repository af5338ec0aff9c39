"""Checks of the ngspice oracle itself against hand-derivable circuit results.

Every expected value here follows from Ohm's law, Kirchhoff's laws,
Thevenin's theorem or the closed-form solution of a first-order linear ODE
(common practice, no source), or from an independent dense nodal solve
written in this file.  None comes from vesselnet.

If ngspice is missing these tests FAIL (the oracle raises ``NgspiceError``):
CI installs ngspice (``apt-get install -y ngspice``), and a silently skipped
oracle would let the solver checks that rely on it pass without checking.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from spice_oracle import (MACRO, MICRO, Dc, NgspiceError, Pwl, Sine, ngspice_available, solve_dc,
                          transient)


def test_ngspice_is_installed():
    """The oracle needs the ngspice executable (Debian package ``ngspice``)."""
    assert ngspice_available(), "ngspice not on PATH: apt-get install -y ngspice"


# --------------------------------------------------------------------------- DC
@pytest.mark.parametrize("r1, r2, volts", [
    (2.0, 1.0, 1.0),            # exact answer 1/3: shows the digits read back
    (0.165, 40.0, 95.0),        # a large artery feeding an organ bed, mmHg*s/mL and mmHg
    (1e-3, 1e4, 100.0),         # seven decades apart
])
def test_voltage_divider(r1, r2, volts):
    """Divider (Ohm + Kirchhoff, common practice): V_mid = V R2/(R1+R2), I = V/(R1+R2)."""
    v, i = solve_dc(3, [(0, 1, r1), (1, 2, r2)], {0: volts, 2: 0.0}, {})
    assert v[1] == pytest.approx(volts * r2 / (r1 + r2), rel=1e-14, abs=1e-15)
    assert i == pytest.approx([volts / (r1 + r2)] * 2, rel=1e-13)
    assert v[0] == volts and v[2] == 0.0


def test_reads_back_full_double_precision():
    """1/3 from a 2:1 divider must come back to within a few ulp (wrdata at numdgt=17)."""
    v, _ = solve_dc(3, [(0, 1, 2.0), (1, 2, 1.0)], {0: 1.0, 2: 0.0})
    assert abs(v[1] - 1.0 / 3.0) < 4 * np.finfo(float).eps


def _bridge(r1, r2, r3, r4, rg, volts):
    """Nodes: 0 top (volts), 3 bottom (0 V); arms 0-1-3 (R1, R2) and 0-2-3 (R3, R4); Rg from 1 to 2."""
    return solve_dc(4, [(0, 1, r1), (1, 3, r2), (0, 2, r3), (2, 3, r4), (1, 2, rg)], {0: volts, 3: 0.0})


@pytest.mark.parametrize("r1, r2, r3, r4, rg", [
    (1.0, 2.0, 3.0, 6.0, 5.0),
    (10.0, 10.0, 0.1, 0.1, 1e-3),
    (0.5, 40.0, 0.25, 20.0, 7.0),
])
def test_wheatstone_balanced(r1, r2, r3, r4, rg):
    """Balanced bridge R1/R2 = R3/R4 (common practice): no current in the galvanometer arm."""
    v, i = _bridge(r1, r2, r3, r4, rg, 12.0)
    assert abs(i[4]) < 1e-13 * 12.0 / min(r1 + r2, r3 + r4)
    assert v[1] == pytest.approx(12.0 * r2 / (r1 + r2), rel=1e-13)
    assert v[2] == pytest.approx(v[1], rel=1e-13)


@pytest.mark.parametrize("r1, r2, r3, r4, rg", [
    (1.0, 2.0, 3.0, 4.0, 5.0),
    (100.0, 1.0, 1.0, 100.0, 0.01),
    (0.3, 7.0, 2.0, 0.9, 1e3),
])
def test_wheatstone_unbalanced(r1, r2, r3, r4, rg):
    """Thevenin's theorem (common practice): seen from Rg the bridge is a source
    V_th = V (R2/(R1+R2) - R4/(R3+R4)) behind R_th = R1||R2 + R3||R4, so
    I_g = V_th / (R_th + Rg) from node 1 to node 2."""
    volts = 10.0
    v_th = volts * (r2 / (r1 + r2) - r4 / (r3 + r4))
    r_th = r1 * r2 / (r1 + r2) + r3 * r4 / (r3 + r4)
    v, i = _bridge(r1, r2, r3, r4, rg, volts)
    assert i[4] == pytest.approx(v_th / (r_th + rg), rel=1e-12)
    assert v[1] - v[2] == pytest.approx(i[4] * rg, rel=1e-12)
    # KCL at nodes 1 and 2
    assert i[0] - i[1] - i[4] == pytest.approx(0.0, abs=1e-13 * volts / min(r1, r2, r3, r4))
    assert i[2] - i[3] + i[4] == pytest.approx(0.0, abs=1e-13 * volts / min(r1, r2, r3, r4))


@pytest.mark.parametrize("ohms", [
    [2.0, 2.0],
    [1.0, 2.0, 3.0, 6.0],
    [40.0, 12.0, 150.0, 8.0, 0.5],      # organ beds in parallel, mmHg*s/mL
])
def test_parallel_resistors(ohms):
    """Current divider (common practice): a current I into parallel resistors to a common
    reference gives V = V_ref + I / sum(1/R_k) and I_k = (V - V_ref) / R_k."""
    amps, ref = 5.0, 5.0
    v, i = solve_dc(1, [(0, None, r, ref) for r in ohms], {}, {0: amps})
    r_eq = 1.0 / sum(1.0 / r for r in ohms)
    assert v[0] == pytest.approx(ref + amps * r_eq, rel=1e-13)
    assert i == pytest.approx([amps * r_eq / r for r in ohms], rel=1e-12)
    assert i.sum() == pytest.approx(amps, rel=1e-13)


@pytest.mark.parametrize("amps, ohms, ref", [
    (1.5, 2.0, 5.0),
    (-0.25, 40.0, 5.0),         # flow drawn out of the node
    (83.3, 1.08, 0.0),          # cardiac output 5 L/min into a total peripheral resistance
    (1e-4, 1e5, -3.0),
])
def test_current_source_into_resistor_to_reference(amps, ohms, ref):
    """Ohm's law (common practice): V = V_ref + I R, and the resistor carries I to the reference."""
    v, i = solve_dc(1, [(0, None, ohms, ref)], {}, {0: amps})
    assert v[0] == pytest.approx(ref + amps * ohms, rel=1e-13)
    assert i[0] == pytest.approx(amps, rel=1e-13)


def test_tiny_resistance_current_is_not_lost_in_rounding():
    """Series chain V - 1e-6 ohm - 1e9 ohm - 1e9 ohm - ground: I = V / (2e9 + 1e-6).
    The drop across 1e-6 ohm is 5e-16 V, below the rounding of the 1 V node voltages;
    the oracle reads currents from series ammeters, so they stay exact (Ohm's law,
    common practice)."""
    v, i = solve_dc(3, [(0, 1, 1e-6), (1, 2, 1e9), (2, None, 1e9, 0.0)], {0: 1.0})
    assert i == pytest.approx([1.0 / (2e9 + 1e-6)] * 3, rel=1e-12)
    assert v[2] == pytest.approx(0.5, rel=1e-13)


def _random_network(seed, n_nodes, n_extra):
    """A connected random network: a random tree plus extra edges, a few fixed pressures,
    beds draining to a venous reference, and injections."""
    rng = np.random.default_rng(seed)
    edges = [(int(rng.integers(0, k)), k) for k in range(1, n_nodes)]
    while len(edges) < n_nodes - 1 + n_extra:
        a, b = (int(x) for x in rng.choice(n_nodes, size=2, replace=False))
        edges.append((a, b))
    ohms = 10.0 ** rng.uniform(-2, 3, size=len(edges))
    resistors = [(a, b, r) for (a, b), r in zip(edges, ohms)]
    beds = rng.choice(n_nodes, size=max(2, n_nodes // 5), replace=False)
    resistors += [(int(j), None, float(10.0 ** rng.uniform(0, 2)), 5.0) for j in beds]
    fixed_nodes = rng.choice(n_nodes, size=3, replace=False)
    fixed = {int(j): float(rng.uniform(60, 100)) for j in fixed_nodes}
    free = [j for j in range(n_nodes) if j not in fixed]
    injections = {int(j): float(rng.normal(0, 2)) for j in rng.choice(free, size=4, replace=False)}
    return resistors, fixed, injections


def _dense_nodal_solve(n_nodes, resistors, fixed, injections):
    """Independent reference: assemble the full conductance matrix G (n x n) densely,
    G v = b with b from injections and reference-voltage beds, then eliminate the
    fixed-pressure rows and solve the rest with numpy (Kirchhoff's current law)."""
    G = np.zeros((n_nodes, n_nodes))
    b = np.zeros(n_nodes)
    for item in resistors:
        if item[1] is None:
            j, _, r, ref = item
            G[j, j] += 1.0 / r
            b[j] += ref / r
        else:
            a, c, r = item
            G[a, a] += 1.0 / r
            G[c, c] += 1.0 / r
            G[a, c] -= 1.0 / r
            G[c, a] -= 1.0 / r
    for j, amps in injections.items():
        b[j] += amps
    known = np.array(sorted(fixed))
    unknown = np.array([j for j in range(n_nodes) if j not in fixed])
    v = np.zeros(n_nodes)
    v[known] = [fixed[j] for j in known]
    rhs = b[unknown] - G[np.ix_(unknown, known)] @ v[known]
    v[unknown] = np.linalg.solve(G[np.ix_(unknown, unknown)], rhs)
    currents = np.array([(v[it[0]] - it[3]) / it[2] if it[1] is None else (v[it[0]] - v[it[1]]) / it[2]
                         for it in resistors])
    return v, currents


@pytest.mark.parametrize("seed, n_nodes, n_extra", [(91823, 12, 6), (40417, 40, 30), (7331, 150, 120)])
def test_random_network_matches_dense_numpy_solve(seed, n_nodes, n_extra):
    """ngspice's operating point equals a dense numpy nodal solve on random networks."""
    resistors, fixed, injections = _random_network(seed, n_nodes, n_extra)
    v, i = solve_dc(n_nodes, resistors, fixed, injections)
    v_ref, i_ref = _dense_nodal_solve(n_nodes, resistors, fixed, injections)
    assert v == pytest.approx(v_ref, rel=1e-11)
    scale = np.max(np.abs(i_ref))
    assert np.max(np.abs(i - i_ref)) < 1e-10 * scale


@pytest.mark.parametrize("seed", [5501, 86243])
def test_random_network_kirchhoff_current_law(seed):
    """KCL (common practice): at every node without a fixed pressure, the resistor
    currents leaving it add up to the current injected into it."""
    n_nodes = 30
    resistors, fixed, injections = _random_network(seed, n_nodes, 20)
    v, i = solve_dc(n_nodes, resistors, fixed, injections)
    out = np.zeros(n_nodes)
    for k, item in enumerate(resistors):
        out[item[0]] += i[k]
        if item[1] is not None:
            out[item[1]] -= i[k]
    for j in range(n_nodes):
        if j not in fixed:
            assert out[j] == pytest.approx(injections.get(j, 0.0), abs=1e-10 * np.max(np.abs(i)))


def test_floating_part_raises():
    """A part with no path to a fixed voltage makes the matrix singular; ngspice would
    paper over it with gmin stepping, the oracle must refuse."""
    with pytest.raises(NgspiceError, match="singular"):
        solve_dc(4, [(0, 1, 1.0), (1, None, 1.0, 0.0), (2, 3, 1.0)], {0: 1.0})


@pytest.mark.parametrize("resistors, match", [
    ([(0, 0, 1.0)], "self-loop"),
    ([(0, 1, -1.0)], "must be > 0"),
    ([(0, 1, float("nan"))], "must be finite"),
    ([(0, 5, 1.0)], "node must be an integer"),
    ([(0, 1)], "expected"),
])
def test_bad_input_raises(resistors, match):
    """Input checks happen before ngspice runs."""
    with pytest.raises(ValueError, match=match):
        solve_dc(2, resistors, {0: 1.0})


def test_lonely_node_raises():
    with pytest.raises(ValueError, match="touch no resistor"):
        solve_dc(3, [(0, 1, 1.0)], {0: 1.0})


# --------------------------------------------------------------------------- scaling
def test_scaling_agrees_with_pint():
    """Unit factors of MACRO / MICRO checked against pint's definitions."""
    import pint

    ureg = pint.UnitRegistry()
    pru = (1 * ureg.mmHg * ureg.s / ureg.mL).to("Pa*s/m**3").magnitude
    assert MACRO.ohms(pru) == pytest.approx(1.0, rel=1e-12)
    assert MACRO.farads((1 * ureg.mL / ureg.mmHg).to("m**3/Pa").magnitude) == pytest.approx(1.0, rel=1e-12)
    assert MACRO.henries((1 * ureg.mmHg * ureg.s ** 2 / ureg.mL).to("Pa*s**2/m**3").magnitude) == \
        pytest.approx(1.0, rel=1e-12)
    assert MACRO.volts(ureg.Quantity(95, "mmHg").to("Pa").magnitude) == pytest.approx(95.0, rel=1e-12)
    assert MACRO.amperes((1 * ureg.L / ureg.min).to("m**3/s").magnitude) == pytest.approx(1000 / 60, rel=1e-12)
    assert MICRO.ohms((1 * ureg.mmHg * ureg.s / ureg.nL).to("Pa*s/m**3").magnitude) == pytest.approx(1.0, rel=1e-12)


# --------------------------------------------------------------------------- transient
@pytest.mark.parametrize("r, c, volts", [(0.5, 1.5, 2.0), (1.0, 1.0, 95.0), (40.0, 0.01, 10.0)])
def test_rc_charging_from_voltage_step(r, c, volts):
    """Series R-C switched onto V at t = 0 with the capacitor empty (common practice):
    v_C = V (1 - exp(-t/RC)), i = (V/R) exp(-t/RC).  Trapezoidal rule with a step of
    tau/1000: error below 1e-6 of V expected (measured 2.7e-8)."""
    tau = r * c
    res = transient(2, [("R", 0, 1, r), ("C", 1, None, c)], [("V", 0, Dc(volts))], tstep=tau / 100,
                    tstop=5 * tau, nodes=[1], currents=[0, 1], initial="zero", tmax=tau / 1000)
    t = res.time_s
    assert 0.0 < t[0] <= tau / 1000     # with uic ngspice writes no t = 0 row
    assert t[-1] == pytest.approx(5 * tau, rel=1e-12)
    assert np.max(np.abs(res.node_voltages[:, 0] - volts * (1 - np.exp(-t / tau)))) < 1e-6 * volts
    i_exact = volts / r * np.exp(-t / tau)
    for col in range(2):                    # the same current through R and C
        assert np.max(np.abs(res.element_currents[:, col] - i_exact)) < 1e-6 * volts / r
    # the source delivers the charging current into node 0
    assert np.max(np.abs(res.source_currents[:, 0] - i_exact)) < 1e-6 * volts / r


def test_rc_parallel_charged_by_current_source():
    """Current I into R || C to ground from empty (common practice): v = I R (1 - exp(-t/RC))."""
    r, c, amps = 2.0, 0.75, 3.0
    tau = r * c
    res = transient(1, [("R", 0, None, r), ("C", 0, None, c)], [("I", 0, Dc(amps))], tstep=tau / 100,
                    tstop=4 * tau, currents=[0], initial="zero", tmax=tau / 1000)
    t = res.time_s
    v_exact = amps * r * (1 - np.exp(-t / tau))
    assert np.max(np.abs(res.node_voltages[:, 0] - v_exact)) < 1e-6 * amps * r
    assert np.max(np.abs(res.element_currents[:, 0] - v_exact / r)) < 1e-6 * amps
    assert res.source_currents[:, 0] == pytest.approx(np.full(t.size, amps), rel=1e-12)


def test_initial_operating_point_starts_charged():
    """initial='op': the capacitor starts at the DC solution (open circuit: V), so nothing moves."""
    res = transient(2, [("R", 0, 1, 1.0), ("C", 1, None, 1.0)], [("V", 0, Dc(7.0))],
                    tstep=0.01, tstop=1.0, nodes=[1], currents=[0])
    assert np.max(np.abs(res.node_voltages[:, 0] - 7.0)) < 1e-12
    assert np.max(np.abs(res.element_currents[:, 0])) < 1e-12


@pytest.mark.parametrize("omega_l_over_r", [0.3, 1.0, 5.0])
def test_rl_sinusoidal_steady_state(omega_l_over_r):
    """Series R-L driven by V0 sin(wt) (phasors, common practice): in steady state
    i = V0/|Z| sin(wt - phi) with |Z| = sqrt(R^2 + (wL)^2), phi = atan(wL/R).
    Amplitude and phase come from a least-squares fit of a sin + b cos + c over the
    last two periods, after the start-up transient (tau = L/R) has decayed 20 times."""
    r, v0, f_hz = 2.0, 10.0, 1.2
    omega = 2 * math.pi * f_hz
    ind = omega_l_over_r * r / omega
    period = 1 / f_hz
    tstart = math.ceil(20 * ind / r / period) * period
    res = transient(2, [("R", 0, 1, r), ("L", 1, None, ind)], [("V", 0, Sine(0.0, v0, f_hz))],
                    tstep=period / 200, tstop=tstart + 2 * period, tstart=tstart, nodes=[0, 1],
                    currents=[1], tmax=period / 2000)
    t, i = res.time_s, res.element_currents[:, 0]
    basis = np.column_stack([np.sin(omega * t), np.cos(omega * t), np.ones_like(t)])
    (a, b, c), *_ = np.linalg.lstsq(basis, i, rcond=None)
    amplitude, phase = math.hypot(a, b), math.atan2(b, a)
    assert amplitude == pytest.approx(v0 / math.hypot(r, omega * ind), rel=1e-5)
    assert phase == pytest.approx(-math.atan(omega_l_over_r), abs=1e-5)    # measured errors <= 8e-7
    assert abs(c) < 1e-5 * amplitude
    # the driven node follows the source exactly
    assert np.max(np.abs(res.node_voltages[:, 0] - v0 * np.sin(omega * t))) < 1e-9 * v0


def test_sine_phase_and_offset_into_resistor():
    """I(t) = I0 + I1 sin(2 pi f t + phase) into R to ground: v = R I(t) at every point (Ohm's law)."""
    r, wave = 3.0, Sine(offset=1.0, amplitude=2.0, frequency_hz=5.0, phase_deg=30.0)
    res = transient(1, [("R", 0, None, r)], [("I", 0, wave)], tstep=1e-3, tstop=0.4)
    t = res.time_s
    expected = r * (1.0 + 2.0 * np.sin(2 * np.pi * 5.0 * t + np.pi / 6))
    assert np.max(np.abs(res.node_voltages[:, 0] - expected)) < 1e-12 * r * 3


def test_periodic_pwl_hits_every_corner():
    """A periodic triangle current (period 0.3 s) into R: v = R I(t), and every corner
    of every period is a time point (so the peaks are sampled exactly)."""
    r, period = 2.0, 0.3
    wave = Pwl(times_s=(0.0, 0.1, 0.2, 0.3), values=(0.0, 1.0, 0.0, 0.0), period_s=period)
    res = transient(1, [("R", 0, None, r)], [("I", 0, wave)], tstep=1e-3, tstop=1.0, tmax=1e-3)
    t, v = res.time_s, res.node_voltages[:, 0]
    phase = np.mod(t, period)
    expected = r * np.interp(phase, [0.0, 0.1, 0.2, 0.3], [0.0, 1.0, 0.0, 0.0])
    assert np.max(np.abs(v - expected)) < 1e-9
    for peak in (0.1, 0.4, 0.7, 1.0):
        k = np.argmin(np.abs(t - peak))
        assert t[k] == pytest.approx(peak, abs=1e-12)
        assert v[k] == pytest.approx(r, rel=1e-12)


def test_periodic_pwl_must_close():
    """A periodic pattern whose end value differs from its start value is refused."""
    with pytest.raises(ValueError, match="end where it starts"):
        Pwl(times_s=(0.0, 0.5, 1.0), values=(0.0, 1.0, 2.0), period_s=1.0).spice(3.0)


@pytest.mark.parametrize("kwargs, match", [
    ({"initial": "cold"}, "initial"),
    ({"method": "euler"}, "method"),
    ({"tstart": 2.0}, "tstart"),
    ({"currents": [3]}, "currents"),
])
def test_transient_bad_options_raise(kwargs, match):
    opts = {"tstep": 0.01, "tstop": 1.0} | kwargs
    with pytest.raises(ValueError, match=match):
        transient(1, [("R", 0, None, 1.0)], [("I", 0, Dc(1.0))], **opts)
