"""Monte Carlo over declared input uncertainties: percentile bands of shares and pressures.

An uncertainty file (our own format) lists what is uncertain and how::

    vesselnet: 1
    uncertainty:
      - {vessels: all, quantity: radius, distribution: lognormal, relative: 5%}
      - {tag: skin, quantity: radius, distribution: normal, relative: 10%, shared: true}
      - {beds: all, quantity: resistance, distribution: lognormal, relative: 20%}
      - {vessel: sfa_mid, quantity: stenosis, distribution: uniform, absolute: 10%}
    samples: 500
    seed: 20240611
    percentiles: [5, 50, 95]

Targets: ``vessel``, ``vessels`` (a list or ``all``), ``tag``, ``bed``,
``beds`` (a list or ``all``).  Quantities: ``radius`` (both ends of a taper
alike), ``length``, ``stenosis`` (diameter reduction of an existing lesion)
for vessels; ``resistance`` for beds.  Spread: ``relative`` (a fraction of
the nominal value) or ``absolute`` (in the quantity's unit).  ``normal``:
the spread is the standard deviation; ``lognormal`` (relative only): the
standard deviation of the logarithm, the median stays at the nominal value;
``uniform``: the half-width.  ``shared: true`` draws one value for all the
targeted items (a systemic change) instead of one each.

Sample ``i`` draws from ``numpy.random.default_rng`` seeded with the
``i``-th child of ``SeedSequence(seed)`` (``spawn_key=(i,)``), the entries in
file order; so a sample's numbers depend only on the seed and ``i``, never
on where or in which chunk it runs.

Examples
--------
>>> from vesselnet.model import Network
>>> from vesselnet.yamlread import load_text
>>> net = Network.build(nodes={"r": {"pressure_pa": 13332.2}},
...     vessels=[{"id": "a", "from": "r", "to": "j", "length_m": 0.1, "radius_m": 0.002},
...              {"id": "b", "from": "j", "to": "t", "length_m": 0.1, "radius_m": 0.001},
...              {"id": "c", "from": "j", "to": "u", "length_m": 0.1, "radius_m": 0.001}],
...     beds=[{"id": "x", "node": "t", "resistance_pa_s_m3": 1e9},
...           {"id": "y", "node": "u", "resistance_pa_s_m3": 1e9}])
>>> doc = load_text("vesselnet: 1\\nuncertainty:\\n"
...                 "  - {vessels: all, quantity: radius, distribution: lognormal, relative: 10%}\\n",
...                 "u.yaml")
>>> spec = read_uncertainty(doc, net, "u.yaml")
>>> mc = run_uncertainty(net, spec, samples=40, seed=8123)
>>> band = mc.band(mc.bed_share)
>>> band.shape, bool(band[0, 0] < 0.5 < band[2, 0])
((3, 2), True)
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from .engine import Execution, ProgressCallback, run_chunked
from .errors import NetworkSpecError, Problem
from .fields import FieldReader, near_miss
from .model import Network
from .reader import begin_file
from .result import SteadyResult
from .solve import solve

QUANTITIES = {"radius": "vessels", "length": "vessels", "stenosis": "vessels", "resistance": "beds"}
UNIT_KIND = {"radius": "radius", "length": "length", "stenosis": "fraction", "resistance": "resistance"}
DISTRIBUTIONS = ("normal", "lognormal", "uniform")
TARGET_KEYS = ("vessel", "vessels", "tag", "bed", "beds")
ENTRY_KEYS = TARGET_KEYS + ("quantity", "distribution", "relative", "absolute", "shared")
TOP_KEYS = ("vesselnet", "units", "uncertainty", "samples", "seed", "percentiles")
DEFAULT_PERCENTILES = (5.0, 50.0, 95.0)
DEFAULT_SAMPLES = 500
MAX_STENOSIS = 0.99
NODE_PRESSURE_LIMIT = 20_000_000
"""Largest samples x nodes for which every node's pressure is kept (160 MB)."""


@dataclass(frozen=True, eq=False)
class Uncertain:
    """One declared uncertainty: which items, which quantity, which distribution."""

    label: str
    section: str
    rows: np.ndarray
    quantity: str
    distribution: str
    relative: bool
    spread: float
    shared: bool
    where: tuple[str, int, int]
    spread_text: str = ""


@dataclass(frozen=True, eq=False)
class UncertaintySpec:
    """Everything an uncertainty file declares (rows resolved against one network)."""

    entries: tuple[Uncertain, ...]
    samples: int | None = None
    seed: int | None = None
    percentiles: tuple[float, ...] = DEFAULT_PERCENTILES


def load_uncertainty(path, network: Network) -> UncertaintySpec:
    """Read an uncertainty file for ``network``.

    Raises
    ------
    NetworkSpecError
        Every problem, located.
    """
    from .yamlread import load_file

    return read_uncertainty(load_file(path), network, str(path))


def read_uncertainty(doc, network: Network, file: str = "<input>") -> UncertaintySpec:
    """Build an :class:`UncertaintySpec` from a parsed document (see :mod:`vesselnet.yamlread`)."""
    fr = begin_file(doc, file, TOP_KEYS,
                    "start it with 'vesselnet: 1' and list 'uncertainty:'")
    items = fr.sequence(doc, "uncertainty", "uncertainty", required=True) or []
    entries = []
    for k, item in enumerate(items):
        label = f"uncertainty[{k}]"
        if not isinstance(item, dict):
            fr.add(items.where(k), label, "an entry must be a mapping like "
                   "{vessels: all, quantity: radius, distribution: normal, relative: 5%}")
            continue
        entry = _read_entry(fr, item, label, network)
        if entry is not None:
            entries.append(entry)
    samples = fr.integer(doc, "samples", "samples")
    if samples is not None and samples < 1:
        fr.add(doc.where("samples"), "samples", f"must be at least 1, got {samples}")
    seed = fr.integer(doc, "seed", "seed")
    if seed is not None and seed < 0:
        fr.add(doc.where("seed"), "seed", f"must be a whole number >= 0, got {seed}")
    percentiles = _read_percentiles(fr, doc)
    fr.raise_if_any()
    return UncertaintySpec(entries=tuple(entries), samples=samples, seed=seed, percentiles=percentiles)


def _read_entry(fr: FieldReader, item, label: str, network: Network) -> Uncertain | None:
    fr.allow(item, ENTRY_KEYS, label)
    where = (fr.file, *item.where("quantity"))
    targets = [k for k in TARGET_KEYS if k in item]
    if len(targets) != 1:
        fr.add((item.line, item.column), label,
               "give exactly one target: " + ", ".join(TARGET_KEYS) if targets else
               "missing a target", "for example 'vessels: all' or 'tag: skin'")
        return None
    quantity = fr.text(item, "quantity", label, required=True)
    if quantity is None:
        return None
    if quantity not in QUANTITIES:
        fr.add(item.where("quantity"), label, f"unknown quantity '{quantity}'",
               near_miss(quantity, QUANTITIES) or "use one of " + ", ".join(QUANTITIES))
        return None
    section = QUANTITIES[quantity]
    target = targets[0]
    if (target in ("bed", "beds")) != (section == "beds"):
        fr.add(item.where("quantity"), label,
               f"'{quantity}' is a {section[:-1]} quantity but the target is '{target}'",
               "beds take 'resistance'; vessels take radius, length or stenosis")
        return None
    rows = _target_rows(fr, item, target, label, network)
    if rows is None:
        return None
    if quantity == "stenosis":
        bare = rows[np.isnan(network.vessels.stenosis_reduction[rows])]
        if len(bare):
            fr.add(item.where(target), label, "stenosis uncertainty on vessels without a lesion: "
                   + ", ".join(f"'{network.vessels.ids[i]}'" for i in bare[:8]),
                   "give those vessels a 'stenosis:' in the network file, or target only lesions")
            return None
    distribution = fr.text(item, "distribution", label, required=True)
    if distribution not in DISTRIBUTIONS:
        if distribution is not None:
            fr.add(item.where("distribution"), label, f"unknown distribution '{distribution}'",
                   near_miss(distribution, DISTRIBUTIONS) or "use one of " + ", ".join(DISTRIBUTIONS))
        return None
    spreads = [k for k in ("relative", "absolute") if k in item]
    if len(spreads) != 1:
        fr.add((item.line, item.column), label,
               "give exactly one of 'relative' and 'absolute'" if spreads else "missing the spread",
               "for example 'relative: 5%' or 'absolute: 0.2 mm'")
        return None
    relative = spreads[0] == "relative"
    kind = "fraction" if relative else UNIT_KIND[quantity]
    spread = fr.quantity(item, spreads[0], kind, label, required=True, nonnegative=True)
    if not np.isfinite(spread):
        return None
    if distribution == "lognormal" and not relative:
        fr.add(item.where("absolute"), label, "a lognormal spread is relative",
               "write 'relative: 10%' (the standard deviation of the logarithm)")
        return None
    if distribution == "uniform" and relative and spread >= 1 and quantity != "stenosis":
        fr.add(item.where("relative"), label, f"a uniform relative half-width must be below 100 %, "
               f"got {spread:.0%}", "values would reach zero; use lognormal for wide spreads")
        return None
    shared = fr.flag(item, "shared", label)
    what = f"{quantity} of {_target_text(item, target)}"
    return Uncertain(label=f"{label} ({what})", section=section, rows=rows, quantity=quantity,
                     distribution=distribution, relative=relative, spread=float(spread),
                     shared=shared, where=where, spread_text=f"{spreads[0]} {item[spreads[0]]}")


def _target_text(item, target: str) -> str:
    value = item[target]
    if value == "all":
        return f"all {target}"
    if isinstance(value, list):
        return f"{len(value)} {target}"
    return f"{target} '{value}'"


def _target_rows(fr: FieldReader, item, target: str, label: str, network: Network):
    section = network.beds if target in ("bed", "beds") else network.vessels
    if target == "tag":
        tag = fr.text(item, "tag", label, required=True)
        rows = network.vessels.tags.get(tag) if tag is not None else None
        if rows is None:
            if tag is not None:
                fr.add(item.where("tag"), label, f"no vessel carries the tag '{tag}'",
                       near_miss(tag, network.vessels.tags) or "check the tags in the network file")
            return None
        return np.asarray(rows, dtype=np.int64)
    value = item[target]
    if target in ("vessels", "beds") and value == "all":
        return np.arange(len(section))
    names = value if isinstance(value, list) else [value]
    if target in ("vessels", "beds") and not isinstance(value, list):
        fr.add(item.where(target), label, f"'{target}' takes a list of ids or 'all'",
               f"write '{target[:-1]}: {value}' for one")
        return None
    rows = []
    for name in names:
        if str(name) not in section.index:
            fr.add(item.where(target), label, f"no {target.rstrip('s')} '{name}' in the network",
                   near_miss(name, section.ids) or "check the id")
            return None
        rows.append(section.index[str(name)])
    return np.array(sorted(set(rows)), dtype=np.int64)


def _read_percentiles(fr: FieldReader, doc) -> tuple[float, ...]:
    values = doc.get("percentiles")
    if values is None:
        return DEFAULT_PERCENTILES
    if not isinstance(values, list) or not values or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and 0 <= v <= 100 for v in values):
        fr.add(doc.where("percentiles"), "percentiles",
               "must be a list of numbers from 0 to 100, like [5, 50, 95]")
        return DEFAULT_PERCENTILES
    return tuple(sorted(float(v) for v in values))


def sample_rng(seed: int, index: int) -> np.random.Generator:
    """The generator of sample ``index``: the ``index``-th child of ``SeedSequence(seed)``.

    >>> a = sample_rng(77, 3).random()
    >>> b = np.random.default_rng(np.random.SeedSequence(77).spawn(4)[3]).random()
    >>> a == b
    True
    """
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index,)))


def sample_network(network: Network, spec: UncertaintySpec, seed: int, index: int) -> Network:
    """Sample ``index`` of the uncertain network (deterministic in ``seed`` and ``index``).

    Raises
    ------
    NetworkSpecError
        A draw gave a radius, length or resistance <= 0 (the spread is too
        wide for its distribution); stenosis draws are clipped to 0-99 %.
    """
    rng = sample_rng(seed, index)
    v, beds = network.vessels, network.beds
    columns = {"radius_in_m": v.radius_in_m.copy(), "radius_out_m": v.radius_out_m.copy(),
               "length_m": v.length_m.copy(), "stenosis_reduction": v.stenosis_reduction.copy(),
               "resistance_pa_s_m3": beds.resistance_pa_s_m3.copy()}
    for entry in spec.entries:
        k = 1 if entry.shared else len(entry.rows)
        draw = rng.random(k) * 2 - 1 if entry.distribution == "uniform" else rng.standard_normal(k)
        keys = {"radius": ("radius_in_m", "radius_out_m"), "length": ("length_m",),
                "stenosis": ("stenosis_reduction",), "resistance": ("resistance_pa_s_m3",)}[entry.quantity]
        for key in keys:
            column = columns[key]
            nominal = column[entry.rows]
            if entry.distribution == "lognormal":
                column[entry.rows] = nominal * np.exp(entry.spread * draw)
            elif entry.relative:
                column[entry.rows] = nominal * (1.0 + entry.spread * draw)
            else:
                column[entry.rows] = nominal + entry.spread * draw
            if entry.quantity == "stenosis":
                column[entry.rows] = np.clip(column[entry.rows], 0.0, MAX_STENOSIS)
            elif not (column[entry.rows] > 0).all():
                bad = entry.rows[np.flatnonzero(~(column[entry.rows] > 0))[0]]
                item = (beds if entry.section == "beds" else v).ids[bad]
                file, line, col = entry.where
                raise NetworkSpecError([Problem(
                    file, line, col, entry.label,
                    f"sample {index} drew a {entry.quantity} <= 0 for '{item}' "
                    f"({entry.distribution}, {entry.spread_text})",
                    "the spread is too wide for this distribution: narrow it or use lognormal")])
    new_v = dataclasses.replace(v, **{k: columns[k] for k in ("radius_in_m", "radius_out_m",
                                                                "length_m", "stenosis_reduction")})
    new_b = dataclasses.replace(beds, resistance_pa_s_m3=columns["resistance_pa_s_m3"])
    return dataclasses.replace(network, vessels=new_v, beds=new_b)


class MonteCarloTask:
    """Samples ``start .. stop-1`` of a Monte Carlo run (a task for :mod:`vesselnet.engine`).

    The network and specification travel to each worker once; the prepared
    solver (structure and ordering) is built there on first use and reused
    for every later sample.
    """

    def __init__(self, network: Network, spec: UncertaintySpec, seed: int, keep_nodes: bool):
        self.network, self.spec, self.seed, self.keep_nodes = network, spec, seed, keep_nodes
        self._solver = None

    def __getstate__(self):
        state = dict(self.__dict__)
        state["_solver"] = None
        return state

    def solver(self):
        """The prepared solver for this topology (built once per process)."""
        if self._solver is None:
            from .sampling import PreparedSolver

            self._solver = PreparedSolver(self.network)
        return self._solver

    def run_chunk(self, start: int, stop: int) -> dict[str, np.ndarray]:
        """Bed shares, flows and pressures (and node pressures) of samples start..stop-1."""
        solver = self.solver()
        out: dict[str, list] = {"bed_share": [], "bed_flow_m3_s": [], "bed_pressure_pa": [],
                                "inflow_m3_s": []}
        if self.keep_nodes:
            out["node_pressure_pa"] = []
        for i in range(start, stop):
            result = solver.solve(sample_network(self.network, self.spec, self.seed, i))
            out["bed_share"].append(result.bed_share)
            out["bed_flow_m3_s"].append(result.bed_flow_m3_s)
            out["bed_pressure_pa"].append(result.bed_pressure_pa)
            out["inflow_m3_s"].append(result.inflow_m3_s)
            if self.keep_nodes:
                out["node_pressure_pa"].append(result.pressure_pa)
        return {k: np.array(v, dtype=float) for k, v in out.items()}


@dataclass(frozen=True, eq=False)
class UncertaintyResult:
    """The samples of a Monte Carlo run and their percentile bands.

    Attributes
    ----------
    network : Network
        The nominal network.
    spec : UncertaintySpec
    seed : int
    execution : str
        Where it ran (for the record; the numbers do not depend on it).
    nominal : SteadyResult
        The solution without any perturbation.
    bed_share, bed_flow_m3_s, bed_pressure_pa : ndarray, shape (n_samples, n_beds)
    inflow_m3_s : ndarray, shape (n_samples,)
    node_pressure_pa : ndarray, shape (n_samples, n_nodes), or None
        Kept when samples x nodes is at most :data:`NODE_PRESSURE_LIMIT`.
    percentiles : tuple of float
    """

    network: Network
    spec: UncertaintySpec
    seed: int
    execution: str
    nominal: SteadyResult
    bed_share: np.ndarray
    bed_flow_m3_s: np.ndarray
    bed_pressure_pa: np.ndarray
    inflow_m3_s: np.ndarray
    node_pressure_pa: np.ndarray | None
    percentiles: tuple[float, ...]

    @property
    def samples(self) -> int:
        """Number of samples."""
        return len(self.inflow_m3_s)

    def band(self, values: np.ndarray) -> np.ndarray:
        """Percentiles over samples (axis 0): shape (len(percentiles), ...)."""
        return np.percentile(values, self.percentiles, axis=0)

    def bed_bands(self) -> dict[str, np.ndarray]:
        """Per-bed columns: nominal share and pressure and their percentiles (SI)."""
        table: dict[str, np.ndarray] = {"id": np.array(self.network.beds.ids, dtype=object),
                                        "share_nominal": self.nominal.bed_share}
        for p, row in zip(self.percentiles, self.band(self.bed_share)):
            table[f"share_p{p:g}"] = row
        table["pressure_nominal_pa"] = self.nominal.bed_pressure_pa
        for p, row in zip(self.percentiles, self.band(self.bed_pressure_pa)):
            table[f"pressure_p{p:g}_pa"] = row
        return table


def run_uncertainty(network: Network, spec: UncertaintySpec, *, samples: int | None = None,
                    seed: int | None = None, execution: Execution = Execution(),
                    chunk_size: int | None = None,
                    progress: ProgressCallback | None = None) -> UncertaintyResult:
    """Run the Monte Carlo: ``samples`` perturbed networks, solved, summarised.

    Parameters
    ----------
    network : Network
    spec : UncertaintySpec
    samples : int, optional
        Default: the file's ``samples``, else 500.
    seed : int, optional
        Default: the file's ``seed``; one of the two is required.
    execution : Execution
        In-process, local processes or a Dask cluster: same numbers.
    chunk_size : int, optional
    progress : callable, optional
        ``progress(done, samples)``.

    Returns
    -------
    UncertaintyResult

    Raises
    ------
    ValueError
        No seed given anywhere.
    NetworkSpecError
        A draw left a value out of range.
    SolveError
        A sample did not converge.
    """
    samples = samples or spec.samples or DEFAULT_SAMPLES
    seed = seed if seed is not None else spec.seed
    if seed is None:
        raise ValueError("a Monte Carlo run needs a seed (seed: in the file, or seed=...)")
    keep_nodes = samples * len(network.nodes) <= NODE_PRESSURE_LIMIT
    task = MonteCarloTask(network, spec, int(seed), keep_nodes)
    out = run_chunked(task, samples, execution=execution, chunk_size=chunk_size, progress=progress)
    return UncertaintyResult(network=network, spec=spec, seed=int(seed), execution=execution.describe(),
                             nominal=solve(network), bed_share=out["bed_share"],
                             bed_flow_m3_s=out["bed_flow_m3_s"], bed_pressure_pa=out["bed_pressure_pa"],
                             inflow_m3_s=out["inflow_m3_s"], node_pressure_pa=out.get("node_pressure_pa"),
                             percentiles=spec.percentiles)
