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


EXAMPLES_OF = {"network": EXAMPLES, "tables": EXAMPLES, "scenario": EXAMPLES,
               "sweep": max(EXAMPLES * 2 // 3, 1), "raw": max(EXAMPLES * 2 // 3, 1),
               "plan": max(EXAMPLES // 2, 1)}
"""Inputs per file kind (graft plans run a ranking per input, so fewer)."""


@pytest.mark.parametrize("kind", sorted(fuzzkit.GENERATORS))
def test_fuzzed_files(kind, folder):
    """Every input of the kind ends in exit 0, 2 or 1 as promised (checked in fuzzkit.run_case);
    and the generator is not all noise: at least 3 inputs are valid (about one in eight or more
    is), so the fuzzing reaches the solver and the writers, not just the first check."""
    valid = []

    @settings(FUZZ, max_examples=EXAMPLES_OF[kind])
    @given(case=fuzzkit.GENERATORS[kind]())
    def run(case):
        outcomes = fuzzkit.run_case(case, folder)
        valid.append(all(status == 0 for status, _, _ in outcomes))

    run()
    if kind != "raw":  # random bytes are never a valid network
        assert sum(valid) >= 3, f"only {sum(valid)} of {len(valid)} {kind} inputs were valid"
