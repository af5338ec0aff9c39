"""An interrupted sweep keeps its finished results and says how far it got.

Ctrl-C is simulated by raising KeyboardInterrupt where the signal would
land (inside a chunk of work, or while the main process waits for workers).
The reference for the kept rows is the same sweep run to the end.
"""

import concurrent.futures
import csv
import json

import numpy as np
import pytest

from vesselnet import engine
from vesselnet.cli import main
from vesselnet.demos import demo_path
from vesselnet.engine import Execution, run_chunked
from vesselnet.interrupts import Interrupted
from vesselnet.sweep import NOT_RUN, SweepTask, load_sweep, run_sweep


class Squares:
    """A task whose chunk starting at ``stop_at`` is interrupted."""

    def __init__(self, stop_at):
        self.stop_at = stop_at

    def run_chunk(self, start, stop):
        if start == self.stop_at:
            raise KeyboardInterrupt
        return {"value": np.arange(start, stop) ** 2}


def test_engine_in_process_keeps_the_finished_chunks():
    with pytest.raises(Interrupted) as caught:
        run_chunked(Squares(stop_at=6), 10, chunk_size=3)
    assert caught.value.done == 6 and caught.value.total == 10
    np.testing.assert_array_equal(caught.value.partial["value"], np.arange(6) ** 2)


def test_engine_interrupted_before_anything_finished():
    with pytest.raises(Interrupted, match="interrupted after 0 of 4 items; nothing was finished"):
        run_chunked(Squares(stop_at=0), 4, chunk_size=2)


def test_engine_process_pool_keeps_the_finished_prefix(monkeypatch):
    """Ctrl-C while the main process waits: the chunks finished in order are kept (a later chunk
    that finished early is dropped, so row i is still item i)."""
    real = concurrent.futures.as_completed

    def interrupted_after_two(futures, *args, **kwargs):
        done = 0
        for future in real(futures, *args, **kwargs):
            yield future
            done += 1
            if done == 2:
                raise KeyboardInterrupt

    monkeypatch.setattr(concurrent.futures, "as_completed", interrupted_after_two)
    with pytest.raises(Interrupted) as caught:
        run_chunked(Squares(stop_at=-1), 8, chunk_size=2, execution=Execution(workers=2))
    done = caught.value.done
    assert done in (0, 2, 4) and caught.value.total == 8
    kept = caught.value.partial.get("value", np.array([], dtype=int))
    np.testing.assert_array_equal(kept, np.arange(done) ** 2)


@pytest.fixture
def interrupt_at_case(monkeypatch):
    """Make the sweep's chunk that starts at case ``k`` receive Ctrl-C."""
    def arm(k):
        real = SweepTask.run_chunk

        def run_chunk(self, start, stop):
            if start == k:
                raise KeyboardInterrupt
            return real(self, start, stop)

        monkeypatch.setattr(SweepTask, "run_chunk", run_chunk)
    return arm


def test_interrupted_sweep_result_marks_the_cases_not_run(interrupt_at_case):
    spec = load_sweep(demo_path("leg_lesion_grid"))
    full = run_sweep(spec, chunk_size=3)
    interrupt_at_case(12)
    with pytest.raises(Interrupted) as caught:
        run_sweep(spec, chunk_size=3)
    partial = caught.value.partial
    assert caught.value.done == 12 and caught.value.unit == "cases"
    np.testing.assert_array_equal(partial.bed_share[:12], full.bed_share[:12])
    assert np.isnan(partial.bed_share[12:]).all()
    assert partial.failure[12:] == (NOT_RUN,) * 18 and not any(partial.failure[:12])


def test_cli_sweep_interrupted_writes_finished_cases_and_says_how_far(interrupt_at_case, tmp_path, capsys):
    assert main(["sweep", str(demo_path("leg_lesion_grid")), "-o", str(tmp_path / "full"), "--chunk", "3"]) == 0
    capsys.readouterr()
    interrupt_at_case(12)
    out = tmp_path / "cut"
    assert main(["sweep", str(demo_path("leg_lesion_grid")), "-o", str(out), "--chunk", "3"]) == 130
    err = capsys.readouterr().err
    assert f"interrupted after 12 of 30 cases; the finished results are in {out / 'sweep.partial.csv'}" in err
    assert sorted(p.name for p in out.iterdir()) == ["sweep.partial.csv"]
    with open(out / "sweep.partial.csv", newline="") as handle:
        rows = list(csv.reader(handle))
    with open(tmp_path / "full" / "sweep.csv", newline="") as handle:
        full = list(csv.reader(handle))
    assert rows[:13] == full[:13]                           # header and the 12 finished cases
    assert len(rows) == 31 and all(cell == "" for row in rows[13:] for cell in row[3:])


def test_cli_sweep_interrupted_json_says_so(interrupt_at_case, capsys):
    interrupt_at_case(6)
    assert main(["sweep", str(demo_path("leg_lesion_grid")), "--json", "--chunk", "3"]) == 130
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert doc["interrupted"] == {"done": 6, "total": 30}
    assert doc["cases"][6]["failure"] == NOT_RUN and "failure" not in doc["cases"][5]
    assert "interrupted after 6 of 30 cases" in captured.err


def test_interrupted_monte_carlo_says_how_far(monkeypatch, tmp_path, capsys):
    """The hook sits in the shared engine, so a Monte Carlo run stops cleanly too: exit 130 and
    how far it got (it keeps no partial bands, and says so)."""
    from vesselnet.uncertainty import MonteCarloTask

    real = MonteCarloTask.run_chunk

    def run_chunk(self, start, stop):
        if start >= 10:
            raise KeyboardInterrupt
        return real(self, start, stop)

    monkeypatch.setattr(MonteCarloTask, "run_chunk", run_chunk)
    status = main(["uncertainty", str(demo_path("leg")), str(demo_path("leg_uncertainty")),
                   "--samples", "20", "--seed", "7", "--chunk", "5", "-o", str(tmp_path)])
    err = capsys.readouterr().err
    assert status == 130
    assert "interrupted after 10 of 20 items; the finished results were not kept" in err
    assert list(tmp_path.iterdir()) == []
