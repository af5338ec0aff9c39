"""Fuzzing the readers through the command line (SPEC section 4's promise on bad input).

Every generated file, however broken, must end in a result (exit 0), a
clear error (exit 2, one paragraph) or a numerical failure with its reason
(exit 1): never a traceback, an internal error, a crash or a hang.  The
generators and checks live in ``tests/fuzzkit.py``; the counts of inputs
tried and their outcomes are written to ``test-artifacts/fuzz-counts.txt``
(and printed with ``pytest -s``).  Example counts are fixed and the
generation derandomised, so every run tries the same inputs; set
``VESSELNET_FUZZ_EXAMPLES`` above 150 for a longer, randomised hunt.
"""

import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings

import fuzzkit

EXAMPLES = int(os.environ.get("VESSELNET_FUZZ_EXAMPLES", "150"))
"""Inputs per file kind; raise it for a longer hunt (``VESSELNET_FUZZ_EXAMPLES=5000``)."""
FUZZ = settings(max_examples=EXAMPLES, deadline=None, derandomize=EXAMPLES <= 150, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                       HealthCheck.filter_too_much])
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"


@pytest.fixture(scope="module", autouse=True)
def report_tally():
    yield
    ARTIFACTS.mkdir(exist_ok=True)
    text = fuzzkit.tally_text()
    (ARTIFACTS / "fuzz-counts.txt").write_text(text + "\n")
    print("\nfuzzed inputs and outcomes:\n" + text)


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


@FUZZ
@given(case=fuzzkit.network_files())
def test_network_files(case, folder):
    fuzzkit.run_case(case, folder)


@settings(FUZZ, max_examples=max(EXAMPLES * 2 // 3, 1))
@given(case=fuzzkit.raw_files())
def test_raw_bytes(case, folder):
    fuzzkit.run_case(case, folder)


@FUZZ
@given(case=fuzzkit.table_files())
def test_table_files(case, folder):
    fuzzkit.run_case(case, folder)


@FUZZ
@given(case=fuzzkit.scenario_files())
def test_scenario_files(case, folder):
    fuzzkit.run_case(case, folder)


@settings(FUZZ, max_examples=max(EXAMPLES * 2 // 3, 1))
@given(case=fuzzkit.sweep_files())
def test_sweep_files(case, folder):
    fuzzkit.run_case(case, folder)


@settings(FUZZ, max_examples=max(EXAMPLES * 2 // 3, 1))
@given(case=fuzzkit.plan_files())
def test_plan_files(case, folder):
    fuzzkit.run_case(case, folder)


@pytest.mark.parametrize("kind", sorted(set(fuzzkit.GENERATORS) - {"raw"}))
def test_generators_reach_valid_files(kind, folder):
    """The generators are not all noise: among 80 of their inputs some are valid (exit 0 for every
    command), so the fuzzing reaches the solver and the writers, not just the first check
    (about one in eight is expected to be valid)."""
    valid = []

    @settings(FUZZ, max_examples=80)
    @given(case=fuzzkit.GENERATORS[kind]())
    def count(case):
        outcomes = fuzzkit.run_case(case, folder)
        valid.append(all(status == 0 for status, _, _ in outcomes))
        if not case.mutations and not valid[-1]:
            reasons.append(outcomes[0][2][:300])

    reasons = []
    count()
    assert sum(valid) >= 3, f"only {sum(valid)} of {len(valid)} {kind} inputs were valid: {reasons}"
