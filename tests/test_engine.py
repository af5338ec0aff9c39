"""The execution engine: chunks, order, and the same numbers in-process, on local processes
and on a Dask cluster (dask.distributed LocalCluster, started and shut down here), with no
process left behind.

References: the in-process run is the reference for the other two (bitwise equality:
every sample depends on the seed and its index only); the operating system's process table
(/proc) and multiprocessing.active_children() for leftover processes.
"""

import multiprocessing
import os
import time
from pathlib import Path

import numpy as np
import pytest

from vesselnet.demos import demo_path
from vesselnet.engine import Execution, chunks, default_chunk_size, run_chunked
from vesselnet.reader import load_network
from vesselnet.sweep import load_sweep, run_sweep
from vesselnet.uncertainty import load_uncertainty, run_uncertainty

SEED = 9_132_024


def test_chunks_cover_the_items_in_order():
    assert chunks(10, 4) == [(0, 4), (4, 8), (8, 10)]
    assert chunks(0, 3) == []
    assert default_chunk_size(7, Execution(workers=2)) == 1
    assert default_chunk_size(100_000, Execution(scheduler="tcp://x:1")) == 64


@pytest.mark.parametrize("workers,scheduler", [(0, None), (2, "tcp://127.0.0.1:8786")])
def test_execution_is_one_or_the_other(workers, scheduler):
    with pytest.raises(ValueError):
        Execution(workers=workers, scheduler=scheduler)


def children_of_this_process() -> dict[int, str]:
    """Live (not zombie) children of this process, from /proc: pid -> command line."""
    me = os.getpid()
    out = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            fields = stat[stat.rindex(")") + 2:].split()
            if int(fields[1]) == me and fields[0] != "Z":
                out[int(entry.name)] = (entry / "cmdline").read_bytes().replace(b"\0", b" ").decode()
        except (OSError, ValueError):
            continue
    return out


def left_behind(before: dict[int, str]) -> dict[int, str]:
    """New children except multiprocessing's resource tracker, the one helper Python keeps
    for the life of the interpreter once any spawn-started process has run."""
    return {pid: cmd for pid, cmd in children_of_this_process().items()
            if pid not in before and "resource_tracker" not in cmd}


def wait_until_gone(before, seconds=20.0) -> dict[int, str]:
    deadline = time.monotonic() + seconds
    while True:
        multiprocessing.active_children()          # reaps finished children
        rest = left_behind(before)
        if not rest or time.monotonic() > deadline:
            return rest
        time.sleep(0.2)


def test_dask_local_cluster_gives_identical_numbers_and_leaves_nothing_behind():
    distributed = __import__("distributed")
    net = load_network(demo_path("leg"))
    spec = load_uncertainty(demo_path("leg_uncertainty"), net)
    here = run_uncertainty(net, spec, samples=48, seed=SEED)
    before = children_of_this_process()
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=None, silence_logs=40)
    try:
        assert len(cluster.workers) == 2
        there = run_uncertainty(net, spec, samples=48, seed=SEED, chunk_size=5,
                                execution=Execution(scheduler=cluster.scheduler_address))
    finally:
        cluster.close()
    for key in ("bed_share", "bed_flow_m3_s", "bed_pressure_pa", "inflow_m3_s", "node_pressure_pa"):
        np.testing.assert_array_equal(getattr(here, key), getattr(there, key))
    assert there.execution.startswith("Dask cluster at tcp://")
    assert wait_until_gone(before) == {}
    assert multiprocessing.active_children() == []


def test_process_pool_leaves_nothing_behind_and_sweeps_agree():
    spec = load_sweep(demo_path("leg_lesion_grid"))
    here = run_sweep(spec)
    before = children_of_this_process()
    there = run_sweep(spec, execution=Execution(workers=2), chunk_size=4)
    np.testing.assert_array_equal(here.bed_share, there.bed_share)
    np.testing.assert_array_equal(here.inflow_m3_s, there.inflow_m3_s)
    assert wait_until_gone(before) == {}


class Squares:
    """A picklable task (module level) whose item i is i^2."""

    def run_chunk(self, start, stop):
        return {"value": np.arange(start, stop) ** 2, "label": np.array([f"#{i}" for i in range(start, stop)],
                                                                        dtype=object)}


def test_results_come_back_in_item_order_from_processes():
    out = run_chunked(Squares(), 23, execution=Execution(workers=2), chunk_size=3,
                      progress=lambda done, total: None)
    np.testing.assert_array_equal(out["value"], np.arange(23) ** 2)
    assert list(out["label"][:3]) == ["#0", "#1", "#2"]


def test_unreachable_scheduler_is_an_input_error(monkeypatch, capsys):
    import socket

    import vesselnet.engine
    from vesselnet.cli import main

    with socket.socket() as probe:               # a port nobody listens on
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    monkeypatch.setattr(vesselnet.engine, "SCHEDULER_TIMEOUT_S", 1.0)
    assert main(["uncertainty", str(demo_path("collateral")), str(demo_path("leg_uncertainty")),
                 "--samples", "2", "--scheduler", f"tcp://127.0.0.1:{port}"]) == 2
    assert "cannot reach a Dask scheduler" in capsys.readouterr().err
