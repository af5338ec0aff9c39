"""The command line: outputs, exit codes, CSV tables that read back."""

import csv
import subprocess
import sys

import numpy as np
import pytest

from vesselnet.cli import main
from vesselnet.csvtables import read_table
from vesselnet.demos import demo_path
from vesselnet.reader import load_network
from vesselnet.solve import solve


def test_help_lists_commands(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["--help"])
    assert stop.value.code == 0
    out = capsys.readouterr().out
    for command in ("demo", "check", "solve"):
        assert command in out


def test_check_reports_a_valid_network(capsys):
    assert main(["check", str(demo_path("leg"))]) == 0
    assert "valid network" in capsys.readouterr().out


def test_solve_writes_csv_tables_with_units(tmp_path, capsys):
    out = tmp_path / "tables"
    assert main(["solve", str(demo_path("leg")), "-o", str(out)]) == 0
    assert {p.name for p in out.iterdir()} == {"nodes.csv", "vessels.csv", "beds.csv"}
    with open(out / "vessels.csv") as handle:
        header = next(csv.reader(handle))
    assert header[:3] == ["id", "from", "to"] and "flow[mL/min]" in header and "wss[Pa]" in header
    result = solve(load_network(demo_path("leg")))
    with open(out / "beds.csv") as handle:
        rows = list(csv.DictReader(handle))
    np.testing.assert_allclose([float(r["flow[mL/min]"]) for r in rows], result.bed_flow_m3_s * 6e7, rtol=1e-9)
    nodes = read_table(out / "nodes.csv", "nodes", {})
    assert not nodes.problems  # the output table reads back as an input table
    np.testing.assert_allclose(nodes.columns["pressure_pa"], result.pressure_pa, rtol=1e-9)


def test_solve_json_prints_only_json(capsys):
    assert main(["solve", str(demo_path("collateral")), "--json"]) == 0
    out = capsys.readouterr().out
    assert out.lstrip().startswith("{") and out.rstrip().endswith("}")


def test_same_input_same_bytes(tmp_path):
    """Determinism: two runs give identical output bytes."""
    runs = [subprocess.run([sys.executable, "-m", "vesselnet", "solve", str(demo_path("whole_body")), "--json"],
                           capture_output=True, cwd=tmp_path, check=True).stdout for _ in range(2)]
    assert runs[0] == runs[1]


def test_console_script_runs_demo(tmp_path):
    """`python -m vesselnet demo` from an unrelated folder (installed package data)."""
    run = subprocess.run([sys.executable, "-m", "vesselnet", "demo"], capture_output=True, text=True, cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert "whole_body.yaml" in run.stdout


def test_written_files_get_the_usual_permissions(tmp_path):
    """Atomic writes go through mkstemp (mode 0600); the final file follows the umask instead."""
    import os

    from vesselnet.writers import atomic_write
    old = os.umask(0o022)
    try:
        atomic_write(tmp_path / "x.txt", "hello")
    finally:
        os.umask(old)
    assert (tmp_path / "x.txt").stat().st_mode & 0o777 == 0o644
    assert [p.name for p in tmp_path.iterdir()] == ["x.txt"]


def test_large_network_report_shows_the_first_rows_and_says_how_many_more(capsys):
    """A 4000-vessel network: the terminal report lists 40 rows a table, beds by largest
    share (checked against numpy's sort of the result), and the count of the rest."""
    from vesselnet.synthetic import synthetic_network
    from vesselnet.textreport import MAX_ROWS, solve_report

    net = synthetic_network(4000, "local", seed=9091)
    result = solve(net)
    text = solve_report(result)
    assert len(text.splitlines()) < 4 * MAX_ROWS + 40
    assert f"... {len(net.vessels) - MAX_ROWS} more" in text
    assert f"... {len(net.beds) - MAX_ROWS} more" in text
    assert f"... {len(net.nodes) - MAX_ROWS} more" in text
    beds_part = text.split("Beds (largest share first)")[1].splitlines()
    top = int(np.argmax(result.bed_share))
    assert beds_part[3].split()[0] == net.beds.ids[top]
    assert float(beds_part[3].split()[2]) == pytest.approx(100 * result.bed_share[top], abs=0.06)


def test_solve_writes_binary_results(tmp_path, capsys):
    """``solve FILE -o OUT.npz``: every result column in SI, equal to the library's."""
    out = tmp_path / "results.npz"
    assert main(["solve", str(demo_path("leg")), "-o", str(out)]) == 0
    assert str(out) in capsys.readouterr().out
    result = solve(load_network(demo_path("leg")))
    with np.load(out) as data:
        np.testing.assert_array_equal(data["vessel_flow_m3_s"], result.vessel_flow_m3_s)
        np.testing.assert_array_equal(data["bed_share"], result.bed_share)
        assert tuple(data["bed_id"].astype(str)) == result.network.beds.ids
