"""Reading spacetime files: safe YAML into a tree that remembers where each value sat.

Only YAML's standard tags are accepted (no Python objects), duplicate keys are
errors rather than silently overwritten, and alias expansion is bounded so that
an anchor bomb is refused instead of filling memory.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import yaml

from ..errors import ConfigError, Location

MAX_FILE_BYTES = 1_000_000
"""Largest spacetime file accepted (1 MB; the largest published metric needs a few kB)."""
MAX_NODES = 50_000
"""Most YAML values after alias expansion."""

_STANDARD_TAGS = {
    "tag:yaml.org,2002:str", "tag:yaml.org,2002:int", "tag:yaml.org,2002:float",
    "tag:yaml.org,2002:bool", "tag:yaml.org,2002:null", "tag:yaml.org,2002:map",
    "tag:yaml.org,2002:seq",
}


@dataclass(frozen=True)
class Node:
    """A loaded YAML value with its position (1-based line and column)."""

    value: Any
    """``dict[str, Node]``, ``list[Node]``, or a scalar (str, int, float, bool, None)."""
    line: int
    column: int
    style: str | None = None
    """YAML scalar style: None (plain), quote character, '|' or '>'."""

    def plain(self) -> Any:
        """The value with positions stripped, as plain Python data."""
        if isinstance(self.value, dict):
            return {k: v.plain() for k, v in self.value.items()}
        if isinstance(self.value, list):
            return [v.plain() for v in self.value]
        return self.value


@dataclass(frozen=True)
class Document:
    """A loaded file: its root node, name and content hash."""

    root: Node
    source: str
    sha256: str
    key_lines: dict[str, tuple[int, int]]
    """Position of every mapping key, by key path (``metric.components``)."""


class _Loader(yaml.SafeLoader):
    """SafeLoader without timestamp or binary magic: texgen wants plain scalars."""


# Dates and other implicit types would turn "2023-01-01" or "1.0.0" surprises into objects.
_Loader.yaml_implicit_resolvers = {
    k: [(tag, rx) for tag, rx in v if tag in _STANDARD_TAGS]
    for k, v in yaml.SafeLoader.yaml_implicit_resolvers.copy().items()
}


def _mark(node: yaml.Node) -> tuple[int, int]:
    return node.start_mark.line + 1, node.start_mark.column + 1


class _Converter:
    def __init__(self, source: str):
        self.source = source
        self.count = 0
        self.key_lines: dict[str, tuple[int, int]] = {}
        self.loader = _Loader("")

    def fail(self, node: yaml.Node, message: str, path: str) -> ConfigError:
        line, col = _mark(node)
        return ConfigError(message, Location(self.source, line, col, path or None))

    def convert(self, node: yaml.Node, path: str, depth: int = 0) -> Node:
        self.count += 1
        if self.count > MAX_NODES:
            raise self.fail(node, f"File expands to more than {MAX_NODES} values "
                            "(an alias/anchor expansion bomb?)", path)
        if depth > 50:
            raise self.fail(node, "File is nested more than 50 levels deep", path)
        line, col = _mark(node)
        if node.tag not in _STANDARD_TAGS:
            raise self.fail(node, f"Unsupported YAML tag '{node.tag}'",
                            path) from None
        if isinstance(node, yaml.MappingNode):
            out: dict[str, Node] = {}
            for key_node, value_node in node.value:
                if isinstance(key_node, yaml.ScalarNode) and key_node.tag not in _STANDARD_TAGS:
                    raise self.fail(key_node, f"Unsupported YAML tag '{key_node.tag}'", path)
                if not isinstance(key_node, yaml.ScalarNode) or key_node.tag == "tag:yaml.org,2002:null":
                    raise self.fail(key_node, "Mapping keys must be plain names", path)
                if key_node.tag == "tag:yaml.org,2002:merge" or key_node.value == "<<":
                    raise self.fail(key_node, "YAML merge keys ('<<') are not supported", path)
                try:
                    key = (str(self.loader.construct_object(key_node))
                           if key_node.tag != "tag:yaml.org,2002:str" else key_node.value)
                except yaml.constructor.ConstructorError as exc:
                    raise self.fail(key_node, f"Cannot read key: {exc.problem}", path) from None
                sub = f"{path}.{key}" if path else key
                if key in out:
                    first = out[key]
                    raise self.fail(key_node, f"Duplicate key '{key}' (first given on line {first.line})", sub)
                self.key_lines[sub] = _mark(key_node)
                out[key] = self.convert(value_node, sub, depth + 1)
            return Node(out, line, col)
        if isinstance(node, yaml.SequenceNode):
            return Node([self.convert(v, f"{path}[{i}]", depth + 1) for i, v in enumerate(node.value)],
                        line, col)
        try:
            value = self.loader.construct_object(node)
        except yaml.constructor.ConstructorError as exc:
            raise self.fail(node, f"Cannot read value: {exc.problem}", path) from None
        if isinstance(value, float) and value != value:  # NaN
            raise self.fail(node, "'.nan' is not a number texgen accepts", path)
        return Node(value, line, col, node.style)


def load_text(text: str | bytes, source: str = "<string>") -> Document:
    """Parse YAML text into a located :class:`Document`.

    Raises :class:`~texgen.errors.ConfigError` naming the file, line and column.
    """
    raw = text.encode("utf-8") if isinstance(text, str) else text
    if len(raw) > MAX_FILE_BYTES:
        raise ConfigError(f"File is too large ({len(raw)} bytes; at most {MAX_FILE_BYTES})",
                          Location(source))
    try:
        decoded = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        line_start = raw.rfind(b"\n", 0, exc.start) + 1
        column = len(raw[line_start: exc.start].decode("utf-8", errors="replace")) + 1
        raise ConfigError(f"File is not valid UTF-8 (byte 0x{raw[exc.start]:02x} at offset {exc.start})",
                          Location(source, line, column), hint="save the file as UTF-8") from None
    if decoded.startswith("\ufeff"):
        decoded = decoded[1:]
    try:
        nodes = list(yaml.compose_all(decoded, Loader=_Loader))
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        problem = exc.problem or exc.context or "malformed YAML"
        loc = Location(source, mark.line + 1, mark.column + 1) if mark else Location(source)
        raise ConfigError(f"YAML syntax error: {problem}", loc) from None
    except yaml.YAMLError as exc:
        raise ConfigError(f"YAML error: {exc}", Location(source)) from None
    except RecursionError:
        raise ConfigError("YAML is nested too deeply", Location(source)) from None
    if not nodes or nodes[0] is None:
        raise ConfigError("File is empty; expected a mapping of spacetime keys", Location(source, 1, 1))
    if len(nodes) > 1:
        second = nodes[1]
        raise ConfigError("File holds more than one YAML document; put one spacetime per file",
                          Location(source, *_mark(second)) if second is not None else Location(source))
    conv = _Converter(source)
    root = conv.convert(nodes[0], "")
    if not isinstance(root.value, dict):
        raise ConfigError("Expected a mapping of spacetime keys at the top of the file",
                          Location(source, root.line, root.column))
    return Document(root, source, hashlib.sha256(raw).hexdigest(), conv.key_lines)


def load_file(path: str | Path) -> Document:
    """Read and parse one spacetime file."""
    p = Path(path)
    try:
        size = p.stat().st_size
        if size > MAX_FILE_BYTES:
            raise ConfigError(f"File is too large ({size} bytes; at most {MAX_FILE_BYTES})", Location(str(p)))
        raw = p.read_bytes()
    except FileNotFoundError:
        raise ConfigError("No such file", Location(str(p))) from None
    except IsADirectoryError:
        raise ConfigError("Is a folder, expected a spacetime file", Location(str(p))) from None
    except OSError as exc:
        raise ConfigError(f"Cannot read file: {exc.strerror}", Location(str(p))) from None
    return load_text(raw, str(p))
