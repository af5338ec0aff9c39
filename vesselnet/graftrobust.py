"""Does the best graft stay best under the inputs a planner is least sure of?

Each seeded sample perturbs, independently and uniformly:

* every candidate's graft radius by a factor in [0.9, 1.1] (both ends);
* every lesion's diameter reduction by -10 .. +10 percentage points,
  clipped to [0, 0.99] (occlusions stay occlusions);
* every bed's resistance by a factor in [0.8, 1.2] (an autoregulating bed's
  minimum resistance with it; the flow it holds is re-taken from the
  sample's healthy solve).

The bed and lesion factors are one patient's, shared by the healthy, the
diseased and every grafted network of the sample; each candidate draws its
own radius factor.  The healthy, diseased and grafted networks are
re-solved and the candidates re-ranked by the same score and tie rule as
the nominal ranking (:func:`vesselnet.grafts.rank_order`).  Draws follow
fixed orders (bed rows, lesions and candidates by id), so the result does
not depend on the order of the candidates in the plan.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> from vesselnet.planfile import load_plan
>>> plan = load_plan(demo_path("leg_graft_plan"))
>>> check = robustness_check(plan, top=plan.candidates[0].id, samples=4, seed=8675309)
>>> int(check.rank_counts.sum()), check.samples
(20, 4)
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass

import numpy as np

from .autoregulation import with_targets
from .errors import SolveError
from .grafts import STEAL_TOLERANCE, rank_order, restored_fraction
from .model import Network
from .planfile import Plan
from .solve import DEFAULT_MAX_ITERATIONS, DEFAULT_TOLERANCE, solve
from .writers import number

RADIUS_SPREAD = 0.10
"""Graft radius factor drawn from [1 - s, 1 + s]."""

LESION_SPREAD = 0.10
"""Lesion diameter reduction shifted by up to this much (10 percentage points)."""

BED_SPREAD = 0.20
"""Bed resistance factor drawn from [1 - s, 1 + s]."""

MAX_REDUCTION = 0.99
"""Perturbed diameter reductions are clipped to [0, MAX_REDUCTION]."""

SAMPLE_TOLERANCE = 1e-8
"""Sample solves converge to at least this fraction of the inflow: near a 99 % lesion the whole
inflow is tiny and the nodal imbalance can stall at the rounding floor just above the default
1e-10 of it; 1e-8 of the inflow is far below what a ranking can resolve (its ties are 5e-3)."""

PERTURBATIONS = (f"graft radius x U({1 - RADIUS_SPREAD:g}, {1 + RADIUS_SPREAD:g}) per candidate; lesion "
                 f"diameter reduction + U(-{100 * LESION_SPREAD:g}, +{100 * LESION_SPREAD:g}) points, "
                 f"clipped to [0, {MAX_REDUCTION:g}]; bed resistance x U({1 - BED_SPREAD:g}, "
                 f"{1 + BED_SPREAD:g}) per bed")
"""What each sample perturbs, printed with the result."""

_PIECE = re.compile(r"^(.*)\.\d+$")


@dataclass(frozen=True, eq=False)
class Robustness:
    """Ranks of the candidates over the seeded samples.

    Attributes
    ----------
    samples, seed : int
    top : str
        The nominal best candidate.
    ids : tuple of str
        Candidate ids, sorted; the rows of ``rank_counts``.
    rank_counts : ndarray of int, shape (n, n)
        ``rank_counts[i, k]``: samples in which ``ids[i]`` had rank ``k + 1``.
    failed : int
        Samples that could not be ranked (a solve failed, or no flow was lost).
    """

    samples: int
    seed: int
    top: str
    ids: tuple[str, ...]
    rank_counts: np.ndarray
    failed: int = 0
    perturbations: str = PERTURBATIONS

    @property
    def ranked(self) -> int:
        """Samples that were ranked."""
        return self.samples - self.failed

    @property
    def top_first(self) -> int:
        """Samples in which the nominal best was first (alone or tied)."""
        return int(self.rank_counts[self.ids.index(self.top), 0])

    @property
    def top_first_fraction(self) -> float:
        """Share of the ranked samples in which the nominal best was first."""
        return self.top_first / self.ranked if self.ranked else float("nan")

    @property
    def stays_on_top(self) -> bool:
        """True when the nominal best was first in every ranked sample."""
        return self.ranked > 0 and self.top_first == self.ranked

    def summary(self) -> str:
        """One line: how often the top candidate stays first."""
        text = (f"'{self.top}' stays first in {self.top_first} of {self.ranked} samples "
                f"({100 * self.top_first_fraction:.1f} %, seed {self.seed})")
        return text + (f"; {self.failed} sample(s) could not be ranked" if self.failed else "")

    def to_json(self) -> dict:
        """The ``robustness`` map of ``grafts --json``."""
        return {"samples": self.samples, "seed": self.seed, "perturbations": self.perturbations,
                "top": self.top, "top_first": self.top_first,
                "top_first_fraction": number(self.top_first_fraction), "stays_on_top": self.stays_on_top,
                "failed": self.failed,
                "rank_counts": {cid: [int(x) for x in row] for cid, row in zip(self.ids, self.rank_counts)}}


@dataclass(frozen=True, eq=False)
class _Prepared:
    """One network with the rows a sample perturbs."""

    network: Network
    lesion_rows: np.ndarray
    lesion_index: np.ndarray
    graft_row: int = -1


def _origin(vid: str, base_index) -> str:
    while vid not in base_index and _PIECE.match(vid):
        vid = _PIECE.match(vid).group(1)
    return vid


def _lesions(network: Network, base_index) -> tuple[np.ndarray, list[str]]:
    v = network.vessels
    rows = np.flatnonzero(~v.occluded & ~np.isnan(v.stenosis_reduction))
    return rows, [_origin(v.ids[r], base_index) for r in rows]


def _perturbed(prep: _Prepared, bed_factor, lesion_shift, radius_factor: float) -> Network:
    net = prep.network
    beds = dataclasses.replace(net.beds, resistance_pa_s_m3=net.beds.resistance_pa_s_m3 * bed_factor,
                               min_resistance_pa_s_m3=net.beds.min_resistance_pa_s_m3 * bed_factor)
    v = net.vessels
    columns = {}
    if len(prep.lesion_rows):
        reduction = np.array(v.stenosis_reduction, copy=True)
        reduction[prep.lesion_rows] = np.clip(reduction[prep.lesion_rows] + lesion_shift[prep.lesion_index],
                                              0.0, MAX_REDUCTION)
        columns["stenosis_reduction"] = reduction
    if prep.graft_row >= 0:
        for name in ("radius_in_m", "radius_out_m"):
            radius = np.array(getattr(v, name), copy=True)
            radius[prep.graft_row] *= radius_factor
            columns[name] = radius
    vessels = dataclasses.replace(v, **columns) if columns else v
    return dataclasses.replace(net, beds=beds, vessels=vessels)


def robustness_check(plan: Plan, *, top: str, samples: int, seed: int, solver=solve,
                     tolerance: float = DEFAULT_TOLERANCE,
                     max_iterations: int = DEFAULT_MAX_ITERATIONS) -> Robustness:
    """Re-rank ``plan``'s candidates over ``samples`` seeded perturbations (module docstring).

    Parameters
    ----------
    plan : Plan
    top : str
        Id of the nominal best candidate.
    samples : int
        Number of samples (>= 1).
    seed : int
        Seed of :func:`numpy.random.default_rng`.
    solver : callable
        As in :func:`vesselnet.grafts.rank_plan`.
    tolerance, max_iterations
        Of each Newton solve.

    Returns
    -------
    Robustness
        Samples whose solves fail (at :data:`SAMPLE_TOLERANCE` or ``tolerance``, the looser),
        or that lose no target flow, are counted in ``failed`` and left out of the fractions.
    """
    base_index = plan.network.vessels.index
    candidates = sorted(plan.candidates, key=lambda c: c.id)
    ids = tuple(c.id for c in candidates)
    networks = [plan.network, plan.diseased_network()] + [plan.grafted_network(c) for c in candidates]
    found = [_lesions(net, base_index) for net in networks]
    lesion_ids = sorted({oid for _, origins in found for oid in origins})
    where = {oid: k for k, oid in enumerate(lesion_ids)}
    prepared = [_Prepared(net, rows, np.array([where[o] for o in origins], dtype=np.int64),
                          net.vessels.index[ids[k - 2]] if k >= 2 else -1)
                for k, (net, (rows, origins)) in enumerate(zip(networks, found))]
    rows = plan.target_rows
    rng = np.random.default_rng(seed)
    counts = np.zeros((len(ids), len(ids)), dtype=np.int64)
    failed = 0
    options = {"tolerance": max(tolerance, SAMPLE_TOLERANCE), "max_iterations": max_iterations}
    n_beds = len(plan.network.beds)
    for _ in range(samples):
        bed_factor = rng.uniform(1 - BED_SPREAD, 1 + BED_SPREAD, n_beds)
        shift = rng.uniform(-LESION_SPREAD, LESION_SPREAD, len(lesion_ids))
        radius = rng.uniform(1 - RADIUS_SPREAD, 1 + RADIUS_SPREAD, len(ids))
        try:
            healthy = solver(_perturbed(prepared[0], bed_factor, shift, 1.0), **options)
            held = healthy.bed_flow_m3_s
            flows = [float(solver(with_targets(_perturbed(p, bed_factor, shift, radius[k - 2] if k >= 2 else 1.0),
                                              held), **options).bed_flow_m3_s[rows].sum())
                     for k, p in enumerate(prepared[1:], start=1)]
        except SolveError:
            failed += 1
            continue
        q_healthy, q_diseased = float(held[rows].sum()), flows[0]
        if not q_healthy - q_diseased > STEAL_TOLERANCE * healthy.inflow_m3_s:
            failed += 1
            continue
        scores = [restored_fraction(q, q_diseased, q_healthy) for q in flows[1:]]
        order, rank, _ = rank_order(ids, scores)
        counts[order, rank - 1] += 1
    return Robustness(samples, seed, top, ids, counts, failed)
