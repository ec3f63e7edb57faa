"""Reading spacetime files (texgen/loader.py): positions, safety limits, encodings."""
from __future__ import annotations

import hashlib
import time

import pytest

from texgen.errors import ConfigError
from texgen.spec.loader import MAX_FILE_BYTES, MAX_NODES, load_file, load_text

SIMPLE = "id: x\ncoordinates:\n  - t\n  - {name: r, range: \"r > 0\"}\nmetric:\n  line_element: -dt^2 + dr^2\n"


def test_nodes_remember_line_and_column():
    doc = load_text(SIMPLE, "s.yaml")
    root = doc.root.value
    assert (root["id"].value, root["id"].line, root["id"].column) == ("x", 1, 5)
    coords = root["coordinates"].value
    assert [(c.line, c.column) for c in coords] == [(3, 5), (4, 5)]
    rng = coords[1].value["range"]
    assert (rng.value, rng.line, rng.column, rng.style) == ("r > 0", 4, 22, '"')
    le = root["metric"].value["line_element"]
    assert (le.line, le.column, le.style) == (6, 17, None)


def test_key_positions_and_plain_data():
    doc = load_text(SIMPLE, "s.yaml")
    assert doc.key_lines["metric.line_element"] == (6, 3)
    assert doc.key_lines["coordinates[1].range"] == (4, 15)
    assert doc.root.plain() == {"id": "x", "coordinates": ["t", {"name": "r", "range": "r > 0"}],
                                "metric": {"line_element": "-dt^2 + dr^2"}}


def test_hash_is_of_the_file_bytes(write):
    path = write(SIMPLE)
    assert load_file(path).sha256 == hashlib.sha256(SIMPLE.encode()).hexdigest()


@pytest.mark.parametrize("text, message", [
    ("a: 1\nb: 2\na: 3\n", "s.yaml:3:1: a: Duplicate key 'a' (first given on line 1)"),
    ("m:\n  k: 1\n  k: 2\n", "s.yaml:3:3: m.k: Duplicate key 'k' (first given on line 2)"),
    ("a: !!python/object/apply:os.system [ls]\n",
     "s.yaml:1:4: a: Unsupported YAML tag 'tag:yaml.org,2002:python/object/apply:os.system'"),
    ("a: !!python/name:os.system\n", "s.yaml:1:4: a: Unsupported YAML tag 'tag:yaml.org,2002:python/name:os.system'"),
    ("a: !foo 1\n", "s.yaml:1:4: a: Unsupported YAML tag '!foo'"),
    ("a: !!set {x}\n", "s.yaml:1:4: a: Unsupported YAML tag 'tag:yaml.org,2002:set'"),
    ("a: 1\n---\nb: 2\n", "s.yaml:3:1: File holds more than one YAML document; put one spacetime per file"),
    ("", "s.yaml:1:1: File is empty; expected a mapping of spacetime keys"),
    ("\n\n# nothing\n", "s.yaml:1:1: File is empty; expected a mapping of spacetime keys"),
    ("[1, 2]\n", "s.yaml:1:1: Expected a mapping of spacetime keys at the top of the file"),
    ("a: [1, 2\n", "s.yaml:2:1: YAML syntax error: expected ',' or ']', but got '<stream end>'"),
    ("a:\n\t- 1\n", "s.yaml:2:1: YAML syntax error: found character '\\t' that cannot start any token"),
    ("a: &x 1\nb: *y\n", "s.yaml:2:4: YAML syntax error: found undefined alias 'y'"),
    ("base: &b {k: 1}\nm:\n  <<: *b\n", "s.yaml:3:3: m: YAML merge keys ('<<') are not supported"),
    ("~: 1\n", "s.yaml:1:1: Mapping keys must be plain names"),
    ("a: .nan\n", "s.yaml:1:4: a: '.nan' is not a number texgen accepts"),
])
def test_refused_yaml(text, message):
    with pytest.raises(ConfigError) as info:
        load_text(text, "s.yaml")
    assert str(info.value) == message


def test_scalars_stay_plain():
    """Dates and versions are not turned into objects; YAML 1.1 booleans and numbers are kept."""
    root = load_text("d: 2024-01-01\nv: 1.0.0\nb: true\nn: 12\nf: 0.5\n").root.value
    assert [root[k].value for k in "dvbnf"] == ["2024-01-01", "1.0.0", True, 12, 0.5]


def test_aliases_in_moderation_are_allowed():
    doc = load_text("shared: &le -dt^2 + dr^2\nmetric: {line_element: *le}\nlist: &l [1, 2]\nagain: *l\n")
    assert doc.root.plain()["metric"] == {"line_element": "-dt^2 + dr^2"}
    assert doc.root.plain()["again"] == [1, 2]


def test_billion_laughs_is_refused_quickly():
    """Nine levels of nine aliases would expand to 10^9 strings; refused after MAX_NODES values."""
    lines = ['a: &a ["lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol"]']
    for prev, name in zip("abcdefgh", "bcdefghi"):
        lines.append(f"{name}: &{name} [" + ", ".join([f"*{prev}"] * 9) + "]")
    start = time.perf_counter()
    with pytest.raises(ConfigError) as info:
        load_text("\n".join(lines) + "\n", "bomb.yaml")
    assert time.perf_counter() - start < 5.0  # hang guard, not a speed target
    assert info.value.message == f"File expands to more than {MAX_NODES} values (an alias/anchor expansion bomb?)"
    assert info.value.location.file == "bomb.yaml"


@pytest.mark.parametrize("depth, message", [
    (60, "<string>:1:54: a[0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0]"
         "[0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0]: File is nested more than 50 levels deep"),
    (5000, "<string>: YAML is nested too deeply"),  # PyYAML itself runs out of recursion
])
def test_deep_nesting_is_refused(depth, message):
    with pytest.raises(ConfigError) as info:
        load_text("a: " + "[" * depth + "]" * depth + "\n")
    assert str(info.value) == message


def test_byte_order_mark_is_accepted(write):
    path = write(b"\xef\xbb\xbf" + SIMPLE.encode())
    doc = load_file(path)
    assert doc.root.value["id"].value == "x"
    assert (doc.root.value["id"].line, doc.root.value["id"].column) == (1, 5)


def test_non_utf8_bytes_are_refused_with_position(write):
    path = write(b"id: x\ntitle: Caf\xe9\n")
    with pytest.raises(ConfigError) as info:
        load_file(path)
    assert str(info.value) == f"{path}:2:11: File is not valid UTF-8 (byte 0xe9 at offset 16) (save the file as UTF-8)"


def test_very_large_file_is_refused_before_parsing(write):
    big = "id: x\nnotes: |\n" + ("  " + "x" * 98 + "\n") * (MAX_FILE_BYTES // 100 + 10)
    path = write(big)
    start = time.perf_counter()
    with pytest.raises(ConfigError) as info:
        load_file(path)
    assert time.perf_counter() - start < 1.0  # refused on the size alone
    assert str(info.value) == f"{path}: File is too large ({len(big)} bytes; at most {MAX_FILE_BYTES})"
    with pytest.raises(ConfigError, match="File is too large"):
        load_text(big)


def test_large_file_within_the_limit_loads(write):
    text = "id: x\nnotes: |\n" + ("  " + "x" * 98 + "\n") * 9000
    assert len(text) < MAX_FILE_BYTES
    assert len(load_file(write(text)).root.value["notes"].value) == 99 * 9000


@pytest.mark.parametrize("make, message", [
    (lambda p: p / "missing.yaml", "No such file"),
    (lambda p: p, "Is a folder, expected a spacetime file"),
])
def test_unreadable_paths(tmp_path, make, message):
    path = make(tmp_path)
    with pytest.raises(ConfigError) as info:
        load_file(path)
    assert str(info.value) == f"{path}: {message}"
