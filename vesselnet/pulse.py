"""Pulsatile pressure and flow through a vessel network (linear wave theory).

Every quantity is a sum of harmonics of the heart period T,
x(t) = Re sum_n X_n e^(+i n omega t), omega = 2 pi / T.  Harmonic 0 is the
steady solution (:func:`vesselnet.solve.solve`), exactly: it is the steady
result itself.  For each harmonic n = 1..K the network is a linear complex
nodal system Y(n omega) P = I, assembled into one sparse structure (built
once, :class:`vesselnet.assembly.NodalPattern`) and solved by a complex
sparse LU.  In it the vessels are transmission lines (rigid without wall
data), the beds Windkessels and the lesions linearised about their mean
flow (:mod:`vesselnet.harmonic`); a prescribed inflow node injects its
waveform's harmonics and a fixed-pressure node holds its pressure
waveform's (:mod:`vesselnet.pulsesources`), while constant sources and
outflow pressures do not oscillate.  Harmonic 0 of a source waveform is
replaced by the steady value the steady solve used, so the means agree by
construction.

Examples
--------
>>> from vesselnet.model import Network
>>> net = Network.build(
...     nodes={"heart": {"inflow_m3_s": 7e-5}},
...     vessels=[{"id": "aorta", "from": "heart", "to": "tip", "length_m": 0.3, "radius_m": 0.012,
...               "wall_thickness_m": 1.2e-3, "wall_modulus_pa": 5e5}],
...     beds=[{"id": "body", "node": "tip", "resistance_pa_s_m3": 1.2e8,
...            "windkessel_proximal_pa_s_m3": 6e6, "windkessel_compliance_m3_pa": 1e-8}],
...     inflow_waveforms={"heart": {"stroke_volume_m3": 6e-5, "heart_rate_hz": 7 / 6,
...                                 "ejection_time_s": 0.3}})
>>> result = solve_pulse(net)
>>> mmhg = 133.322387415
>>> print(round(result.node_mean_pa[0] / mmhg, 2), result.node_pulse_pressure_pa[0] > 0)
68.07 True
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from .harmonic import HarmonicNetwork, map_flows
from .model import Network
from .pulseresult import PulseResult
from .pulsesources import Sources, source_harmonics, spec_error
from .result import SteadyResult
from .transmission import DEFAULT_TAPER_SUBSEGMENTS, line_constants, propagation_constant
from .units import MMHG_PA
from .wall import moens_korteweg_speed
from .waveforms import DEFAULT_HARMONICS

DEFAULT_SAMPLES = 200
"""Time samples per cycle of the output waveforms.  Systolic and diastolic
values are extremes of these samples and the reversed-flow fraction counts
them, so 200 resolves 0.5 % of the cycle (4.3 ms at 70 bpm) and puts ten
samples on a period of the 20th harmonic."""


def vessel_wave_speeds(network: Network, omega_rad_s: float, viscosity_pa_s: np.ndarray):
    """Moens-Korteweg speed (tethered) and viscous phase velocity of each vessel (m/s).

    Parameters
    ----------
    network : Network
    omega_rad_s : float
        Angular frequency of the phase velocity (the first harmonic), > 0.
    viscosity_pa_s : ndarray, shape (n_vessels,)

    Returns
    -------
    pwv_m_s, phase_velocity_m_s : ndarray, shape (n_vessels,)
        NaN for vessels without wall data.

    Notes
    -----
    At the mean radius r of the vessel: c = sqrt(E h / (2 rho r (1 - nu^2)))
    (Moens-Korteweg with the tethering factor, :mod:`vesselnet.wall`) and
    c_phase = omega / Im sqrt(Z_L Y_T), below c where viscosity matters
    (REFERENCES 5.3, 5.5).

    Examples
    --------
    >>> from vesselnet.model import Network
    >>> net = Network.build(vessels=[{"id": "a", "from": "p", "to": "q", "length_m": 0.2,
    ...     "radius_m": 3e-3, "wall_thickness_m": 0.6e-3, "wall_modulus_pa": 0.8e6}])
    >>> c, cp = vessel_wave_speeds(net, 2 * np.pi * 1.2, np.array([3.5e-3]))
    >>> print(np.round(c, 3), np.round(cp, 3))            # REFERENCES 5.5 check values
    [10.031] [8.746]
    """
    v = network.vessels
    walled = np.isfinite(v.wall_thickness_m) & np.isfinite(v.wall_modulus_pa)
    pwv = np.full(len(v), np.nan)
    phase = np.full(len(v), np.nan)
    rows = np.flatnonzero(walled)
    if len(rows):
        r = 0.5 * (v.radius_in_m[rows] + v.radius_out_m[rows])
        rho = network.blood.density_kg_m3
        pwv[rows] = moens_korteweg_speed(r, v.wall_thickness_m[rows], v.wall_modulus_pa[rows], rho,
                                         poisson_ratio=v.wall_poisson[rows])
        z, y = line_constants(omega_rad_s, r, v.wall_thickness_m[rows], v.wall_modulus_pa[rows],
                              np.asarray(viscosity_pa_s)[rows], rho, poisson_ratio=v.wall_poisson[rows])
        phase[rows] = omega_rad_s / np.imag(propagation_constant(z, y))
    return pwv, phase


def solve_pulse(network: Network, *, steady: SteadyResult | None = None,
                pressure_waveforms: Mapping[str, Mapping[str, object]] | None = None,
                n_harmonics: int = DEFAULT_HARMONICS, n_samples: int = DEFAULT_SAMPLES,
                inlet: str | None = None,
                taper_subsegments: int = DEFAULT_TAPER_SUBSEGMENTS) -> PulseResult:
    """Pulsatile pressures and flows of ``network`` over one cardiac cycle.

    Parameters
    ----------
    network : Network
        A checked network with at least one inflow waveform
        (``nodes.inflow_waveforms``) or a ``pressure_waveforms`` entry.
    steady : SteadyResult, optional
        The steady solution (harmonic 0); default :func:`vesselnet.solve.solve`.
        Pass your own to carry other steady physics (viscosity laws).
    pressure_waveforms : mapping of node id to {"period_s", "samples_pa"}, optional
        Pressure waveforms of fixed-pressure nodes; their mean is replaced by
        the node's pressure (a note says so when they differ).
    n_harmonics : int
        K, default :data:`vesselnet.waveforms.DEFAULT_HARMONICS` (20).
    n_samples : int
        Samples per cycle of the output waveforms, default :data:`DEFAULT_SAMPLES`.
    inlet : str, optional
        Node for the input impedance; default the node with the largest
        steady inflow from outside.
    taper_subsegments : int
        Uniform pieces per tapered vessel, default
        :data:`vesselnet.transmission.DEFAULT_TAPER_SUBSEGMENTS` (16).  Most
        of the time goes into the Womersley functions of these pieces; the
        cascade's error falls as the square of the piece count (about 3e-3
        of the stamp for a 10 % taper at 23 Hz with 4 pieces, 2e-4 with 16).

    Returns
    -------
    PulseResult

    Raises
    ------
    NetworkSpecError
        No pulsatile source, mismatched periods, an unknown inlet.
    SolveError
        A singular harmonic system.

    Notes
    -----
    See the module docstring for the element models.  Harmonic 0 of every
    pressure and flow is the steady result; harmonics 1..K solve
    Y(n omega) P = I with one sparse structure and a complex LU each.  The
    input impedance Z_in(n omega) comes from a second right-hand side on the
    same factorisation: a unit flow into the inlet (or, at a fixed-pressure
    inlet, a unit pressure) with every other source held constant.  At n = 0
    that system (lesions linearised) gives the incremental input resistance,
    and, in a network without lesions, its solution with the steady sources
    is compared with the steady solve (``zero_harmonic_difference``).

    References
    ----------
    Womersley (1955) J Physiol 127:553-563; Westerhof, Lankhaar & Westerhof
    (2009) Med Biol Eng Comput 47:131-141; Young & Tsai (1973) J Biomech
    6:395-410 and 6:547-559; standard linear wave theory [M].
    """
    from .solve import solve

    steady = solve(network) if steady is None else steady
    sources = source_harmonics(network, n_harmonics=n_harmonics, pressure_waveforms=pressure_waveforms)
    n_samples = int(n_samples)
    if n_samples < 2 * n_harmonics + 1:
        raise spec_error(network, "pulse", f"{n_samples} samples per cycle cannot show "
                          f"{n_harmonics} harmonics", f"use at least {2 * n_harmonics + 1} samples")
    system = HarmonicNetwork(network, steady, taper_subsegments=taper_subsegments)
    nodes = network.nodes
    inlet_row = _inlet_row(network, steady, inlet)
    k = sources.inflow_m3_s.shape[0] - 1
    n_el = len(system.a)
    omega1 = 2.0 * np.pi / sources.period_s
    pressure = np.zeros((k + 1, len(nodes)), dtype=complex)
    flow_in = np.zeros((k + 1, len(network.vessels)), dtype=complex)
    flow_out = np.zeros_like(flow_in)
    bed_flow = np.zeros((k + 1, len(network.beds)), dtype=complex)
    impedance = np.zeros(k + 1, dtype=complex)
    probe_inj = np.zeros(len(nodes), dtype=complex)
    probe_p = np.zeros(len(nodes), dtype=complex)
    (probe_p if system.fixed[inlet_row] else probe_inj)[inlet_row] = 1.0
    zero_diff = np.nan
    residual = 0.0
    cut = system.cut_off
    for n in range(k + 1):
        inj = np.where(cut, 0.0, sources.inflow_m3_s[n])
        ground = np.zeros(n_el, dtype=complex)
        if n == 0:
            ground[system.n_vessel_elements:] = network.beds.outflow_pressure_pa
        p, q_from, q_to, imbalance = system.solve(
            n * omega1, np.stack([inj, probe_inj], axis=1), np.stack([sources.pressure_pa[n], probe_p], axis=1),
            np.stack([ground, np.zeros(n_el)], axis=1))
        if system.fixed[inlet_row]:
            y_in = _node_outflow(system, q_from[:, 1], q_to[:, 1], inlet_row)
            impedance[n] = 1.0 / y_in if y_in != 0 else np.inf
        else:
            impedance[n] = p[inlet_row, 1]
        f_in, f_out, f_bed = map_flows(system, q_from[:, 0], q_to[:, 0])
        if n == 0:
            if not len(system.lesion):
                zero_diff = _difference(steady, p[:, 0], f_in, f_bed)
            continue
        pressure[n], flow_in[n], flow_out[n], bed_flow[n] = p[:, 0], f_in, f_out, f_bed
        scale = max(float(np.abs(q_from[:, 0]).max(initial=0.0)), 1e-300)
        residual = max(residual, float(imbalance[0]) / scale)
    pressure[0] = steady.pressure_pa
    flow_in[0] = flow_out[0] = steady.vessel_flow_m3_s
    bed_flow[0] = steady.bed_flow_m3_s
    pwv, phase = vessel_wave_speeds(network, omega1, steady.vessel_viscosity_pa_s)
    return PulseResult(
        network=network, steady=steady, period_s=sources.period_s, n_samples=n_samples,
        inlet=inlet_row, node_pressure_harmonics_pa=pressure, vessel_flow_in_harmonics_m3_s=flow_in,
        vessel_flow_out_harmonics_m3_s=flow_out, bed_flow_harmonics_m3_s=bed_flow,
        input_impedance_pa_s_m3=impedance, vessel_pwv_m_s=pwv, vessel_phase_velocity_m_s=phase,
        zero_harmonic_difference=zero_diff, harmonic_residual=residual,
        warnings=tuple(steady.warnings), notes=tuple(model_notes(network, system, sources, pressure_waveforms)),
        harmonic_solver=system.solver)


def _node_outflow(system: HarmonicNetwork, q_from, q_to, row: int) -> complex:
    """Flow leaving node ``row`` into its elements."""
    return complex(q_from[system.a == row].sum() - q_to[system.b == row].sum())


def _difference(steady: SteadyResult, pressure, flow_in, bed_flow) -> float:
    ok = np.isfinite(steady.pressure_pa)
    p_scale = max(float(np.abs(steady.pressure_pa[ok]).max(initial=0.0)), 1e-300)
    q = np.concatenate([steady.vessel_flow_m3_s, steady.bed_flow_m3_s])
    q_scale = max(float(np.abs(q).max(initial=0.0)), 1e-300)
    dp = float(np.abs(pressure[ok] - steady.pressure_pa[ok]).max(initial=0.0)) / p_scale
    dq = float(np.abs(np.concatenate([flow_in, bed_flow]) - q).max(initial=0.0)) / q_scale
    return max(dp, dq)


def _inlet_row(network: Network, steady: SteadyResult, inlet: str | None) -> int:
    if inlet is not None:
        row = network.nodes.index.get(str(inlet))
        if row is None:
            raise spec_error(network, f"inlet '{inlet}'", "no such node", "name a node of the network")
        return row
    return int(np.argmax(np.nan_to_num(steady.boundary_inflow_m3_s, nan=-np.inf)))


def model_notes(network: Network, system: HarmonicNetwork, sources: Sources,
                pressure_waveforms=None) -> list[str]:
    """The modelling choices a reader of the results should know about."""
    v, beds, nodes = network.vessels, network.beds, network.nodes
    notes = []
    rigid = np.flatnonzero(~system.walled & ~v.occluded)
    if len(rigid):
        notes.append(f"{len(rigid)} of {len(v)} vessels have no wall data and are rigid (lumped "
                     f"Womersley resistance and inertance, no compliance): {_names(v.ids, rigid)}")
    plain_beds = np.flatnonzero(~system.has_windkessel)
    if len(plain_beds):
        notes.append(f"{len(plain_beds)} of {len(beds)} beds have no Windkessel data and are pure "
                     f"resistances at every harmonic: {_names(beds.ids, plain_beds)}")
    if len(system.lesion):
        notes.append(f"{len(system.lesion)} lesion(s) linearised about the steady mean flow "
                     "(small-signal resistance R_v + 2 K_t |Q_mean| and inertance Ku rho Ls/A0, "
                     f"Young-Tsai): {_names(v.ids, system.lesion)}")
    constant = [nodes.ids[i] for i in np.flatnonzero(np.isfinite(nodes.inflow_m3_s))
                if nodes.ids[i] not in sources.pulsatile]
    if constant:
        notes.append(f"constant inflow (no oscillation) at {', '.join(map(repr, constant[:8]))}")
    fixed = [nodes.ids[i] for i in np.flatnonzero(system.fixed) if nodes.ids[i] not in sources.pulsatile]
    if fixed:
        notes.append(f"constant pressure (no oscillation) at {', '.join(map(repr, fixed[:8]))}")
    for node_id, wave in (pressure_waveforms or {}).items():
        mean = float(np.mean(wave["samples_pa"]))
        given = float(nodes.pressure_pa[nodes.index[str(node_id)]])
        if abs(mean - given) > 0.01 * MMHG_PA:
            notes.append(f"the pressure waveform at '{node_id}' has mean {mean / MMHG_PA:.2f} mmHg; "
                         f"the node's pressure {given / MMHG_PA:.2f} mmHg is used as its mean")
    return notes


def _names(ids, rows, limit: int = 6) -> str:
    shown = ", ".join(f"'{ids[i]}'" for i in rows[:limit])
    return shown + (f" and {len(rows) - limit} more" if len(rows) > limit else "")
