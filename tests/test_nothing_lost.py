"""Nothing lost, nothing half-written, nothing run by a spreadsheet, same bytes every time.

References: atomic replacement by rename is POSIX ``rename(2)`` semantics
(``os.replace``); the cells a spreadsheet runs as formulas are those
starting with =, +, -, @, tab or carriage return (OWASP, "CSV Injection",
common practice).
"""

import csv
import io
import json
import os
import subprocess
import sys
import types

import pytest

from vesselnet import writers
from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.interrupts import Interrupted, run_keeping_finished
from vesselnet.reader import read_network_text
from vesselnet.solve import solve


class HalfWriter(io.StringIO):
    """A file that takes half of what it is given, then fails like a full disk or Ctrl-C."""

    def __init__(self, target, error):
        super().__init__()
        self.target, self.error = target, error

    def write(self, text):
        self.target.write(text[: len(text) // 2])
        self.target.flush()
        raise self.error

    def __exit__(self, *exc):
        self.target.close()
        return False


def failing_os(error, after=0):
    """A stand-in for the ``os`` module in writers whose fdopen fails after ``after`` good files."""
    opened = []

    def fdopen(handle, *args, **kwargs):
        real = os.fdopen(handle, *args, **kwargs)
        opened.append(handle)
        return real if len(opened) <= after else HalfWriter(real, error)

    names = {k: getattr(os, k) for k in dir(os) if not k.startswith("__") and k != "fdopen"}
    return types.SimpleNamespace(**names, fdopen=fdopen)


@pytest.mark.parametrize("error", [OSError(28, "No space left on device"), KeyboardInterrupt()],
                         ids=["disk full", "interrupt"])
def test_failed_write_keeps_old_content_and_leaves_no_temporary(error, tmp_path, monkeypatch):
    target = tmp_path / "result.json"
    target.write_text("old content\n")
    monkeypatch.setattr(writers, "os", failing_os(error))
    with pytest.raises(type(error)):
        writers.atomic_write(target, "new content that will not arrive\n" * 100)
    assert target.read_text() == "old content\n"
    assert [p.name for p in tmp_path.iterdir()] == ["result.json"]


def test_failed_write_of_a_new_file_leaves_nothing(tmp_path, monkeypatch):
    monkeypatch.setattr(writers, "os", failing_os(KeyboardInterrupt()))
    with pytest.raises(KeyboardInterrupt):
        writers.atomic_write(tmp_path / "new.csv", "id\nx\n")
    assert list(tmp_path.iterdir()) == []


def test_tables_change_together_or_not_at_all(tmp_path, monkeypatch):
    """Interrupted while writing the third table: none of the three old tables changed."""
    result = solve(read_network_text(TINY, "tiny.yaml"))
    for name in ("nodes.csv", "vessels.csv", "beds.csv"):
        (tmp_path / name).write_text(f"old {name}\n")
    monkeypatch.setattr(writers, "os", failing_os(KeyboardInterrupt(), after=2))
    with pytest.raises(KeyboardInterrupt):
        writers.write_tables(result, tmp_path)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["beds.csv", "nodes.csv", "vessels.csv"]
    for name in ("nodes.csv", "vessels.csv", "beds.csv"):
        assert (tmp_path / name).read_text() == f"old {name}\n"


def test_tables_are_written_through_the_atomic_writer(tmp_path, monkeypatch):
    """solve -o DIR writes each table through atomic_write_many, never straight into place."""
    calls = []
    real = writers.atomic_write_many
    monkeypatch.setattr(writers, "atomic_write_many", lambda texts: (calls.append(sorted(
        os.path.basename(p) for p in texts)), real(texts)))
    (tmp_path / "tiny.yaml").write_text(TINY)
    assert main(["solve", str(tmp_path / "tiny.yaml"), "-o", str(tmp_path / "out")]) == 0
    assert calls == [["beds.csv", "nodes.csv", "vessels.csv"]]


def test_interrupt_during_solve_output_exits_130_and_leaves_no_partial_file(tmp_path, monkeypatch, capsys):
    (tmp_path / "tiny.yaml").write_text(TINY)
    out = tmp_path / "out"
    out.mkdir()
    monkeypatch.setattr(writers, "os", failing_os(KeyboardInterrupt(), after=1))
    assert main(["solve", str(tmp_path / "tiny.yaml"), "-o", str(out)]) == 130
    assert "interrupted" in capsys.readouterr().err
    assert list(out.iterdir()) == []


def test_new_files_get_the_usual_permissions(tmp_path):
    """A temporary file is private (0600); the written result must not stay so."""
    mask = os.umask(0)
    os.umask(mask)
    writers.atomic_write(tmp_path / "a.csv", "id\n")
    assert (tmp_path / "a.csv").stat().st_mode & 0o777 == 0o666 & ~mask
    (tmp_path / "b.csv").write_text("old")
    os.chmod(tmp_path / "b.csv", 0o640)
    writers.atomic_write(tmp_path / "b.csv", "id\n")
    assert (tmp_path / "b.csv").stat().st_mode & 0o777 == 0o640


@pytest.mark.parametrize("where", ["a file", "inside a file"])
def test_unwritable_output_path_is_a_clear_error(where, tmp_path, capsys):
    (tmp_path / "tiny.yaml").write_text(TINY)
    (tmp_path / "taken").write_text("x")
    out = tmp_path / "taken" if where == "a file" else tmp_path / "taken" / "sub"
    assert main(["solve", str(tmp_path / "tiny.yaml"), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "check the path" in err and "internal error" not in err


# ------------------------------------------------------------- spreadsheet safety

HOSTILE = ['=HYPERLINK("http://example.invalid","x")', "+1", "-x", "@SUM(A1)"]
TINY = """vesselnet: 1
nodes:
  root: {pressure: 100}
vessels:
  - {id: a, from: root, to: tip, length: 10, radius: 2}
beds:
  - {id: organ, node: tip, resistance: 10}
"""


def hostile_network():
    """Vessel, node and bed ids that a spreadsheet would run as formulas."""
    nodes = ['"=1+2"', '"+root"', '"-j"', '"@tip"']
    lines = ["vesselnet: 1", "nodes:", f"  {nodes[1]}: {{pressure: 100}}", "vessels:"]
    ends = [nodes[1], nodes[2], nodes[3]]
    for k, vid in enumerate(HOSTILE[:2]):
        lines.append(f"  - {{id: {json.dumps(vid)}, from: {ends[k]}, to: {ends[k + 1]}, length: 10, radius: 2}}")
    lines.append(f"  - {{id: {json.dumps(HOSTILE[2])}, from: {nodes[2]}, to: {nodes[0]}, length: 5, radius: 1}}")
    lines += ["beds:", f"  - {{id: {json.dumps(HOSTILE[3])}, node: {nodes[3]}, resistance: 10}}",
              f"  - {{id: plain, node: {nodes[0]}, resistance: 20}}"]
    return "\n".join(lines) + "\n"


def test_csv_outputs_neutralise_formula_cells(tmp_path):
    (tmp_path / "net.yaml").write_text(hostile_network())
    assert main(["solve", str(tmp_path / "net.yaml"), "-o", str(tmp_path / "out")]) == 0
    text_cells = []
    for name, columns in (("vessels.csv", 3), ("nodes.csv", 1), ("beds.csv", 2)):
        with open(tmp_path / "out" / name, newline="", encoding="utf-8") as handle:
            rows = list(csv.reader(handle))
        for row in rows[1:]:
            text_cells += row[:columns]
            assert all(not formula(cell) or is_number(cell) for cell in row[columns:])
    assert text_cells and not any(formula(cell) for cell in text_cells)
    assert "'=HYPERLINK(\"http://example.invalid\",\"x\")" in text_cells and "'+1" in text_cells


def formula(cell):
    return cell[:1] in ("=", "+", "-", "@", "\t", "\r")


def is_number(cell):
    try:
        float(cell)
        return True
    except ValueError:
        return False


def test_json_keeps_ids_as_given(tmp_path, capsys):
    """JSON is not opened by spreadsheets: ids stay exactly as in the input."""
    (tmp_path / "net.yaml").write_text(hostile_network())
    assert main(["solve", str(tmp_path / "net.yaml"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert [v["id"] for v in doc["vessels"]] == HOSTILE[:3]


def test_compare_tables_neutralise_scenario_names(tmp_path):
    (tmp_path / "tiny.yaml").write_text(TINY)
    (tmp_path / "scen.yaml").write_text(
        "vesselnet: 1\nnetwork: tiny.yaml\nscenarios:\n"
        "  - {name: \"=cmd|' /C calc'!A0\", changes: [{scale_bed: {bed: organ, factor: 2}}]}\n")
    assert main(["compare", str(tmp_path / "scen.yaml"), "-o", str(tmp_path / "out")]) == 0
    with open(tmp_path / "out" / "beds.csv", newline="", encoding="utf-8") as handle:
        assert "'=cmd|' /C calc'!A0" in [cell for row in csv.reader(handle) for cell in row]
    for path in (tmp_path / "out").glob("*.csv"):
        with open(path, newline="", encoding="utf-8") as handle:
            for row in csv.reader(handle):
                assert all(not formula(cell) or is_number(cell) for cell in row), row


# ------------------------------------------------------------- an interrupted long run

def test_interrupted_run_keeps_finished_results_and_says_how_far(tmp_path, monkeypatch, capsys):
    """The contract of vesselnet.interrupts, end to end: a run of 8 scenario solves is
    interrupted during the sixth; the five finished are written (atomically, marked partial)
    and the command line says how far it got, with exit status 130."""
    network = read_network_text(TINY, "tiny.yaml")

    def work(k):
        if k == 5:
            raise KeyboardInterrupt
        return solve(network).bed_flow_m3_s[0] * (k + 1)

    def run(args):
        done = run_keeping_finished(range(8), work)
        path = tmp_path / ("flows.partial.csv" if not done.complete else "flows.csv")
        writers.atomic_write(path, "k,flow\n" + "".join(f"{k},{q!r}\n" for k, q in enumerate(done.results)))
        if not done.complete:
            raise Interrupted(done.done, 8, "scenarios", kept=[path])
        return 0

    import vesselnet.cli.solve as solve_command
    monkeypatch.setattr(solve_command, "run", run)
    assert main(["solve", "ignored.yaml"]) == 130
    err = capsys.readouterr().err
    assert f"interrupted after 5 of 8 scenarios; the finished results are in {tmp_path / 'flows.partial.csv'}" in err
    assert (tmp_path / "flows.partial.csv").read_text().count("\n") == 6
    assert sorted(p.name for p in tmp_path.iterdir()) == ["flows.partial.csv"]


def test_interrupt_before_anything_finished():
    assert "nothing was finished" in str(Interrupted(0, 8, "samples"))
    assert isinstance(Interrupted(1, 2), KeyboardInterrupt)


# ------------------------------------------------------------- determinism

TAGGED = """vesselnet: 1
name: Déterminisme
nodes:
  root: {pressure: 100}
vessels:
  - {id: trunk, from: root, to: j, length: 10, radius: 3, tags: [zeta, alpha, mid]}
  - {id: ünïcode, from: j, to: t1, length: 10, radius: 2, tags: [mid]}
  - {id: b, from: j, to: t2, length: 10, radius: 2, stenosis: {reduction: 60%, length: 1}}
  - {id: loop, from: t1, to: t2, length: 10, radius: 0.5}
beds:
  - {id: organ2, node: t2, resistance: 30}
  - {id: organ1, node: t1, resistance: 40}
"""


def run_twice(args, cwd, seeds=("0", "4242")):
    outputs = []
    for seed in seeds:
        env = dict(os.environ, PYTHONHASHSEED=seed)
        done = subprocess.run([sys.executable, "-m", "vesselnet", *args(seed)], capture_output=True,
                              cwd=cwd, env=env, check=True)
        outputs.append(done.stdout)
    return outputs


@pytest.mark.parametrize("network", ["tagged", "whole_body"])
def test_same_input_same_json_bytes_under_any_hash_seed(network, tmp_path):
    """Two processes with different string hashing (PYTHONHASHSEED) print identical bytes."""
    path = tmp_path / "net.yaml"
    path.write_text(TAGGED) if network == "tagged" else path.write_bytes(demo_path(network).read_bytes())
    first, second = run_twice(lambda seed: ["solve", str(path), "--json"], tmp_path)
    assert first == second and first.startswith(b"{")


def test_same_input_same_table_bytes_under_any_hash_seed(tmp_path):
    path = tmp_path / "net.yaml"
    path.write_text(TAGGED)
    run_twice(lambda seed: ["solve", str(path), "-o", str(tmp_path / f"out{seed}")], tmp_path)
    for name in ("nodes.csv", "vessels.csv", "beds.csv"):
        assert (tmp_path / "out0" / name).read_bytes() == (tmp_path / "out4242" / name).read_bytes()


def test_same_scenarios_same_compare_bytes(tmp_path):
    first, second = run_twice(lambda seed: ["compare", str(demo_path("collateral_steal")), "--json"],
                              tmp_path)
    assert first == second and json.loads(first)["scenarios"]


def test_float_formatting_is_fixed():
    """Ten significant digits, shortest repr of that, no exponent surprises across runs."""
    assert writers.dumps({"x": writers.number(0.1 + 0.2), "y": writers.number(1 / 3),
                          "z": writers.number(6.02214076e23)}) == \
        '{"x": 0.3, "y": 0.3333333333, "z": 6.02214076e+23}\n'
