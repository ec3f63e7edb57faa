"""Versions of library entries: a canonical hash of the physics, version checks, diffs.

The physics hash covers what decides the geometry (metric with definitions
expanded, coordinates with ranges and periods, parameters with assumptions and
ranges, functions, cosmological constant, conventions) and nothing a reader
edits freely (title, description, references, notes, changelog, version,
comments, layout).  It is built from lex-ordered text of canonical forms inside
JSON with sorted keys, so it is the same in every process and on every machine.
"""
from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable

import sympy as sp

from ..errors import ConfigError, Location
from ..spec.model import Range, Spacetime

RECORD_FILE = "VERSIONS.json"
"""The stored (id, version, physics hash) record of a library folder."""

_SEMVER = re.compile(r"^(\d+)\.(\d+)\.(\d+)(?:-([0-9A-Za-z.\-]+))?$")


_ATOM = re.compile(r"\b(Symbol|Dummy|Function)\('([^']*)'((?:, \w+=\w+)+)\)")


def _srepr(expr: Any) -> str:
    """srepr with each symbol's assumptions sorted: sympy caches symbols, and a cached one
    keeps the keyword order it was first made with, which differs between processes."""
    def fix(m: re.Match) -> str:
        attrs = sorted(a.strip() for a in m[3].split(",") if a.strip())
        return f"{m[1]}('{m[2]}', {', '.join(attrs)})"

    return _ATOM.sub(fix, sp.srepr(expr))


def _canon(expr: Any) -> str:
    """Text of a canonical form: expanded numerator over expanded denominator, printed in lex order.

    ``cancel`` makes ``1 - 2M/r`` and ``(r - 2M)/r`` the same; printing the expanded
    parts in lex order (rather than ``srepr`` of the tree) keeps the text independent of
    how sympy happened to build the tree in this process (cached results, unevaluated
    products), which differs between processes.
    """
    if expr is None:
        return ""
    e = sp.sympify(expr)
    try:
        e = sp.cancel(e)
    except (sp.PolynomialError, TypeError, ValueError, NotImplementedError):
        pass  # the expression as built is canonical enough for non-rational input
    num, den = sp.fraction(e)
    num, den = sp.expand(num), sp.expand(den)
    if den.could_extract_minus_sign():
        num, den = -num, -den
    return sp.sstr(num, order="lex") + " / " + sp.sstr(den, order="lex")


def _range(rng: Range | None) -> list | None:
    if rng is None:
        return None
    return [_canon(rng.lower), rng.lower_strict, _canon(rng.upper), rng.upper_strict]


def physics_data(model: Spacetime) -> dict:
    """The physics of ``model`` as plain, canonical data (what :func:`physics_hash` hashes)."""
    conv = model.conventions
    n = model.dimension
    return {
        "coordinates": [{"name": c.name, "symbol": _srepr(c.symbol), "range": _range(c.range),
                         "period": _canon(c.period)} for c in model.coordinates],
        "parameters": {p.name: {"symbol": _srepr(p.symbol), "assumptions": sorted(p.assumptions),
                                "range": _range(p.range)} for p in model.parameters},
        "functions": {f.name: {"arguments": [str(a) for a in f.arguments],
                               "assumptions": sorted(f.assumptions)} for f in model.functions},
        "metric": {f"{i},{j}": _canon(model.metric[i, j]) for i in range(n) for j in range(i, n)
                   if model.metric[i, j] != 0},
        "cosmological_constant": _canon(model.cosmological_constant),
        "conventions": {"signature": conv.signature, "riemann_sign": int(conv.riemann_sign),
                        "units": conv.units, "G": str(conv.G or ""), "c": str(conv.c or "")},
    }


def physics_hash(model: Spacetime) -> str:
    """SHA-256 (hex) of :func:`physics_data`; unchanged by comments, layout and prose."""
    text = json.dumps(physics_data(model), sort_keys=True, ensure_ascii=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def parse_version(text: str) -> tuple[int, int, int, str]:
    """``'1.2.3-rc1'`` -> ``(1, 2, 3, 'rc1')``; raises ConfigError for anything else."""
    m = _SEMVER.match(str(text))
    if not m:
        raise ConfigError(f"Expected a semantic version such as '1.0.0' but received: '{text}'")
    return int(m[1]), int(m[2]), int(m[3]), m[4] or ""


def _newer(a: str, b: str) -> bool:
    """True if version ``a`` is later than ``b`` (a pre-release precedes its release)."""
    pa, pb = parse_version(a), parse_version(b)
    if pa[:3] != pb[:3]:
        return pa[:3] > pb[:3]
    return (pa[3] == "" and pb[3] != "") or (pa[3] != "" and pb[3] != "" and pa[3] > pb[3])


@dataclass(frozen=True)
class VersionIssue:
    """One problem with an entry's version, changelog or recorded hash."""

    id: str
    source: str
    message: str

    def format_message(self) -> str:
        return f"{self.source}: {self.id}: {self.message}"


def record(models: Iterable[Spacetime], root: str | Path | None = None) -> dict:
    """The version record of ``models``: id -> version, physics hash and file (relative to ``root``)."""
    entries = {}
    for m in models:
        file = Path(m.source)
        if root is not None:
            try:
                file = file.resolve().relative_to(Path(root).resolve())
            except ValueError:
                pass
        entries[m.id] = {"version": m.version, "physics": physics_hash(m), "file": file.as_posix()}
    return {"generator": "texgen", "format": 1, "entries": dict(sorted(entries.items()))}


def load_record(path: str | Path) -> dict:
    """Read a stored record; a missing file is an empty record, a damaged one a ConfigError."""
    p = Path(path)
    if not p.is_file():
        return {"generator": "texgen", "format": 1, "entries": {}}
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ConfigError(f"Cannot read the version record: {exc}", Location(str(p))) from None
    entries = data.get("entries") if isinstance(data, dict) else None
    if not isinstance(entries, dict) or not all(
            isinstance(v, dict) and isinstance(v.get("version"), str) and isinstance(v.get("physics"), str)
            for v in entries.values()):
        raise ConfigError("Expected a version record with 'entries': {id: {version, physics}} but received "
                          "something else", Location(str(p)))
    return data


def check_versions(models: Iterable[Spacetime], stored: dict | None = None) -> list[VersionIssue]:
    """Problems with versions: no changelog entry for the version, physics changed without a bump.

    Parameters
    ----------
    models:
        Loaded entries.
    stored:
        A record from :func:`load_record` (``None``: only the changelogs are checked).
    """
    issues = []
    known = (stored or {}).get("entries", {})
    for m in models:
        def issue(msg: str) -> None:
            issues.append(VersionIssue(m.id, m.source, msg))

        if m.version not in dict(m.changelog):
            issue(f"version {m.version} has no changelog entry")
        old = known.get(m.id)
        if old is None:
            if stored is not None:
                issue("not in the version record (run 'texgen library --record' to add it)")
            continue
        now = physics_hash(m)
        try:
            newer = _newer(m.version, old["version"])
        except ConfigError:
            newer = True  # a malformed version is reported by the schema already
        if now != old["physics"] and m.version == old["version"]:
            issue(f"physics changed but version not bumped (still {m.version}; "
                  f"hash {old['physics'][:12]} -> {now[:12]})")
        elif m.version != old["version"] and not newer:
            issue(f"version {m.version} is lower than the recorded {old['version']}")
        elif now == old["physics"] and m.version != old["version"]:
            pass  # a version bump for prose or claims alone is allowed
    return issues
