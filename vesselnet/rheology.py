"""Coupled microvascular rheology: flows, hematocrit and viscosity solved together.

Flows depend on viscosity, viscosity on diameter and hematocrit
(:mod:`vesselnet.viscosity`), and hematocrit on the flows, through the red-cell
partition at diverging nodes (:mod:`vesselnet.phase_separation`, marched
downstream by :mod:`vesselnet.hematocrit`).  :func:`solve_rheology` iterates
the three to a fixed point, under-relaxing the hematocrit, and fails loudly
(a :class:`~vesselnet.errors.SolveError` that summarises the residual history)
when the iteration stalls, oscillates or runs out of iterations.

Examples
--------
A 10 um parent dividing into an 8 um and a 6 um daughter that drain to the
same pressure, in-vivo viscosity, 1990 phase separation:

>>> from vesselnet.model import Blood, Network
>>> blood = Blood(viscosity_law="pries-vivo", separation="pries-1990")
>>> net = Network.build(blood=blood,
...     nodes={"in": {"pressure_pa": 4000.0}, "o1": {"pressure_pa": 2000.0},
...            "o2": {"pressure_pa": 2000.0}},
...     vessels=[{"id": "F", "from": "in", "to": "j", "length_m": 1e-4, "radius_m": 5e-6},
...              {"id": "a", "from": "j", "to": "o1", "length_m": 1e-4, "radius_m": 4e-6},
...              {"id": "b", "from": "j", "to": "o2", "length_m": 1e-4, "radius_m": 3e-6}])
>>> result = solve_rheology(net)
>>> print(np.round(result.vessel_extra["hematocrit"], 3))
[0.45  0.489 0.33 ]
>>> result.extra_checks["rheology"]["iterations"] < 40
True
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np

from .errors import NetworkSpecError, Problem, SolveError
from .hematocrit import march_hematocrit
from .linsolve import Factorization
from .model import Network
from .result import SteadyResult
from .solve import DEFAULT_MAX_ITERATIONS as NEWTON_MAX_ITERATIONS
from .solve import DEFAULT_TOLERANCE as NEWTON_TOLERANCE
from .solve import solve
from .viscosity import (RELATIVE_LAWS, VIVO_SINGULAR_DIAMETER_M, out_of_range, relative_viscosity,
                        tube_hematocrit)

DEFAULT_RELAXATION = 0.5
"""Under-relaxation factor of the hematocrit update, H <- H + w (H_march - H)."""

DEFAULT_TOLERANCE = 1e-6
"""Largest hematocrit change (fraction) and relative flow change accepted as converged."""

DEFAULT_MAX_ITERATIONS = 300
"""Coupled iterations before giving up."""

DEFAULT_ANDERSON_MEMORY = 5
"""Previous iterates the Anderson-accelerated update combines (0: plain relaxation)."""

ANDERSON_RESTART = 10.0
"""The Anderson memory is cleared when the residual exceeds this times the best so far."""

HEMATOCRIT_CAP = 0.95
"""Viscosity is evaluated at min(HD, this): about the volume fraction of packed red cells
(a centrifuged sample keeps a few per cent of plasma between the cells; common practice,
no source).  Hematocrits above it are reported, never silently changed."""

STALL_WINDOW = 12
"""Iterations without progress after which the iteration is declared stalled or oscillating."""

STALL_PROGRESS = 0.9
"""Progress means the best residual of the last window is below this times the best before."""

FLOW_FLOOR = 1e-6
"""Flow changes are relative to each vessel's own flow, but at least this fraction of the largest."""

NEGLIGIBLE_FLOW_RATIO = 1e-10
"""Flows at most this fraction of the largest carry no red cells (as in the march)."""


def needs_rheology(network: Network) -> bool:
    """True when the network's blood model asks for the coupled solve.

    That is, a diameter- and hematocrit-dependent viscosity law, or a
    phase-separation law (whose hematocrit is then reported even with a
    constant viscosity).
    """
    blood = network.blood
    return blood.viscosity_law != "constant" or blood.separation != "none"


def solve_rheology(network: Network, *, relaxation: float = DEFAULT_RELAXATION,
                   tolerance: float = DEFAULT_TOLERANCE,
                   max_iterations: int = DEFAULT_MAX_ITERATIONS,
                   anderson_memory: int = DEFAULT_ANDERSON_MEMORY,
                   newton_tolerance: float = NEWTON_TOLERANCE,
                   newton_max_iterations: int = NEWTON_MAX_ITERATIONS,
                   method: str = "auto") -> SteadyResult:
    """Steady flows with diameter- and hematocrit-dependent viscosity and phase separation.

    Parameters
    ----------
    network : Network
        A checked network; ``network.blood`` names the viscosity law
        (``constant``, ``pries-vitro``, ``pries-vivo``), the plasma viscosity,
        the separation law and the default inlet hematocrit; a node's
        ``hematocrit`` (NaN: not given) sets the hematocrit of blood entering there.
    relaxation : float
        w in (0, 1]: H <- H + w (H_march - H); 1 is no relaxation.
    tolerance : float
        Converged when the largest hematocrit change |H_march - H| and the
        largest relative vessel flow change between successive solves are both
        at most this.
    max_iterations : int
        Coupled iterations (each a flow solve and a march) before giving up.
    anderson_memory : int
        m >= 0: the update combines the last m iterates (Anderson
        acceleration, damped by `relaxation`); 0 is the plain under-relaxed
        iteration.
    newton_tolerance, newton_max_iterations : float, int
        Passed to each flow solve (:func:`vesselnet.solve.solve`).
    method : str
        Linear solver of every flow solve (see :mod:`vesselnet.linsolve`); its
        ordering and symbolic analysis are kept across the coupled iterations.

    Returns
    -------
    SteadyResult
        Flows and pressures of the last flow solve, with the viscosity used in
        it; ``vessel_extra``: ``hematocrit`` (discharge, from the march of
        those flows), ``tube_hematocrit`` (Fåhræus), ``red_cell_flux_m3_s``
        (Q HD, signed like Q); ``bed_extra``: ``red_cell_delivery_m3_s`` (red
        cells into each bed); ``extra_checks["rheology"]``: iterations,
        residuals and their history, the laws, plasma-only vessels.
        Warnings name vessels outside the laws' fitted ranges.

    Raises
    ------
    NetworkSpecError
        A bad option; beds draining into a node (``outflow_node``), which the
        hematocrit march does not follow.
    SolveError
        The iteration stalled, oscillated or did not converge in
        ``max_iterations`` (the message summarises the residual history and
        names the vessel that changed most); a flow solve failed; phase
        separation pushed a dividing node's hematocrit above 1.

    Notes
    -----
    With H_0 the uniform blood hematocrit, iteration k is (REFERENCES 3.3,
    after Pries et al. 1990):

    1. mu_k = mu_plasma mu_rel(D, min(H_k, 0.95)) in every vessel;
    2. Q_k, p_k: the nodal flow solve with viscosities mu_k;
    3. H* = march(Q_k): phase separation at diverging nodes, flux-weighted
       mixing at converging ones, in the flow order of Q_k (rebuilt every
       iteration, so flow reversals are followed);
    4. r_k = max(max |H* - H_k|, max |Q_k - Q_{k-1}| / max(|Q_k|, floor));
       stop when r_k <= tolerance;
    5. with f_k = H* - H_k: H_{k+1} = H_k + w f_k (plain, ``anderson_memory``
       0), or the Anderson update over the last m differences
       dX = [H_{i+1} - H_i], dF = [f_{i+1} - f_i]:
       g = argmin |f_k - dF g|_2, H_{k+1} = H_k + w f_k - (dX + w dF) g
       (Walker & Ni 2011, the damped "type II" form), clipped to [0, 1];
       the memory is cleared when the residual grows past 10 times its best.

    D is the mean of a vessel's end diameters.  The result reports H* (which
    conserves red cells exactly at every node) beside the flows Q_k and the
    viscosities mu_k (which satisfy the flow laws exactly); they are
    consistent to the tolerance.  Red cells leaving at a node (into a bed or
    through an outflow) leave at the node's mixed hematocrit.

    The iteration is declared stalled when the best r_k of the last
    :data:`STALL_WINDOW` iterations is not below 0.9 times the best before,
    and oscillating when, in addition, successive hematocrit changes point
    in opposite directions (negative inner product) in at least half of
    that window.

    With a constant viscosity the flows do not depend on hematocrit: one
    solve and one march, no iteration.

    References
    ----------
    A. R. Pries, T. W. Secomb, P. Gaehtgens, J. F. Gross (authors from memory),
    Circ Res 67 (1990) 826-834: the network model iterated in this way.

    H. F. Walker, P. Ni, SIAM J Numer Anal 49 (2011) 1715-1735 (from memory):
    Anderson acceleration for fixed-point iterations.
    """
    _check_options(network, relaxation, tolerance, max_iterations, anderson_memory)
    blood = network.blood
    v = network.vessels
    diameter_m = np.asarray(v.radius_in_m + v.radius_out_m)
    inlet_h = np.where(np.isnan(network.nodes.hematocrit), blood.hematocrit,
                       network.nodes.hematocrit)
    coupled = blood.viscosity_law in RELATIVE_LAWS

    def viscosity(h):
        if not coupled:
            return np.full(len(v), blood.viscosity_pa_s)
        h_used = np.clip(h, 0.0, HEMATOCRIT_CAP)
        return relative_viscosity(blood.viscosity_law, diameter_m, h_used) * \
            blood.plasma_viscosity_pa_s

    h = np.full(len(v), blood.hematocrit)
    history: list[float] = []
    turns: list[bool] = []
    q_prev = previous_step = None
    memory = _Anderson(int(anderson_memory), relaxation)
    limit = max_iterations if coupled else 1
    linear = Factorization(method)        # one analysis for every coupled iteration
    for k in range(1, limit + 1):
        mu = viscosity(h)
        result = solve(network, viscosity_pa_s=mu, tolerance=newton_tolerance,
                       max_iterations=newton_max_iterations, factorization=linear)
        q = result.vessel_flow_m3_s
        h_march = _march(network, result, diameter_m, inlet_h, k)
        step = h_march - h
        h_residual = float(np.abs(step).max(initial=0.0)) if coupled else 0.0
        q_residual = _flow_change(q, q_prev) if coupled and q_prev is not None else 0.0
        history.append(max(h_residual, q_residual))
        if previous_step is not None:
            turns.append(float(np.dot(step, previous_step)) < 0)
        if history[-1] <= tolerance or not coupled:
            break
        failure = _stalled(history, turns)
        if failure or k == limit:
            raise _not_converged(network, history, turns, step, failure or "runs out",
                                 relaxation, tolerance, max_iterations, int(anderson_memory))
        h = memory.next(h, step, float(np.linalg.norm(step)))
        q_prev, previous_step = q, step
    return _finish(network, result, h_march, diameter_m, inlet_h, history, relaxation,
                   tolerance, h_residual, q_residual, int(anderson_memory))


class _Anderson:
    """Damped Anderson acceleration (type II) of the fixed point H = march(flows(H))."""

    def __init__(self, memory: int, relaxation: float):
        self.memory, self.relaxation = memory, relaxation
        self.xs: list[np.ndarray] = []
        self.fs: list[np.ndarray] = []
        self.best = np.inf

    def next(self, x: np.ndarray, f: np.ndarray, size: float) -> np.ndarray:
        w = self.relaxation
        if size > ANDERSON_RESTART * self.best:
            self.xs, self.fs = [], []
        self.best = min(self.best, size)
        self.xs = (self.xs + [x])[-(self.memory + 1):]
        self.fs = (self.fs + [f])[-(self.memory + 1):]
        if self.memory == 0 or len(self.xs) < 2:
            return np.clip(x + w * f, 0.0, 1.0)
        d_x = np.diff(np.array(self.xs), axis=0).T
        d_f = np.diff(np.array(self.fs), axis=0).T
        gamma = np.linalg.lstsq(d_f, f, rcond=None)[0]
        return np.clip(x + w * f - (d_x + w * d_f) @ gamma, 0.0, 1.0)


def _check_options(network, relaxation, tolerance, max_iterations, anderson_memory) -> None:
    problems = []

    def bad(item, message, fix):
        problems.append(Problem(network.source, 0, 0, item, message, fix))

    if not (np.isfinite(relaxation) and 0 < relaxation <= 1):
        bad("relaxation", f"must be in (0, 1], got {relaxation!r}", "for example 0.5")
    if not (np.isfinite(tolerance) and tolerance > 0):
        bad("tolerance", f"must be > 0, got {tolerance!r}", "for example 1e-6")
    if isinstance(max_iterations, bool) or int(max_iterations) != max_iterations \
            or max_iterations < 1:
        bad("max_iterations", f"must be a whole number >= 1, got {max_iterations!r}",
            "for example 300")
    if isinstance(anderson_memory, bool) or int(anderson_memory) != anderson_memory \
            or anderson_memory < 0:
        bad("anderson_memory", f"must be a whole number >= 0, got {anderson_memory!r}",
            "for example 5, or 0 for plain relaxation")
    v = network.vessels
    if network.blood.viscosity_law == "pries-vivo":
        singular = (v.radius_in_m + v.radius_out_m) <= VIVO_SINGULAR_DIAMETER_M
        if singular.any():
            bad(f"vessels {_named(network, singular)}", "mean diameter at or below 1.1 um, where "
                "the in-vivo viscosity law is singular", "check the radii (micrometres?), or "
                "use the law 'pries-vitro'")
    series = np.flatnonzero(network.beds.outflow_node >= 0)
    if series.size:
        names = ", ".join(f"'{network.beds.ids[i]}'" for i in series[:5])
        bad(f"beds {names}", "drain into a network node (outflow_node), which the hematocrit "
            "march does not follow", "let them drain to an outflow pressure, model the "
            "connection as vessels, or use a constant viscosity and no separation")
    if problems:
        raise NetworkSpecError(problems)


def _boundary_inflow(network: Network, result: SteadyResult) -> np.ndarray:
    """Blood entering at each node from outside (m^3/s): boundaries and reversed beds."""
    inflow = np.maximum(result.boundary_inflow_m3_s, 0.0)
    back = np.maximum(-result.bed_flow_m3_s, 0.0)
    return inflow + np.bincount(network.beds.node, back, minlength=len(network.nodes))


def _march(network, result, diameter_m, inlet_h, k) -> np.ndarray:
    v = network.vessels
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="march_hematocrit", category=RuntimeWarning)
        try:
            return march_hematocrit(len(network.nodes), v.from_node, v.to_node,
                                    result.vessel_flow_m3_s, diameter_m, inlet_h,
                                    _boundary_inflow(network, result),
                                    law=network.blood.separation,
                                    negligible_flow_ratio=NEGLIGIBLE_FLOW_RATIO)
        except SolveError as exc:
            ids = tuple(network.nodes.ids[int(i)] for i in exc.ids if i.isdigit())
            raise SolveError(f"rheology iteration {k}: {exc}", ids or exc.ids) from exc


def _flow_change(q, q_prev) -> float:
    """Largest change of a vessel's flow relative to its own size (floored)."""
    scale = max(float(np.abs(q).max(initial=0.0)), 1e-300)
    size = np.maximum(np.maximum(np.abs(q), np.abs(q_prev)), FLOW_FLOOR * scale)
    return float((np.abs(q - q_prev) / size).max(initial=0.0))


def _stalled(history: list[float], turns: list[bool]) -> str:
    """'' while the iteration progresses, else 'oscillates' or 'stalls'."""
    if len(history) < 2 * STALL_WINDOW:
        return ""
    finite_before = [r for r in history[:-STALL_WINDOW] if np.isfinite(r)]
    if not finite_before or min(history[-STALL_WINDOW:]) < STALL_PROGRESS * min(finite_before):
        return ""
    recent = turns[-STALL_WINDOW:]
    return "oscillates" if sum(recent) >= len(recent) / 2 else "stalls"


def history_summary(history) -> str:
    """A short account of a residual history: first, best (where), last few.

    >>> history_summary([0.3, 0.1, 0.02, 0.05, 0.04, 0.05])
    'first 3.0e-01, best 2.0e-02 at iteration 3, last 5: 1.0e-01 2.0e-02 5.0e-02 4.0e-02 5.0e-02'
    """
    values = np.asarray(history, dtype=float)
    best = int(np.argmin(values))
    last = " ".join(f"{r:.1e}" for r in values[-5:])
    return (f"first {values[0]:.1e}, best {values[best]:.1e} at iteration {best + 1}, "
            f"last {min(5, values.size)}: {last}")


def _not_converged(network, history, turns, step, how, relaxation, tolerance,
                   max_iterations, anderson_memory) -> SolveError:
    worst = int(np.argmax(np.abs(step)))
    vessel = network.vessels.ids[worst]
    what = {"oscillates": "oscillates", "stalls": "stalls (no progress)",
            "runs out": f"did not converge in {max_iterations} iterations"}[how]
    alternating = sum(turns[-STALL_WINDOW:])
    advice = (f"lower the relaxation (now {relaxation:g}; for example {relaxation / 2:g})"
              if how != "runs out" else
              f"raise the iteration limit or lower the relaxation (now {relaxation:g})")
    if anderson_memory == 0:
        advice += ", or use Anderson acceleration (memory 5)"
    return SolveError(
        f"rheology: the coupled flow-hematocrit-viscosity iteration {what} after "
        f"{len(history)} iterations, tolerance {tolerance:g}: residual {history_summary(history)}; "
        f"successive hematocrit changes reversed direction in {alternating} of the last "
        f"{min(STALL_WINDOW, len(turns))}; largest change in vessel '{vessel}' "
        f"({step[worst]:+.2e}); {advice}, or check the network near that vessel",
        ids=(vessel,))


def _finish(network, result, h, diameter_m, inlet_h, history, relaxation, tolerance,
            h_residual, q_residual, anderson_memory) -> SteadyResult:
    blood = network.blood
    q = result.vessel_flow_m3_s
    node_h = _node_hematocrit(network, result, h, inlet_h)
    bed_node = network.beds.node
    bed_q = result.bed_flow_m3_s
    delivery = bed_q * np.where(bed_q >= 0, node_h[bed_node], inlet_h[bed_node])
    vessel_extra = dict(result.vessel_extra)
    vessel_extra.update(hematocrit=h, tube_hematocrit=tube_hematocrit(diameter_m,
                                                                      np.clip(h, 0.0, 1.0)),
                        red_cell_flux_m3_s=q * h)
    scale = max(float(np.abs(q).max(initial=0.0)), 1e-300)
    plasma_only = int(((h == 0) & (np.abs(q) > NEGLIGIBLE_FLOW_RATIO * scale)).sum())
    checks = {"iterations": len(history), "hematocrit_residual": h_residual,
              "flow_residual": q_residual, "tolerance": tolerance, "relaxation": relaxation,
              "anderson_memory": anderson_memory,
              "viscosity_law": blood.viscosity_law, "separation": blood.separation,
              "plasma_only_vessels": plasma_only, "residual_history": list(history)}
    extra_checks = dict(result.extra_checks)
    extra_checks["rheology"] = checks
    notes = list(result.warnings) + _range_warnings(network, diameter_m, h)
    return dataclasses.replace(result, vessel_extra=vessel_extra,
                               bed_extra={**result.bed_extra, "red_cell_delivery_m3_s": delivery},
                               extra_checks=extra_checks, warnings=tuple(notes))


def _node_hematocrit(network, result, h, inlet_h) -> np.ndarray:
    """Mixed hematocrit at each node: red cells in over blood through (0 where none flows)."""
    v = network.vessels
    n = len(network.nodes)
    q = result.vessel_flow_m3_s
    up = np.where(q >= 0, v.from_node, v.to_node)
    down = np.where(q >= 0, v.to_node, v.from_node)
    external = _boundary_inflow(network, result)
    red_in = np.bincount(down, np.abs(q) * h, minlength=n) + external * np.nan_to_num(inlet_h)
    blood_in = np.bincount(down, np.abs(q), minlength=n) + external
    through = np.maximum(blood_in, np.bincount(up, np.abs(q), minlength=n))
    out = np.zeros(n)
    np.divide(red_in, through, out=out, where=through > 0)
    return out


def _named(network, mask, limit=5) -> str:
    rows = np.flatnonzero(mask)
    names = ", ".join(f"'{network.vessels.ids[i]}'" for i in rows[:limit])
    return names + (f" and {rows.size - limit} more" if rows.size > limit else "")


def _range_warnings(network, diameter_m, h) -> list[str]:
    """Vessels outside the fitted ranges of the laws (REFERENCES 2, 10.16)."""
    blood = network.blood
    notes = []
    law = blood.viscosity_law
    if law in RELATIVE_LAWS:
        masks = out_of_range(law, diameter_m, np.clip(h, 0.0, 0.999))
        if masks["diameter_below"].any():
            notes.append(f"viscosity law {law}: {int(masks['diameter_below'].sum())} vessel(s) "
                         f"narrower than the fitted range (3.3-3.5 um diameter): "
                         f"{_named(network, masks['diameter_below'])}")
        if masks["diameter_above"].any():
            notes.append(f"viscosity law {law}: {int(masks['diameter_above'].sum())} vessel(s) "
                         f"wider than the fitted range (1978 um diameter): "
                         f"{_named(network, masks['diameter_above'])}")
        above = h > 0.9
        if above.any():
            notes.append(f"viscosity law {law}: {int(above.sum())} vessel(s) with discharge "
                         f"hematocrit above the fitted 0.9 (up to {h.max():.3g}): "
                         f"{_named(network, above)}")
        plasma = blood.plasma_viscosity_pa_s
        if not 0.5e-3 <= plasma <= 3e-3:
            notes.append(f"plasma viscosity {plasma * 1e3:g} mPa*s is outside 0.5-3 mPa*s "
                         "(plasma is about 1.2 mPa*s at 37 degC); check the unit")
    capped = h >= HEMATOCRIT_CAP
    if capped.any():
        notes.append(f"{int(capped.sum())} vessel(s) reached discharge hematocrit "
                     f"{HEMATOCRIT_CAP:g} or more (up to {h.max():.3g}) by phase separation, "
                     f"beyond red-cell packing; viscosity there was evaluated at "
                     f"{HEMATOCRIT_CAP:g}: {_named(network, capped)}")
    return notes
