"""Seeded mutations of spacetime files and the one target they are fed to.

Shared by tests/test_hardening.py (small hypothesis runs in the suite) and
bench/fuzz_long.py (long runs by hand). Every mutation is a pure function of
``(seed file, random.Random state)``, so any failure is replayed from its seed.
"""
from __future__ import annotations

import random
import signal
import time
from dataclasses import dataclass
from pathlib import Path

import yaml

from texgen.physics.claims import parse_claims
from texgen.errors import TexgenError
from texgen.spec.loader import load_text
from texgen.spec.schema import build_model

LIBRARY = Path(__file__).resolve().parents[2] / "metrics_yaml"
SEEDS = {str(p.relative_to(LIBRARY)): p.read_bytes() for p in sorted(LIBRARY.rglob("*.yaml"))}
"""The valid spacetime files every mutation starts from, by path below metrics_yaml/."""

SPACETIME_KEYS = ("texgen", "id", "title", "version", "family", "description", "references", "changelog",
                  "coordinates", "parameters", "functions", "definitions", "metric", "line_element",
                  "components", "conventions", "signature", "riemann_sign", "derive", "claims", "source",
                  "tetrad", "structure", "impose", "relations", "name", "range", "period", "value",
                  "quantity", "indices", "equals", "property", "holds", "energy_condition", "verdict")
"""Keys texgen reads (and a few it does not), used to rename and insert keys."""

TOKENS = ("", "0", "-1", "1e999", "-.inf", ".nan", "~", "null", "true", "[]", "{}", "r", "t", "M",
          "2r", "r^2", "r**99999", "9" * 80, "1/0", "0^-1", "sin", "diff(f(r), r, 9)", "(" * 70 + "r" + ")" * 70,
          "__import__('os').system('true')", "().__class__", "lambda: 0", "'quoted'", "\"dq\"", "\t",
          "&a [*a, *a]", "*undefined", "!!python/object:os.system", "!!binary AAAA", "<<: {}", "? complex",
          "- item", "{a: 1", "[1, 2", "\\input{/etc/passwd}", "\\write18{true}", "\ufeff", "\u00e9\u00df",
          "r > 0", "0 < theta < pi", "-+++", "+-", "positive", "1.0.0", "x" * 300)
"""Hostile and borderline fragments: YAML features, unsafe Python, huge numbers, LaTeX."""

BYTES = (b"\x00", b"\xff", b"\xc3", b"\t", b"\r", b"\n", b":", b"-", b"[", b"{", b"&", b"*", b"!", b"%",
         b"'", b'"', b"#", b"|", b">", b"\xe2\x80\xa8")


def _byte_ops(data: bytes, rng: random.Random) -> bytes:
    if not data:
        return rng.choice(BYTES)
    i = rng.randrange(len(data))
    op = rng.randrange(5)
    if op == 0:  # flip one bit
        return data[:i] + bytes([data[i] ^ (1 << rng.randrange(8))]) + data[i + 1:]
    if op == 1:  # insert a special byte
        return data[:i] + rng.choice(BYTES) + data[i:]
    if op == 2:  # delete a run
        return data[:i] + data[i + rng.randint(1, 40):]
    if op == 3:  # duplicate a run
        j = min(len(data), i + rng.randint(1, 80))
        return data[:j] + data[i:j] + data[j:]
    return data[:i]  # truncate


def _line_ops(data: bytes, rng: random.Random) -> bytes:
    lines = data.split(b"\n")
    i = rng.randrange(len(lines))
    op = rng.randrange(6)
    if op == 0:
        del lines[i]
    elif op == 1:
        lines.insert(i, lines[rng.randrange(len(lines))])
    elif op == 2:
        j = rng.randrange(len(lines))
        lines[i], lines[j] = lines[j], lines[i]
    elif op == 3:  # re-indent
        lines[i] = b" " * rng.choice((0, 1, 2, 3, 4, 8)) + lines[i].lstrip()
    elif op == 4:  # splice a line of another library file
        other = rng.choice(list(SEEDS.values())).split(b"\n")
        lines.insert(i, rng.choice(other))
    else:  # replace the value after a colon with a hostile token
        head, sep, _ = lines[i].partition(b":")
        if sep:
            lines[i] = head + b": " + rng.choice(TOKENS).encode("utf-8")
    return b"\n".join(lines)


def _paths(tree, limit: int = 5000) -> list[tuple]:
    """Key paths into ``tree``, each container visited once: YAML aliases can make it cyclic or huge."""
    out: list[tuple] = []
    seen: set[int] = set()
    stack = [((), tree)]
    while stack and len(out) < limit:
        prefix, node = stack.pop()
        out.append(prefix)
        if isinstance(node, (dict, list)):
            if id(node) in seen:
                continue
            seen.add(id(node))
            items = node.items() if isinstance(node, dict) else enumerate(node)
            stack.extend((prefix + (k,), v) for k, v in items)
    return out


def _value(rng: random.Random, depth: int = 0):
    kind = rng.randrange(8 if depth < 3 else 5)
    if kind == 0:
        return rng.choice(TOKENS)
    if kind == 1:
        return rng.choice((0, 1, -1, 2, 10**30, 0.5, -0.0, float("inf")))
    if kind == 2:
        return rng.choice((True, False, None))
    if kind == 3:
        return rng.choice(SPACETIME_KEYS)
    if kind == 4:
        return "".join(rng.choice("rtMa^*+-/() .0123456789,=<>_") for _ in range(rng.randint(0, 30)))
    if kind == 5:
        return [_value(rng, depth + 1) for _ in range(rng.randint(0, 4))]
    return {rng.choice(SPACETIME_KEYS): _value(rng, depth + 1) for _ in range(rng.randint(0, 4))}


def _tree_ops(data: bytes, rng: random.Random) -> bytes:
    """Mutate the parsed document (rename, delete, replace, insert keys and values) and dump it again."""
    try:
        tree = yaml.safe_load(data)
    except (yaml.YAMLError, RecursionError):
        return _byte_ops(data, rng)
    if not isinstance(tree, (dict, list)):
        return yaml.safe_dump(_value(rng), allow_unicode=True).encode("utf-8")
    paths = [p for p in _paths(tree) if p]
    if not paths:
        return yaml.safe_dump(_value(rng), allow_unicode=True).encode("utf-8")
    path = rng.choice(paths)
    parent = tree
    for k in path[:-1]:
        parent = parent[k]
    last = path[-1]
    op = rng.randrange(4)
    if op == 0:
        del parent[last]
    elif op == 1 and isinstance(parent, dict):
        parent[rng.choice(SPACETIME_KEYS)] = parent.pop(last)
    elif op == 2 and isinstance(parent, list):
        parent.insert(last, _value(rng))
    else:
        parent[last] = _value(rng)
    try:
        return yaml.safe_dump(tree, allow_unicode=True, sort_keys=False, width=10**6).encode("utf-8")
    except (yaml.YAMLError, RecursionError):  # a cyclic tree with a key changed may not dump
        return _byte_ops(data, rng)


OPERATORS = (_byte_ops, _line_ops, _tree_ops)


def mutate(data: bytes, rng: random.Random, rounds: int) -> bytes:
    """``rounds`` random byte, line or tree mutations of ``data``."""
    for _ in range(rounds):
        data = rng.choice(OPERATORS)(data, rng)
    return data


def mutant(seed_name: str, seed: int, rounds: int) -> bytes:
    """The mutant of library file ``seed_name`` made by ``random.Random(seed)``: replayable."""
    return mutate(SEEDS[seed_name], random.Random(seed), rounds)


class Hang(Exception):
    """Raised by the alarm when one input takes longer than the hang bound."""


@dataclass(frozen=True)
class Outcome:
    """What one input did: ``accepted`` or the name of texgen's error class, and the seconds taken."""

    result: str
    seconds: float


def run_target(data: bytes, source: str = "fuzz.yaml", hang_seconds: float = 0) -> Outcome:
    """Load, validate and read the claims of ``data``, as ``texgen validate`` and ``check`` do first.

    Returns the outcome when texgen accepts the input or refuses it with its own
    error; any other exception propagates (that is a defect). With
    ``hang_seconds`` (main thread only) an alarm raises :class:`Hang` instead
    of waiting for ever.
    """
    old = None
    if hang_seconds:
        def _ring(signum, frame):
            raise Hang(f"no result after {hang_seconds} s")

        old = signal.signal(signal.SIGALRM, _ring)
        signal.setitimer(signal.ITIMER_REAL, hang_seconds)
    start = time.perf_counter()
    try:
        try:
            model = build_model(load_text(data, source))
            parse_claims(model)
            result = "accepted"
        except TexgenError as exc:
            result = type(exc).__name__
    finally:
        if hang_seconds:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
    return Outcome(result, time.perf_counter() - start)
