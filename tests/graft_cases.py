"""Small networks and plan files for the graft tests (test helpers, not part of the library).

Units in the texts: the file defaults of SPEC section 1 (cm, mm, mmHg,
mL/min, mmHg*s/mL), written out where it matters.
"""

from pathlib import Path

from vesselnet.planfile import read_plan_text

MMHG = 133.322387415
OHM = MMHG / 1e-6          # 1 mmHg*s/mL in Pa*s/m^3 (1 ohm in spice_oracle.MACRO)
ML_S = 1e-6                # 1 mL/s in m^3/s (1 A in spice_oracle.MACRO)
MU = 3.5e-3                # Pa*s, the default blood viscosity (REFERENCES 8.7: 3.5 mPa*s nominal)

SERIES = """
vesselnet: 1
name: series
blood: {viscosity: 3.5 cP}
nodes:
  root: {pressure: 100 mmHg, position: [0, 0, 0]}
  j: {position: [30, 40, 0]}
  k: {position: [30, 60, 0]}
vessels:
  - {id: p, from: root, to: j, length: 50, radius: 3}
  - {id: d, from: j, to: k, length: 20, radius: 2.5}
beds:
  - {id: organ, node: k, resistance: 40, outflow_pressure: 0}
"""
"""root -p-> j -d-> k -> organ: p is healthy, d is where the condition puts a lesion."""

SHARED_TRUNK = """
vesselnet: 1
name: shared trunk
blood: {viscosity: 3.5 cP}
nodes:
  root: {pressure: 100 mmHg}
vessels:
  - {id: trunk, from: root, to: j, length: 20, radius: 2}
  - {id: side, from: j, to: s, length: 10, radius: 1.5}
  - {id: main, from: j, to: k, length: 20, radius: 2}
  - {id: own, from: root, to: m, length: 10, radius: 1.5}
beds:
  - {id: other, node: s, resistance: 30, outflow_pressure: 0}
  - {id: target, node: k, resistance: 30, outflow_pressure: 0}
  - {id: elsewhere, node: m, resistance: 30, outflow_pressure: 0}
"""
"""root -trunk-> j feeds both 'other' (through 'side') and 'target' (through 'main');
'elsewhere' has its own vessel from the fixed-pressure root."""


def plan_from(tmp_path: Path, network_text: str, plan_body: str, name: str = "plan.yaml"):
    """Write ``network_text`` as net.yaml beside a plan whose body follows the header; read it."""
    (tmp_path / "net.yaml").write_text(network_text)
    text = "vesselnet: 1\nnetwork: net.yaml\n" + plan_body
    (tmp_path / name).write_text(text)
    return read_plan_text(text, str(tmp_path / name), tmp_path)
