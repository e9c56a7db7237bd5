"""The positioned, safe YAML reader."""

from __future__ import annotations

import pytest

from benchgate.common.yamlpos import load_file, load_text
from benchgate.errors import FileErrors


def test_positions_of_values_and_keys():
    root = load_text("a: 1\nb:\n  c: [x, 2.5]\n  'd': true\n", "f.yaml")
    assert root.value["a"].value == 1 and (root.value["a"].line, root.value["a"].column) == (1, 4)
    b = root.value["b"]
    assert b.key_pos["c"] == (3, 3) and b.key_pos["d"] == (4, 3)
    c = b.value["c"]
    assert [n.value for n in c.value] == ["x", 2.5]
    assert (c.value[1].line, c.value[1].column) == (3, 10)
    assert root.plain() == {"a": 1, "b": {"c": ["x", 2.5], "d": True}}


def test_yaml11_scalars():
    # PyYAML's safe resolver (YAML 1.1): on/off/yes/no are booleans, ~ is null
    root = load_text("a: off\nb: yes\nc: ~\nd: 0x10\ne: '5'\nf: 2026-01-01\n", "f")
    assert root.plain() == {"a": False, "b": True, "c": None, "d": 16, "e": "5", "f": "2026-01-01"}


@pytest.mark.parametrize(
    ("text", "where", "what"),
    [
        ("a: 1\na: 2\n", (2, 1), "duplicate key 'a'"),
        ("a:\n\tb: 1\n", (2, 1), "tab character"),
        ("a: !!python/name:os.system x\n", (1, 4), "unsupported YAML tag"),
        ("a: !custom 3\n", (1, 4), "unsupported YAML tag"),
        ("a: !!binary aGVsbG8=\n", (1, 4), "unsupported YAML tag"),
        ("? [a, b]\n: 1\n", (1, 3), "keys must be plain"),
        ("<<: {a: 1}\n", (1, 1), "merge keys"),
        ("a: &x [*x]\n", (1, 4), "refers to itself"),  # the alias is its own parent node
        ("a: [1, 2\n", (2, 1), "YAML syntax error"),
        ("---\na: 1\n---\nb: 2\n", (3, 1), "YAML syntax error"),
        ("a: \x07\n", (1, 4), "not allowed in YAML"),
        ("", (1, 1), "empty"),
    ],
)
def test_errors_with_positions(text, where, what):
    with pytest.raises(FileErrors) as exc:
        load_text(text, "f.yaml")
    e = exc.value.errors[0]
    assert (e.line, e.column) == where, exc.value.lines()
    assert what in e.message


def test_never_constructs_objects(tmp_path):
    marker = tmp_path / "ran"
    text = f"a: !!python/object/apply:os.system ['touch {marker}']\n"
    with pytest.raises(FileErrors):
        load_text(text, "f")
    assert not marker.exists()


def test_files(tmp_path):
    with pytest.raises(FileErrors, match="no such file"):
        load_file(str(tmp_path / "missing.yaml"))
    with pytest.raises(FileErrors, match="directory"):
        load_file(str(tmp_path))
    p = tmp_path / "bom.yaml"
    p.write_bytes(b"\xef\xbb\xbfa: 1\n")
    assert load_file(str(p))[0].plain() == {"a": 1}
    p.write_bytes(b"a: 1\nb: \x00\n")
    with pytest.raises(FileErrors) as exc:
        load_file(str(p))
    assert (exc.value.errors[0].line, exc.value.errors[0].column) == (2, 4)
