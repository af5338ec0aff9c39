"""Column-at-a-time text: number formatting, plain CSV splitting, nodal pattern, synthetic networks.

References: Python's own float formatting (``repr(float(f"{x:.10g}"))``, what
the writers wrote cell by cell before) and the ``csv`` module (what the
table reader used before); for the nodal pattern the slow, obvious dense
assembly; for the synthetic trees Murray's law (Murray 1926, r^3 = r1^3 + r2^3).
"""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from vesselnet import csvtables
from vesselnet.assembly import NodalPattern
from vesselnet.numtext import format_significant, join_rows, significant_bytes
from vesselnet.synthetic import synthetic_columns

EDGE_VALUES = [0.0, -0.0, 1.0, -1.0, 0.1 + 0.2, 123.0, 1e16, 9.9999999999e15, 1e15, 1e-4,
               9.99999999999e-5, 1e-5, 0.5, 12345678905.0, 1e300, 1e-300, 5e-324, 2.0 ** -20,
               123456789012345678.0, 0.00012, 99999999995.0, 1.7976931348623157e308,
               2.2250738585072014e-308, 9.9999999995, 0.99999999995, 1e100, 1e-100]


def _python(values, digits=10):
    return [repr(float(f"{x:.{digits}g}")) for x in values]


@pytest.mark.parametrize("digits", [10, 6, 15, 17])
def test_formatting_matches_python_on_edge_values(digits):
    """Zeros, powers of ten, ties at the last digit, the extremes of float64."""
    assert format_significant(EDGE_VALUES, digits).tolist() == _python(EDGE_VALUES, digits)


@pytest.mark.parametrize("seed, sigma", [(101, 1.0), (202, 8.0), (303, 30.0)])
def test_formatting_matches_python_on_random_values(seed, sigma):
    rng = np.random.default_rng(seed)
    values = rng.lognormal(0.0, sigma, 20000) * rng.choice([-1.0, 1.0], 20000)
    rounded = np.concatenate([np.round(values[k::8], k) for k in range(8)])  # short decimals, ties
    both = np.concatenate([values, rounded])
    assert format_significant(both).tolist() == _python(both.tolist())


@pytest.mark.parametrize("seed", [404, 505])
def test_json_numbers_a_column_at_a_time_equal_python_formatting(seed):
    """writers.numbers against Python's own ``float(f"{x:.10g}")`` value by value (with
    NaN and infinities as None, no negative zero), on edge and random values."""
    import math

    from vesselnet.writers import numbers

    rng = np.random.default_rng(seed)
    values = np.concatenate([EDGE_VALUES, [np.nan, np.inf, -np.inf, -0.0],
                             rng.lognormal(0.0, 20.0, 5000) * rng.choice([-1.0, 1.0], 5000)])
    expected = [None if not math.isfinite(x) else float(f"{x:.10g}") + 0.0 for x in values.tolist()]
    got = numbers(values)
    assert [repr(x) for x in got] == [repr(x) for x in expected]
    assert numbers(np.array([True, False])) == [True, False] and numbers(np.array([3])) == [3]


def test_non_finite_values_are_empty():
    assert significant_bytes([np.nan, np.inf, -np.inf, 2.5]).tolist() == [b"", b"", b"", b"2.5"]


def test_join_rows_handles_text_and_unicode():
    text = join_rows([["é", "b"], np.array([b"1.0", b"2.5"]), np.array(["x", "y"])])
    assert text == "é,1.0,x\nb,2.5,y\n"


def _csv_module_table(text: str):
    rows = [r for r in csv.reader(io.StringIO(text)) if r and any(c.strip() for c in r)]
    return rows


@pytest.mark.parametrize("body", [
    "id,from,to,length[mm],radius[um]\nv1,a,b,5,40\nv2,b,c,6.5,30\n",
    "id,from,to,length[mm],radius[um]\r\nv1,a,b,5,40\r\nv2,b,c,6.5,30",          # CRLF, no final newline
    "\ufeffid, from ,to,length[mm],radius[um]\nv1, a ,b, 5 ,40\nv2,b,c,6.5,30\n",  # BOM, padding
    'id,from,to,length[mm],radius[um]\n"v1",a,b,5,40\nv2,b,c,6.5,30\n',           # quotes: csv module
    "id,from,to,length[mm],radius[um]\nv1,a,b,5,40\n\nv2,b,c,6.5,30\n",           # blank line
    "id,from,to,length[mm],radius[um]\nv1,a,b,,40\nv2,b,c,6.5,30\n",              # blank cell
])
def test_plain_split_reads_what_the_csv_module_reads(tmp_path, body):
    """Every table reads to the same columns as through ``csv.reader`` cell by cell."""
    path = tmp_path / "v.csv"
    path.write_text(body, encoding="utf-8")
    table = csvtables.read_table(path, "vessels", {"length": "cm", "radius": "mm"})
    rows = _csv_module_table(body.lstrip("\ufeff"))
    cells = list(zip(*rows[1:]))
    assert table.columns["id"] == [c.strip() for c in cells[0]]
    assert table.columns["from"] == [c.strip() for c in cells[1]]
    expected_length = np.array([float(c) if c.strip() else np.nan for c in cells[3]]) * 1e-3
    np.testing.assert_allclose(table.columns["length_m"], expected_length, rtol=1e-15)
    np.testing.assert_allclose(table.columns["radius_in_m"], np.array(cells[4], dtype=float) * 1e-6,
                               rtol=1e-15)


def test_plain_split_falls_back_to_locate_bad_rows(tmp_path):
    path = tmp_path / "v.csv"
    path.write_text("id,from,to,length,radius\nv1,a,b,5,4\nv2,b,c,6\n")
    table = csvtables.read_table(path, "vessels", {"length": "cm", "radius": "mm"})
    assert [str(p) for p in table.problems] == [f"{path}:3 row 2: has 4 cells, the header has 5"]


@pytest.mark.parametrize("seed", [11, 12, 13, 14])
def test_nodal_pattern_equals_dense_assembly(seed):
    """Random elements with parallel pairs, grounded ends and fixed nodes: the sparse matrix
    equals the obvious dense stamp-by-stamp sum."""
    rng = np.random.default_rng(seed)
    n, m = 15, 60
    a = rng.integers(0, n, m)
    b = rng.integers(-1, n, m)
    b[:10] = np.roll(a[:10], 1)           # some parallel and repeated pairs
    free = rng.random(n) < 0.75
    pattern = NodalPattern(n, a, b, free)
    stamps = [rng.normal(size=m) for _ in range(4)]
    dense = np.zeros((n + 1, n + 1))
    to = np.where(b < 0, n, b)
    for k in range(m):
        dense[a[k], a[k]] += stamps[0][k]
        dense[a[k], to[k]] += stamps[1][k]
        dense[to[k], a[k]] += stamps[2][k]
        dense[to[k], to[k]] += stamps[3][k]
    rows = np.flatnonzero(free)
    np.testing.assert_allclose(pattern.matrix(*stamps).toarray(), dense[np.ix_(rows, rows)],
                               rtol=1e-13, atol=1e-13)


@pytest.mark.parametrize("topology", ["tree", "local", "long"])
def test_synthetic_networks_follow_murray_and_count_exactly(topology):
    """n segments exactly, 2 % loops unless a tree, Murray's law at every split (Murray 1926)."""
    cols = synthetic_columns(5000, topology, seed=271828)
    v = cols["vessels"]
    assert len(v["id"]) == 5000
    index = {}
    frm = np.array([int(x[1:]) for x in v["from"]])
    to = np.array([int(x[1:]) for x in v["to"]])
    n_loops = 0 if topology == "tree" else 100
    tree_from, tree_to, tree_r = frm[:5000 - n_loops], to[:5000 - n_loops], v["radius_m"][:5000 - n_loops]
    feeding = dict(zip(tree_to.tolist(), tree_r.tolist()))
    children: dict[int, list[float]] = {}
    for parent, r in zip(tree_from.tolist(), tree_r.tolist()):
        children.setdefault(parent, []).append(r)
    for parent, rs in children.items():
        if parent in feeding and len(rs) == 2:
            assert feeding[parent] ** 3 == pytest.approx(rs[0] ** 3 + rs[1] ** 3, rel=1e-12)
        index[parent] = len(rs)
    degree = np.bincount(frm, minlength=to.max() + 1) + np.bincount(to, minlength=to.max() + 1)
    assert len(cols["beds"]["id"]) == int(((degree == 1) & (np.arange(len(degree)) > 0)).sum())


def _reference_csv(ids, text_columns, columns, units):
    """The table as ``csv.writer`` writes it cell by cell (the obvious, slow way)."""
    from vesselnet.writers import number, spreadsheet_safe

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["id"] + list(text_columns)
                    + [f"{n}[{units[n]}]" if units.get(n) else n for n in columns])
    for i, item in enumerate(ids):
        row = [spreadsheet_safe(str(item))]
        row += [spreadsheet_safe(str(c[i])) for c in text_columns.values()]
        for values in columns.values():
            value = number(values[i])
            row.append("" if value is None else str(value).lower() if isinstance(value, bool)
                       else repr(value))
        writer.writerow(row)
    return buffer.getvalue()


@pytest.mark.parametrize("case", ["leg", "whole_body", "collateral", "synthetic"])
def test_result_tables_match_the_csv_module(case):
    """write_tables' column-at-a-time text equals csv.writer with repr of 10 digits, byte for byte."""
    from vesselnet.demos import demo_path
    from vesselnet.reader import load_network
    from vesselnet.solve import solve
    from vesselnet.synthetic import synthetic_network
    from vesselnet.writers import (BED_COLUMNS, NODE_COLUMNS, _converted, csv_text,
                                   vessel_columns)

    net = synthetic_network(2000, "local", seed=1999) if case == "synthetic" \
        else load_network(demo_path(case))
    result = solve(net)
    units = {"flow": "mL/min", "pressure": "mmHg"}
    vessels = result.vessel_table()
    text = {"from": list(vessels["from"]), "to": list(vessels["to"])}
    columns = vessel_columns(result)
    assert csv_text(vessels["id"], text, columns, units) == _reference_csv(vessels["id"], text,
                                                                            columns, units)
    nodes = result.node_table()
    cols = _converted(nodes, NODE_COLUMNS)
    assert csv_text(nodes["id"], {}, cols, units) == _reference_csv(nodes["id"], {}, cols, units)
    beds = result.bed_table()
    cols = _converted(beds, BED_COLUMNS)
    assert csv_text(beds["id"], {"node": list(beds["node"])}, cols, units) == \
        _reference_csv(beds["id"], {"node": list(beds["node"])}, cols, units)


@pytest.mark.parametrize("ids", [["=a", "b,c", 'q"x', "-d", "@e", "é", "f\ng", "\tt", "plain"]])
def test_risky_text_cells_match_the_csv_module(ids):
    """Formula-like cells get a quote mark, cells with , " or newlines are quoted (csv module)."""
    from vesselnet.writers import csv_text

    numbers = {"x": np.linspace(-1.5, 2.0, len(ids)), "flag": np.arange(len(ids)) % 2 == 0,
               "count": np.arange(len(ids))}
    text = {"node": list(reversed(ids))}
    assert csv_text(ids, text, numbers, {}) == _reference_csv(ids, text, numbers, {})
