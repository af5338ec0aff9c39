"""Scenario files (SPEC section 3): a network and named lists of changes.

```yaml
vesselnet: 1
network: leg.yaml            # relative to this file
units: {length: cm}          # optional: defaults for the numbers below (SPEC section 1)
scenarios:
  - name: 75% stenosis mid thigh
    changes:
      - narrow: {vessel: sfa, reduction: 75%, length: 3}
```

Numbers in a scenario file are read in its own ``units:`` (or the SPEC
defaults), not in those of the network file.

Examples
--------
>>> from vesselnet.demos import demo_path
>>> scenarios = load_scenarios(demo_path("collateral_steal"))
>>> scenarios.network.name, scenarios.scenarios[0].changes[0].verb
('Collateral loop with steal, invented demo', 'occlude')
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from . import yamlread
from .changefile import Change, apply_changes, read_changes
from .errors import NetworkSpecError
from .model import Network
from .reader import begin_file, load_network

TOP_KEYS = ("vesselnet", "name", "description", "units", "network", "scenarios")
SCENARIO_KEYS = ("name", "description", "changes")


@dataclass(frozen=True)
class Scenario:
    """A named list of changes to the base network."""

    name: str
    changes: tuple[Change, ...]
    description: str = ""


@dataclass(frozen=True, eq=False)
class ScenarioFile:
    """A scenario file: its base network and scenarios, in file order."""

    source: str
    name: str
    network: Network
    scenarios: tuple[Scenario, ...]

    def networks(self, baseline_bed_flow_m3_s=None) -> list[Network]:
        """Every scenario's network (the changes applied), all problems reported together.

        Parameters
        ----------
        baseline_bed_flow_m3_s : ndarray, optional
            Baseline bed flows, for autoregulation targets (see
            :func:`vesselnet.changefile.apply_changes`).

        Raises
        ------
        NetworkSpecError
            With the problems of every scenario whose changes cannot be made.
        """
        out, problems = [], []
        for scenario in self.scenarios:
            try:
                out.append(apply_changes(self.network, scenario.changes,
                                         baseline_bed_flow_m3_s=baseline_bed_flow_m3_s))
            except NetworkSpecError as exc:
                problems.extend(exc.problems)
        if problems:
            raise NetworkSpecError(problems)
        return out


def load_scenarios(path) -> ScenarioFile:
    """Read a scenario file and the network it names.

    Raises
    ------
    NetworkSpecError
        Every problem of the scenario file (located), or those of the network file.
    """
    path = Path(path)
    return read_scenarios(yamlread.load_file(path), str(path), path.parent)


def read_scenarios_text(text: str, file: str = "<input>", base_dir=".") -> ScenarioFile:
    """Like :func:`load_scenarios`, from YAML text (the network path is relative to ``base_dir``)."""
    return read_scenarios(yamlread.load_text(text, file), file, Path(base_dir))


def read_scenarios(doc, file: str, base_dir: Path) -> ScenarioFile:
    """A scenario file from a parsed document (see :mod:`vesselnet.yamlread`)."""
    fr = begin_file(doc, file, TOP_KEYS,
                    "start it with 'vesselnet: 1', 'network:' and 'scenarios:'")
    network_path = fr.text(doc, "network", "network", required=True)
    scenarios, readable, names = [], [], {}
    items = fr.sequence(doc, "scenarios", "scenarios", required=True)
    for i, item in enumerate(items or ()):
        label = f"scenarios[{i}]"
        if not isinstance(item, dict):
            fr.add(items.where(i), label, "a scenario must be a mapping with 'name' and 'changes'")
            continue
        name = fr.text(item, "name", label, default=f"scenario {i + 1}")
        label = f"scenarios[{i}] '{name}'"
        fr.allow(item, SCENARIO_KEYS, label)
        if name in names:
            fr.add(item.where("name"), label, f"duplicate scenario name (also scenarios[{names[name]}])",
                   "give each scenario its own name")
        names.setdefault(name, i)
        before = len(fr.problems)
        changes = read_changes(fr, item, "changes", label + " changes", required=False)
        scenario = Scenario(name, tuple(changes), fr.text(item, "description", label, default=""))
        scenarios.append(scenario)
        if len(fr.problems) == before:
            readable.append(scenario)
    if items is not None and not items:
        fr.add(doc.where("scenarios"), "scenarios", "the file lists no scenarios", "add at least one")
    if network_path:
        target = base_dir / network_path
        if not target.is_file():
            fr.add(doc.where("network"), "network", f"network file '{network_path}' not found "
                   f"(looked for {target})", "give the path relative to this scenario file")
    title = fr.text(doc, "name", "name", default=Path(file).stem) or Path(file).stem
    if not fr.problems or not network_path or not target.is_file():
        fr.raise_if_any()
        return ScenarioFile(source=file, name=title, network=load_network(target),
                            scenarios=tuple(scenarios))
    # report the id problems of the scenarios that did read together with the syntax problems
    problems = list(fr.problems)
    try:
        ScenarioFile(file, title, load_network(target), tuple(readable)).networks()
    except NetworkSpecError as exc:
        problems.extend(exc.problems)
    raise NetworkSpecError(sorted(problems, key=lambda p: (p.file != file, p.line, p.column)))


def check_scenario_file(path) -> str:
    """Validate a scenario file: read it and its network, make every scenario's changes.

    Returns
    -------
    str
        A one-line description of the valid file.

    Raises
    ------
    NetworkSpecError
        Every problem found, located.
    """
    scenarios = load_scenarios(path)
    networks = scenarios.networks()
    counts = ", ".join(f"'{s.name}' ({len(s.changes)} change{'s' if len(s.changes) != 1 else ''})"
                       for s in scenarios.scenarios[:6])
    more = f" and {len(networks) - 6} more" if len(networks) > 6 else ""
    return (f"{path}: valid scenario file '{scenarios.name}': {len(networks)} scenario(s) on network "
            f"'{scenarios.network.name}': {counts}{more}")
