"""Bad network files: each gives exit status 2 and one paragraph naming line and item.

The rules checked are those of SPEC sections 1 and 2.
"""

import re
import subprocess
import sys
import textwrap

import pytest

from vesselnet.cli import main

GOOD_VESSEL = "  - {id: a, from: root, to: tip, length: 10, radius: 2}\n"
HEAD = "vesselnet: 1\nnodes:\n  root: {pressure: 100}\nvessels:\n"
BED = "beds:\n  - {id: organ, node: tip, resistance: 10}\n"

BAD = {
    "unknown unit": (HEAD + "  - {id: a, from: root, to: tip, length: 10 furlong, radius: 2}\n" + BED,
                     r":5:\d+ vessels\[0\] 'a': length: unknown unit 'furlong'"),
    "unit of wrong kind": (HEAD + "  - {id: a, from: root, to: tip, length: 10, radius: 3 mmHg}\n" + BED,
                           r":5:\d+ vessels\[0\] 'a': radius: 'mmHg' is a unit of pressure"),
    "negative radius": (HEAD + "  - {id: a, from: root, to: tip, length: 10, radius: -2}\n" + BED,
                        r":5:\d+ vessels\[0\] 'a': radius must be > 0, got -2"),
    "zero length": (HEAD + "  - {id: a, from: root, to: tip, length: 0, radius: 2}\n" + BED,
                    r":5:\d+ vessels\[0\] 'a': length must be > 0"),
    "missing length": (HEAD + "  - {id: a, from: root, to: tip, radius: 2}\n" + BED,
                       r":5:\d+ vessels\[0\] 'a': missing key 'length'"),
    "missing radius": (HEAD + "  - {id: a, from: root, to: tip, length: 3}\n" + BED,
                       r":5:\d+ vessels\[0\] 'a': missing key 'radius'"),
    "radius and diameter": (HEAD + "  - {id: a, from: root, to: tip, length: 3, radius: 1, diameter: 2}\n" + BED,
                            r":5:\d+ vessels\[0\] 'a': give exactly one of 'radius' and 'diameter'"),
    "unknown key near miss": (HEAD + "  - {id: a, from: root, to: tip, length: 3, radius: 1, lenght: 2}\n" + BED,
                              r":5:\d+ vessels\[0\] 'a': unknown key 'lenght'; did you mean 'length'"),
    "unknown bed node": (HEAD + GOOD_VESSEL + "beds:\n  - {id: organ, node: tpi, resistance: 10}\n",
                         r":7 beds\[0\] 'organ': node 'tpi' is not joined by any vessel; did you mean 'tip'"),
    "duplicate vessel id": (HEAD + GOOD_VESSEL + "  - {id: a, from: tip, to: tip2, length: 10, radius: 2}\n" + BED,
                            r":6 vessels\[1\] 'a': duplicate id"),
    "duplicate key": (HEAD + "  - {id: a, from: root, to: tip, length: 10, length: 12, radius: 2}\n" + BED,
                      r":5:\d+: duplicate key 'length'"),
    "duplicate node key": ("vesselnet: 1\nnodes:\n  root: {pressure: 100}\n  root: {pressure: 90}\nvessels:\n"
                           + GOOD_VESSEL + BED, r":4:\d+: duplicate key 'root'"),
    "disconnected part": (HEAD + GOOD_VESSEL + "  - {id: b, from: x, to: y, length: 10, radius: 2}\n" + BED,
                          r":6 nodes 'x', 'y': this connected part reaches no pressure reference"),
    "no pressure reference": ("vesselnet: 1\nnodes:\n  root: {inflow: 100}\nvessels:\n" + GOOD_VESSEL,
                              r"no pressure reference"),
    "malformed yaml": (HEAD + "  - {id: a, from: root, to: tip, length: 10, radius: 2\n" + BED,
                       r":\d+:\d+: malformed YAML"),
    "wrong format version": ("vesselnet: 2\n" + HEAD[13:] + GOOD_VESSEL + BED,
                             r":1:\d+ vesselnet: format version 2 is not supported"),
    "missing format version": (HEAD[13:] + GOOD_VESSEL + BED,
                               r":1:1 top level: missing key 'vesselnet'"),
    "non-numeric value": (HEAD + "  - {id: a, from: root, to: tip, length: long, radius: 2}\n" + BED,
                          r":5:\d+ vessels\[0\] 'a': length: expected a number"),
    "empty file": ("", r"the file is empty"),
    "percent out of range": (HEAD + "  - {id: a, from: root, to: tip, length: 10, radius: 2,"
                             " stenosis: {reduction: 120%, length: 1}}\n" + BED,
                             r":5:\d+ vessels\[0\] 'a' stenosis: reduction must be at least 0 and below 1"),
    "bare percent": (HEAD + "  - {id: a, from: root, to: tip, length: 10, radius: 2,"
                     " stenosis: {reduction: 70, length: 1}}\n" + BED, r"write 70% or 0.7"),
    "self loop": (HEAD + GOOD_VESSEL + "  - {id: b, from: tip, to: tip, length: 10, radius: 2}\n" + BED,
                  r":6 vessels\[1\] 'b': the vessel starts and ends at node 'tip'"),
    "node no vessel joins": ("vesselnet: 1\nnodes:\n  root: {pressure: 100}\n  lonely: {pressure: 5}\nvessels:\n"
                             + GOOD_VESSEL + BED, r":4 nodes 'lonely': no vessel joins this node"),
    "pressure and inflow": ("vesselnet: 1\nnodes:\n  root: {pressure: 100, inflow: 5}\nvessels:\n"
                            + GOOD_VESSEL + BED, r":3:\d+ nodes 'root': a node takes a pressure or an inflow"),
    "negative bed resistance": (HEAD + GOOD_VESSEL + "beds:\n  - {id: organ, node: tip, resistance: -1}\n",
                                r":7:\d+ beds\[0\] 'organ': resistance must be > 0"),
    "not a mapping": ("- just\n- a list\n", r"not a mapping"),
    "vessel not a mapping": (HEAD + "  - sfa\n" + BED, r":5:\d+ vessels\[0\]: a vessel must be a mapping"),
    "unknown top key": (HEAD + GOOD_VESSEL + BED + "colour: red\n", r":8:1 top level: unknown key 'colour'"),
    "lesion longer than vessel": (HEAD + "  - {id: a, from: root, to: tip, length: 1, radius: 2,"
                                  " stenosis: {reduction: 50%, length: 3}}\n" + BED,
                                  r"the lesion is longer than its vessel"),
    "python tag": (HEAD + "  - !!python/object:os.system {id: a}\n" + BED, r"tag .* is not allowed"),
    "unknown units key": ("vesselnet: 1\nunits: {lenght: mm}\n" + HEAD[13:] + GOOD_VESSEL + BED,
                          r":2:\d+ units: unknown key 'lenght'; did you mean 'length'"),
    "bad unit override": ("vesselnet: 1\nunits: {length: mmHg}\n" + HEAD[13:] + GOOD_VESSEL + BED,
                          r"units.length: 'mmHg' is a unit of pressure"),
    "infinite value": (HEAD + "  - {id: a, from: root, to: tip, length: .inf, radius: 2}\n" + BED,
                       r"expected a finite number"),
    "proximal above total": (HEAD + GOOD_VESSEL + "beds:\n  - {id: organ, node: tip, resistance: 10,"
                             " windkessel: {proximal: 12, compliance: 0.01}}\n",
                             r"proximal resistance must be below"),
    "missing table": (HEAD + GOOD_VESSEL + BED + "vessels_table: nowhere.csv\n", r"nowhere.csv: cannot read the table"),
}


@pytest.mark.parametrize("case", sorted(BAD), ids=sorted(BAD))
def test_bad_input_exit_2_with_located_message(case, tmp_path, capsys):
    text, pattern = BAD[case]
    path = tmp_path / "net.yaml"
    path.write_text(text)
    status = main(["check", str(path)])
    err = capsys.readouterr().err
    assert status == 2
    assert "Traceback" not in err

    assert re.search(pattern, err), err
    assert "\n\n" not in err.strip()  # one paragraph


def test_all_problems_reported_together(tmp_path, capsys):
    """Several mistakes in one file are all reported at once."""
    path = tmp_path / "net.yaml"
    path.write_text(HEAD + "  - {id: a, from: root, to: tip, length: -1, radius: 3 mmHg}\n"
                    "  - {id: a, from: tip, to: t2, length: 1, raduis: 1}\n" + BED)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    for fragment in ("length must be > 0", "unit of pressure", "unknown key 'raduis'", "duplicate id"):
        assert fragment in err


def test_subprocess_prints_no_traceback(tmp_path):
    """The installed command, run as a process, exits 2 with a clean message."""
    path = tmp_path / "net.yaml"
    path.write_text(textwrap.dedent(BAD["negative radius"][0]))
    run = subprocess.run([sys.executable, "-m", "vesselnet", "solve", str(path)], capture_output=True,
                         text=True, cwd=tmp_path)
    assert run.returncode == 2
    assert "Traceback" not in run.stderr and "radius must be > 0" in run.stderr
    assert run.stdout == ""
