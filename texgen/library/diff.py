"""What changed between two versions of a spacetime definition (``texgen diff``).

Changed keys of the definition, and every metric and derived component that
differs, with new − old in the engine's canonical form; the results come from the
cache where it has them.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..engine import derive
from ..errors import ConfigError, ExpressionError
from ..spec.expressions import expression_to_text, parse_expression
from ..spec.model import Spacetime
from ..spec.schema import namespace
from .build import entry_results
from .versions import _srepr, physics_data, physics_hash


DERIVED = ("inverse", "determinant", "christoffel", "riemann_down", "ricci", "ricci_scalar",
           "einstein", "einstein_mixed", "weyl", "invariants")
"""Keys of the results (:func:`texgen.output.results.build_results`) that a diff compares."""


@dataclass(frozen=True)
class ComponentChange:
    """One derived (or metric) component that differs between two versions."""

    quantity: str
    """``metric``, ``christoffel``, ``ricci``, ``invariants``, ..."""
    key: str
    """Component by coordinate names (``r,t,t``) or invariant name."""
    old: str
    new: str
    difference: str
    """new − old in the engine's canonical form, as texgen-parsable text."""


@dataclass(frozen=True)
class SpacetimeDiff:
    """What changed between two versions of one spacetime definition."""

    old_version: str
    new_version: str
    old_hash: str
    new_hash: str
    definition: tuple[str, ...]
    """Changed keys of the definition (``coordinates``, ``parameters.a.range``, ``title``, ...)."""
    components: tuple[ComponentChange, ...]
    """Metric and derived components that differ."""
    comparable: bool = True
    """False when the coordinates differ, so components cannot be matched."""

    @property
    def physics_changed(self) -> bool:
        return self.old_hash != self.new_hash


def _flat(prefix: str, value: Any, out: dict) -> None:
    if isinstance(value, dict):
        for k, v in value.items():
            _flat(f"{prefix}.{k}" if prefix else str(k), v, out)
    else:
        out[prefix] = value


def _definition_changes(old: Spacetime, new: Spacetime) -> list[str]:
    a, b = {}, {}
    _flat("", physics_data(old), a)
    _flat("", physics_data(new), b)
    prose = ("title", "version", "description", "references", "notes", "family")
    for key in prose:
        a[key], b[key] = getattr(old, key), getattr(new, key)
    a["changelog"], b["changelog"] = list(old.changelog), list(new.changelog)
    a["definitions"] = {d.name: _srepr(d.expression) for d in old.definitions}
    b["definitions"] = {d.name: _srepr(d.expression) for d in new.definitions}
    for s in old.sections:
        a[s.key] = s.data
    for s in new.sections:
        b[s.key] = s.data
    return sorted(k for k in set(a) | set(b) if a.get(k) != b.get(k))


def _component_maps(results: dict) -> dict[str, dict[str, str]]:
    out: dict[str, dict[str, str]] = {"metric": dict(results.get("metric", {}))}
    for q in DERIVED:
        v = results.get(q)
        if isinstance(v, dict):
            out[q] = {k: x for k, x in v.items() if isinstance(x, str)}
        elif isinstance(v, str):
            out[q] = {"": v}
    return out


def diff_results(old: Spacetime, old_results: dict, new: Spacetime, new_results: dict,
                 curvature=None) -> SpacetimeDiff:
    """Compare two versions through their results dicts (fresh or from the cache).

    Every component text is read back in the new model's names
    (:func:`texgen.spec.expressions.parse_expression`), and new − old is brought to
    the engine's canonical form with ``curvature`` (a Curvature of ``new``).
    """
    cv = curvature or derive(new)
    ns = namespace(new)
    comparable = [c.name for c in old.coordinates] == [c.name for c in new.coordinates]
    changes: list[ComponentChange] = []
    if comparable:
        a, b = _component_maps(old_results), _component_maps(new_results)
        for q in ["metric", *DERIVED]:
            qa, qb = a.get(q, {}), b.get(q, {})
            for key in sorted(set(qa) | set(qb)):
                ta, tb = qa.get(key, "0"), qb.get(key, "0")
                if ta == tb:
                    continue
                try:
                    d = parse_expression(tb, ns) - parse_expression(ta, ns)
                except ExpressionError:
                    changes.append(ComponentChange(q, key, ta, tb, "(names differ; not comparable)"))
                    continue
                if not cv.is_zero(d):
                    changes.append(ComponentChange(q, key, ta, tb, expression_to_text(cv.canonical(d))))
    return SpacetimeDiff(old.version, new.version, physics_hash(old), physics_hash(new),
                         tuple(_definition_changes(old, new)), tuple(changes), comparable)


def diff_models(old: Spacetime, new: Spacetime, *, cache=None) -> SpacetimeDiff:
    """Derive both versions (or take them from ``cache``) and compare them."""
    old_results = entry_results(old, cache=cache)
    new_cv_box: list = []
    new_results = entry_results(new, cache=cache, keep=new_cv_box)
    return diff_results(old, old_results, new, new_results, curvature=new_cv_box[0] if new_cv_box else None)


def git_revision_text(path: str | Path, rev: str) -> str:
    """The file ``path`` as it was at git revision ``rev`` (``git show REV:path``, no shell)."""
    import subprocess

    p = Path(path).resolve()
    try:
        top = subprocess.run(["git", "rev-parse", "--show-toplevel"], cwd=p.parent, capture_output=True,
                             text=True, check=True, stdin=subprocess.DEVNULL).stdout.strip()
        rel = p.relative_to(Path(top).resolve()).as_posix()
        proc = subprocess.run(["git", "show", f"{rev}:{rel}"], cwd=top, capture_output=True,
                              stdin=subprocess.DEVNULL)
    except (OSError, ValueError, subprocess.CalledProcessError) as exc:
        raise ConfigError(f"Cannot read {path} from git: {exc}") from None
    if proc.returncode != 0:
        msg = proc.stderr.decode("utf-8", "replace").strip().splitlines()
        raise ConfigError(f"Cannot read {path} at revision '{rev}': {msg[-1] if msg else 'git failed'}")
    return proc.stdout.decode("utf-8", "replace")
