"""The located YAML reader: safety limits, scalars, duplicate keys, positions."""

import time

import pytest

from vesselnet.errors import NetworkSpecError
from vesselnet.yamlread import load_text


def test_alias_bomb_is_refused_quickly():
    """A 'billion laughs' document (9^9 values through nested aliases) is refused in well under a
    second instead of exhausting memory (the attack is common knowledge, no source)."""
    lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x]"]
    for k in range(1, 10):
        ref = f"*a{k - 1}"
        lines.append(f"a{k}: &a{k} [{', '.join([ref] * 9)}]")
    start = time.perf_counter()
    with pytest.raises(NetworkSpecError, match="aliases expand"):
        load_text("\n".join(lines), "bomb.yaml")
    assert time.perf_counter() - start < 1.0


def test_small_aliases_are_fine_and_shared():
    doc = load_text("wall: &w {thickness: 0.6}\nother: *w\n")
    assert doc["other"] == {"thickness": 0.6}


@pytest.mark.parametrize(("text", "value"), [
    ("x: 1e-3", 0.001), ("x: 5E+2", 500.0), ("x: -.5", -0.5), ("x: 12", 12),
    ("x: yes", "yes"), ("x: on", "on"), ("x: true", True), ("x: ~", None),
    ("x: '1e-3'", "1e-3"), ("x: 3 mm", "3 mm"), ("x: .inf", float("inf")),
])
def test_scalars_follow_the_core_schema(text, value):
    """YAML 1.2 core schema: exponent floats are numbers, yes/on are strings (PyYAML reads the
    former as strings and the latter as booleans under YAML 1.1)."""
    assert load_text(text)["x"] == value


@pytest.mark.parametrize("text", ["x: !!python/object:os.system ls", "x: !custom 3",
                                  "x: !!python/name:os.system"])
def test_tags_are_refused(text):
    with pytest.raises(NetworkSpecError, match="not allowed"):
        load_text(text)


def test_duplicate_key_names_both_lines():
    with pytest.raises(NetworkSpecError, match=r"f.yaml:3:1: duplicate key 'a' \(first given on line 1\)"):
        load_text("a: 1\nb: 2\na: 3\n", "f.yaml")


def test_positions_are_kept():
    doc = load_text("vessels:\n  - id: a\n    radius: 2\n")
    item = doc["vessels"][0]
    assert doc["vessels"].where(0) == (2, 5)
    assert item.where("radius") == (3, 13) and item.key_where("radius") == (3, 5)


def test_size_limit(monkeypatch):
    import vesselnet.yamlread as yr
    monkeypatch.setattr(yr, "MAX_BYTES", 100)
    with pytest.raises(NetworkSpecError, match="larger than"):
        yr.load_text("x: 1\n" * 50, "big.yaml")
