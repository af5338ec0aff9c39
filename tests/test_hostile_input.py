"""Hostile input: alias bombs, deep nesting, tags, giant numbers, control characters, odd tables.

Each case ends in exit status 2 with a located, one-paragraph message, fast.
The attacks are common knowledge (YAML "billion laughs", stack exhaustion
by nesting, terminal escape injection; no source).
"""

import subprocess
import sys
import time

import pytest

from vesselnet import yamlread
from vesselnet.cli import main
from vesselnet.errors import NetworkSpecError

HEAD = "vesselnet: 1\nnodes:\n  root: {pressure: 100}\nvessels:\n"
VESSEL = "  - {id: a, from: root, to: tip, length: 10, radius: 2}\n"
BED = "beds:\n  - {id: organ, node: tip, resistance: 10}\n"


@pytest.fixture(scope="module", autouse=True)
def warm_imports(tmp_path_factory):
    """Check a valid file once (importing numpy, scipy and the readers), so timings below
    measure the reading alone."""
    path = tmp_path_factory.mktemp("warm") / "net.yaml"
    path.write_text(HEAD + VESSEL + BED)
    assert main(["check", str(path)]) == 0


def check(tmp_path, capsys, text, *, data=None):
    path = tmp_path / "net.yaml"
    path.write_bytes(data if data is not None else text.encode("utf-8"))
    start = time.perf_counter()
    status = main(["check", str(path)])
    seconds = time.perf_counter() - start
    err = capsys.readouterr().err
    assert status == 2, err
    assert "Traceback" not in err and "internal error" not in err
    assert "\n\n" not in err.strip()
    return err, seconds


def bomb(kind: str, levels: int = 9) -> str:
    if kind == "lists":
        lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x]"]
        lines += [f"a{k}: &a{k} [{', '.join([f'*a{k - 1}'] * 9)}]" for k in range(1, levels + 1)]
    else:
        lines = ["a0: &a0 {k0: x, k1: x, k2: x, k3: x, k4: x, k5: x, k6: x, k7: x, k8: x}"]
        lines += [f"a{k}: &a{k} {{{', '.join(f'k{j}: *a{k - 1}' for j in range(9))}}}"
                  for k in range(1, levels + 1)]
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("kind", ["lists", "mappings"])
def test_alias_bomb_in_a_network_file_is_refused_quickly(kind, tmp_path, capsys):
    """9^10 values through nested aliases: refused in well under a second, memory untouched."""
    err, seconds = check(tmp_path, capsys, HEAD + VESSEL + BED + bomb(kind))
    assert "aliases expand this document to more than" in err and seconds < 1.0


@pytest.mark.parametrize("text", ["a: " + "[" * 200 + "]" * 200, "a: " + "{b: " * 200 + "1" + "}" * 200,
                                  "- " * 300 + "x"])
def test_deep_nesting_is_refused(text, tmp_path, capsys):
    err, seconds = check(tmp_path, capsys, text)
    assert "nested more than 100 levels deep" in err and seconds < 1.0


def test_very_deep_nesting_cannot_crash_the_process(tmp_path):
    """200 000 nested lists overflowed the C stack of PyYAML's composer (a segmentation fault)
    before the depth limit; run in a subprocess so a crash would show as a signal."""
    path = tmp_path / "deep.yaml"
    path.write_text("a: " + "[" * 200_000 + "]" * 200_000)
    run = subprocess.run([sys.executable, "-m", "vesselnet", "check", str(path)], capture_output=True,
                         text=True, timeout=60)
    assert run.returncode == 2, (run.returncode, run.stderr[-500:])
    assert "nested more than 100 levels" in run.stderr


@pytest.mark.parametrize(("text", "message"), [
    ("a: &a [*a]\n", "an alias refers to a mapping or list that contains it"),
    ("a: &a {b: *a}\n", "an alias refers to a mapping or list that contains it"),
    ("a0: &a0 [x]\n" + "".join(f"a{k}: &a{k} [*a{k - 1}]\n" for k in range(1, 150)),
     "aliases nest mappings and lists more than 100 levels deep"),
])
def test_recursive_and_chained_aliases_are_refused(text, message):
    with pytest.raises(NetworkSpecError, match=message):
        yamlread.load_text(text, "x.yaml")


@pytest.mark.parametrize("tag", ["!!python/object/apply:os.system [ls]", "!!binary aGVsbG8=", "!!set {a, b}",
                                 "!!timestamp 2001-12-14", "!!omap [a: 1]", "!local 3"])
def test_tags_never_construct_objects(tag, tmp_path, capsys):
    err, _ = check(tmp_path, capsys, HEAD + VESSEL + BED + f"description: {tag}\n")
    assert "is not allowed" in err


@pytest.mark.parametrize(("value", "message"), [
    ("9" * 400, "expected a finite number"),
    ("9" * 5000, "expected a finite number"),
    ("-" + "9" * 400, "expected a finite number"),
    ("'1e400 cm'", "expected a finite number"),
    ("'-1e400'", "expected a finite number"),
])
def test_giant_numbers_are_clear_errors(value, message, tmp_path, capsys):
    """Python refuses integer text beyond 4300 digits and floats end near 1.8e308: both were
    internal errors before; now they are located messages."""
    text = HEAD + f"  - {{id: a, from: root, to: tip, length: {value}, radius: 2}}\n" + BED
    err, _ = check(tmp_path, capsys, text)
    assert "vessels[0] 'a': length" in err and (message in err or "too large" in err)
    assert len(err) < 1000


def test_quantity_overflowing_si_is_refused(tmp_path, capsys):
    """1e307 mmHg is finite as written but 1.3e309 Pa is not."""
    text = "vesselnet: 1\nnodes:\n  root: {pressure: 1e307}\nvessels:\n" + VESSEL + BED
    err, _ = check(tmp_path, capsys, text)
    assert "too large to represent in SI units" in err


def test_megabyte_string_gives_a_short_message(tmp_path, capsys):
    text = HEAD + "  - {id: a, from: root, to: tip, length: '" + "x" * 1_000_000 + "', radius: 2}\n" + BED
    err, _ = check(tmp_path, capsys, text)
    assert "expected a number" in err and len(err) < 1000


@pytest.mark.parametrize("name", ["a\\nb", "a\\tb", "\\e[31mred", "a\\x00b", "\\u009b2J"])
def test_control_characters_in_names_are_refused(name, tmp_path, capsys):
    text = HEAD + f'  - {{id: "{name}", from: root, to: tip, length: 10, radius: 2}}\n' + BED
    err, _ = check(tmp_path, capsys, text)
    assert "'id' must not contain control characters" in err


def test_terminal_escapes_in_echoed_keys_are_escaped(tmp_path, capsys):
    """An unknown key is echoed in the message; its escape sequence must not reach the terminal."""
    text = HEAD + '  - {id: a, from: root, to: tip, length: 10, radius: 2, "\\e]0;owned\\a": 1}\n' + BED
    err, _ = check(tmp_path, capsys, text)
    assert "\x1b" not in err and "\x07" not in err and "\\x1b]0;owned\\x07" in err


def test_not_utf8_is_refused(tmp_path, capsys):
    err, _ = check(tmp_path, capsys, "", data=b"vesselnet: 1\nname: \xff\xfe\n")
    assert "not UTF-8 text" in err


def test_size_limit_on_files(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(yamlread, "MAX_BYTES", 200)
    err, _ = check(tmp_path, capsys, HEAD + VESSEL * 10 + BED)
    assert "the file is larger than" in err and "tables" in err


def test_table_path_with_a_nul_byte(tmp_path, capsys):
    err, _ = check(tmp_path, capsys, HEAD + VESSEL + BED + 'vessels_table: "v\\0.csv"\n')
    assert "'vessels_table' must not contain control characters" in err


def table_case(tmp_path, capsys, rows: str):
    (tmp_path / "v.csv").write_text("id,from,to,length,radius\n" + rows)
    return check(tmp_path, capsys, "vesselnet: 1\nnodes:\n  root: {pressure: 100}\nvessels_table: v.csv\n"
                 + BED)[0]


@pytest.mark.parametrize(("rows", "message"), [
    ("a,root,tip,nan,2\n", "row 1 length: not a number: 'nan'; leave the cell empty for no value"),
    ("a,root,tip,1e400,2\n", "row 1 length: must be > 0, got '1e400'"),
    ("a,,tip,1,2\n", "row 1 from: must not be empty"),
    ("\"a\nb\",root,tip,1,2\n", "row 1 id: must not contain control characters"),
    ("a,root,tip,1,2,3\n", "row 1: has 6 cells, the header has 5"),
    ("a,root,tip," + "1" * 200_000 + ",2\n", "cannot read the table"),
])
def test_bad_table_cells(rows, message, tmp_path, capsys):
    """CSV tables: a typed 'nan', an overflowing number, an empty reference, a line break in an
    id, a ragged row, a cell beyond the csv module's field limit."""
    assert message in table_case(tmp_path, capsys, rows)


@pytest.mark.parametrize(("bed_rows", "message"), [
    ("id,node,resistance\norgan,tip,10\nextra,nowhere,10\n",
     "beds.csv:3 beds[1] 'extra': node 'nowhere' is not joined by any vessel"),
    ("id,node,resistance\norgan,tip,10\norgan,tip,20\n", "beds.csv:3 beds[1] 'organ': duplicate id"),
])
def test_problems_of_table_rows_name_the_table(bed_rows, message, tmp_path, capsys):
    """Found by the fuzzer: a bad reference in a table row was reported at the YAML file with
    the table's line number."""
    (tmp_path / "beds.csv").write_text(bed_rows)
    err, _ = check(tmp_path, capsys, HEAD + VESSEL + "beds_table: beds.csv\n")
    assert message in err and "net.yaml:3 beds" not in err
