"""Relations between library entries, proved with the curvature engine.

``relations`` in a file say how an entry follows from another one:
``limit_of: ID, set: {Q: 0}`` (a parameter value or limit) and
``same_as: ID, map: {t: ..., r: ...}`` (the other entry's coordinates in terms
of this entry's).  :func:`check_relations` proves them and says how (exactly, or
numerically at sample points).
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import Any, Callable, Iterable

import sympy as sp

from ..engine import derive
from ..errors import ConfigError, ConfigErrors, ExpressionError, Location, TexgenError
from ..spec.expressions import expression_to_text, parse_expression
from ..spec.model import Spacetime
from ..spec.schema import namespace


@dataclass(frozen=True)
class RelationResult:
    """The verdict on one declared relation."""

    id: str
    """The entry that declares the relation."""
    source: str
    index: int
    """Position in the entry's ``relations`` list."""
    kind: str
    """``limit_of`` or ``same_as``."""
    other: str
    holds: bool
    method: str
    """``exact`` (canonical difference zero), ``numeric`` (zero at random points, 50 digits), or ``fails``."""
    message: str = ""
    failures: tuple[tuple[str, str], ...] = ()
    """(component, difference in canonical form) for each component that differs."""


def _node_at(section, path: list) -> Any:
    node = section.node
    for step in path:
        value = getattr(node, "value", None)
        if isinstance(value, dict) and step in value:
            node = value[step]
        elif isinstance(value, list) and isinstance(step, int) and step < len(value):
            node = value[step]
        else:
            break
    return node


def _error(model: Spacetime, steps: list, message: str, hint: str | None = None) -> ConfigError:
    section = model.section("relations")
    node = _node_at(section, steps) if section is not None else None
    path = "relations"
    for s in steps:
        path += f"[{s}]" if isinstance(s, int) else f".{s}"
    return ConfigError(message, Location(model.source, getattr(node, "line", None), getattr(node, "column", None),
                                         path), hint)


def _other(model: Spacetime, entries: dict[str, Spacetime], i: int, kind: str, ref: Any) -> Spacetime:
    if not isinstance(ref, str) or ref not in entries:
        close = difflib.get_close_matches(str(ref), list(entries), n=1)
        raise _error(model, [i, kind], f"Expected the id of a library entry but received: '{ref}'",
                     f"did you mean '{close[0]}'?" if close else None)
    return entries[ref]


def _names(model: Spacetime) -> dict[str, sp.Symbol]:
    return {s.name: s.symbol for s in (*model.coordinates, *model.parameters)}


def _renamer(other: Spacetime, model: Spacetime) -> dict:
    """The other entry's coordinates and parameters as this entry's symbols of the same name."""
    mine = _names(model)
    return {s.symbol: mine[s.name] for s in (*other.coordinates, *other.parameters) if s.name in mine}


def _namespace(model: Spacetime, other: Spacetime):
    extra = {p.name: p.symbol for p in other.parameters if p.name not in _names(model)}
    return namespace(model, extra)


def _parse(model: Spacetime, steps: list, text: Any, ns) -> sp.Expr:
    try:
        return parse_expression(text, ns).xreplace(model.definition_substitutions())
    except ExpressionError as exc:
        raise _error(model, steps, exc.message, exc.hint) from None


def _compare(cv, pairs: list[tuple[str, sp.Expr, sp.Expr]]) -> tuple[str, list[tuple[str, str]]]:
    """Method (exact/numeric/fails) and the differing components of (label, derived, expected) pairs."""
    method = "exact"
    bad = []
    for label, got, want in pairs:
        d = got - want
        canon = cv.canonical(d)
        if canon == 0:
            continue
        if cv.is_zero(d):  # the canonical form is not zero: only the numeric test can agree
            method = "numeric"
            continue
        bad.append((label, expression_to_text(canon)))
    return ("fails" if bad else method), bad


def _limit(expr: sp.Expr, values: dict[sp.Symbol, sp.Expr]) -> sp.Expr:
    """Substitute the values; where that is undefined (or a value is infinite), take limits one by one."""
    finite = {k: v for k, v in values.items() if v.is_finite is not False}
    out = expr.xreplace(finite) if len(finite) == len(values) else None
    if out is not None and not out.has(sp.nan, sp.zoo, sp.oo, -sp.oo):
        return out
    out = expr
    for k, v in values.items():
        out = sp.limit(out, k, v)
    return out


def _check_limit(model, other, rel, i, cv) -> RelationResult:
    values = rel.get("set")
    if not isinstance(values, dict) or not values:
        raise _error(model, [i, "set"], f"Expected a mapping of parameter: value but received: {values!r}")
    params = {p.name: p.symbol for p in other.parameters}
    ns = _namespace(model, other)
    sub = {}
    for name, text in values.items():
        if name not in params:
            raise _error(model, [i, "set", name],
                         f"Expected a parameter of '{other.id}' ({', '.join(params) or 'none'}) but received: '{name}'")
        sub[params[name]] = _parse(model, [i, "set", name], text, ns)
    mine = [c.name for c in model.coordinates]
    theirs = [c.name for c in other.coordinates]
    if sorted(mine) != sorted(theirs):
        raise _error(model, [i, "limit_of"], f"Expected '{other.id}' to have the coordinates "
                     f"{', '.join(mine)} but received: {', '.join(theirs)}", "use same_as with a map")
    ren = _renamer(other, model)
    pos = [theirs.index(nm) for nm in mine]
    n = model.dimension
    pairs = []
    for a in range(n):
        for b in range(a, n):
            got = _limit(other.metric[pos[a], pos[b]], sub).xreplace(ren)
            pairs.append((f"g[{mine[a]},{mine[b]}]", got, model.metric[a, b]))
    lam = _limit(sp.sympify(other.cosmological_constant), sub).xreplace(ren)
    pairs.append(("cosmological_constant", lam, sp.sympify(model.cosmological_constant)))
    method, bad = _compare(cv, pairs)
    shown = ", ".join(f"{k} = {v}" for k, v in values.items())
    msg = "" if not bad else (f"'{other.id}' with {shown} is not this metric: {bad[0][0]} differs by {bad[0][1]}"
                              + (f" (and {len(bad) - 1} more)" if len(bad) > 1 else ""))
    return RelationResult(model.id, model.source, i, "limit_of", other.id, not bad, method, msg, tuple(bad))


def _check_map(model, other, rel, i, cv, curvature: Callable[[Spacetime], Any]) -> RelationResult:
    mapping = rel.get("map")
    theirs = [c.name for c in other.coordinates]
    if not isinstance(mapping, dict):
        raise _error(model, [i, "map"], f"Expected a mapping of coordinate: expression but received: {mapping!r}")
    for name in mapping:
        if name not in theirs:
            raise _error(model, [i, "map", name],
                         f"Expected a coordinate of '{other.id}' ({', '.join(theirs)}) but received: '{name}'")
    missing = [nm for nm in theirs if nm not in mapping]
    if missing:
        raise _error(model, [i, "map"], f"Expected an expression for every coordinate of '{other.id}' but "
                     f"received none for: {', '.join(missing)}")
    ns = _namespace(model, other)
    images = [_parse(model, [i, "map", nm], mapping[nm], ns) for nm in theirs]
    ren = _renamer(other, model)
    ren_params = {k: v for k, v in ren.items() if k not in other.coordinate_symbols}
    to_images = {c.symbol: images[k] for k, c in enumerate(other.coordinates)}

    def pull(expr):
        return sp.sympify(expr).xreplace(ren_params).xreplace(to_images)

    x = model.coordinate_symbols
    m, n = other.dimension, model.dimension
    jac = sp.Matrix(m, n, lambda c, a: sp.diff(images[c], x[a]))
    g = sp.Matrix(m, m, lambda c, d: pull(other.metric[c, d]))
    pulled = jac.T * g * jac
    mine = [c.name for c in model.coordinates]
    pairs = [(f"g[{mine[a]},{mine[b]}]", pulled[a, b], model.metric[a, b]) for a in range(n) for b in range(a, n)]
    method, bad = _compare(cv, pairs)
    if not bad:
        ocv = curvature(other)
        inv = [("ricci_scalar", pull(ocv.ricci_scalar), cv.ricci_scalar),
               ("kretschmann", pull(ocv.kretschmann), cv.kretschmann)]
        m2, bad = _compare(cv, inv)
        method = m2 if m2 != "exact" else method
    msg = "" if not bad else (f"'{other.id}' pulled back through the map is not this spacetime: {bad[0][0]} "
                              f"differs by {bad[0][1]}" + (f" (and {len(bad) - 1} more)" if len(bad) > 1 else ""))
    return RelationResult(model.id, model.source, i, "same_as", other.id, not bad, method, msg, tuple(bad))


def relation_results(entries: dict[str, Spacetime], ids: Iterable[str] | None = None
                     ) -> tuple[list[RelationResult], list[ConfigError]]:
    """Check the relations declared by ``ids`` (default: all entries); bad declarations are returned as errors."""
    curv: dict[str, Any] = {}

    def curvature(model: Spacetime):
        if model.id not in curv:
            curv[model.id] = derive(model)
        return curv[model.id]

    results: list[RelationResult] = []
    errors: list[ConfigError] = []
    chosen = list(entries.values()) if ids is None else [entries[i] for i in ids]
    for model in chosen:
        section = model.section("relations")
        if section is None:
            continue
        if not isinstance(section.data, list):
            errors.append(_error(model, [], f"Expected a list of relations but received: {section.data!r}"))
            continue
        for i, rel in enumerate(section.data):
            kinds = [k for k in ("limit_of", "same_as") if isinstance(rel, dict) and k in rel]
            try:
                if len(kinds) != 1:
                    raise _error(model, [i], "Expected exactly one of: 'limit_of', 'same_as' but received: "
                                 f"{rel!r}")
                other = _other(model, entries, i, kinds[0], rel[kinds[0]])
                if kinds[0] == "limit_of":
                    results.append(_check_limit(model, other, rel, i, curvature(model)))
                else:
                    results.append(_check_map(model, other, rel, i, curvature(model), curvature))
            except ConfigError as exc:
                errors.append(exc)
            except (TexgenError, ValueError, TypeError, NotImplementedError, sp.PolynomialError) as exc:
                # a derivation or limit the engine or sympy could not carry out
                why = exc.format_message() if isinstance(exc, TexgenError) else f"{type(exc).__name__}: {exc}"
                results.append(RelationResult(model.id, model.source, i, kinds[0], str(rel[kinds[0]]), False,
                                              "fails", f"cannot be checked: {why}"))
    return results, errors


def check_relations(entries: dict[str, Spacetime], ids: Iterable[str] | None = None) -> list[RelationResult]:
    """Verdicts on the relations of ``entries`` (loaded models by id), or of those named in ``ids``.

    Raises :class:`~texgen.errors.ConfigError` (``ConfigErrors`` for several)
    for relations that cannot be read: an unknown id, a parameter or coordinate
    the other entry lacks, an unreadable expression; each names file, line and
    key path such as ``relations[0].map.t``.
    """
    results, errors = relation_results(entries, ids)
    if len(errors) == 1:
        raise errors[0]
    if errors:
        raise ConfigErrors(errors)
    return results
