"""The ``claims``, ``source`` and ``impose`` sections of a spacetime file, read into typed values.

Every problem is reported with file, line, column and key path (all of them at
once); expressions go through texgen's own parser in the file's namespace, with the
file's definitions expanded.
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import Any

import sympy as sp

from ..errors import ConfigError, ConfigErrors, ExpressionError, Location
from ..spec.expressions import parse_expression
from ..spec.model import Spacetime
from ..spec.schema import namespace
from . import sources as _sources


SCALARS = ("ricci_scalar", "kretschmann", "ricci_squared", "weyl_squared", "determinant")
COMPONENTS = {"christoffel": 3, "christoffel_first": 3, "riemann": 4, "riemann_down": 4, "ricci": 2,
              "einstein": 2, "einstein_mixed": 2, "weyl": 4, "metric_inverse": 2}
"""Component quantities and their number of indices."""
MATTER = ("energy_density", "pressure")
QUANTITIES = SCALARS + tuple(COMPONENTS) + MATTER + ("horizons",)
PROPERTIES = ("vacuum", "flat", "conformally_flat", "einstein_space")
ENERGY_CONDITIONS = ("null", "weak", "strong", "dominant")
VERDICTS = ("holds", "violated")
STATUSES = ("proved", "agrees_numerically", "fails", "undecided")
"""``undecided``: texgen could not decide (e.g. the matter analysis is not available); never a pass."""

_CLAIM_KEYS = ("label", "quantity", "property", "energy_condition", "indices", "equals", "holds", "verdict",
               "note", "reference")


@dataclass(frozen=True)
class Claim:
    """One parsed claim."""

    label: str
    """The author's label, or ``claims[i]``."""
    kind: str
    """``scalar``, ``component``, ``matter``, ``horizons``, ``property`` or ``energy_condition``."""
    name: str
    """Quantity, property or energy condition name."""
    indices: tuple[int, ...] = ()
    expected: Any = None
    """sympy expression (scalar, component, matter), tuple of them (horizons), bool (property), verdict str."""
    written: str = ""
    """The claimed value as written in the file."""
    note: str = ""
    reference: str = ""
    location: Location | None = None


class _Errors:
    def __init__(self, spacetime: Spacetime):
        self.source = spacetime.source
        self.items: list[ConfigError] = []

    def add(self, node, path: str, message: str, hint: str | None = None, column_offset: int | None = None) -> None:
        line = getattr(node, "line", None)
        col = getattr(node, "column", None)
        if col is not None and column_offset is not None and isinstance(node.value, str) \
                and node.style in (None, '"', "'") and "\n" not in node.value:
            col += column_offset + (1 if node.style else 0)
        self.items.append(ConfigError(message, Location(self.source, line, col, path), hint))

    def raise_if_any(self) -> None:
        if len(self.items) == 1:
            raise self.items[0]
        if self.items:
            raise ConfigErrors(self.items)


def _shown(v: Any) -> str:
    if isinstance(v, dict):
        return "a mapping"
    if isinstance(v, list):
        return "a list"
    return repr(v) if isinstance(v, str) else str(v)


def _hint(name: str, allowed) -> str:
    close = difflib.get_close_matches(str(name), list(allowed), n=1, cutoff=0.5)
    return f"did you mean '{close[0]}'?" if close else "allowed: " + ", ".join(allowed)


def _namespace(spacetime: Spacetime, extra=None):
    return namespace(spacetime, extra)


def _expr(errs: _Errors, node, path: str, ns, subs) -> sp.Expr | None:
    v = node.value
    if isinstance(v, bool) or not isinstance(v, (str, int, float)):
        errs.add(node, path, f"Expected an expression but received: {_shown(v)}")
        return None
    try:
        e = parse_expression(v, ns)
    except ExpressionError as exc:
        errs.add(node, path, exc.message, exc.hint, getattr(exc, "column", None))
        return None
    return e.xreplace(subs) if subs else e


def _index(errs: _Errors, node, path: str, spacetime: Spacetime) -> int | None:
    names = [c.name for c in spacetime.coordinates]
    v = node.value
    n = spacetime.dimension
    if isinstance(v, bool):
        errs.add(node, path, f"Expected a coordinate name or a number 0..{n - 1} but received: {v}")
        return None
    if isinstance(v, int):
        if 0 <= v < n:
            return v
        errs.add(node, path, f"Index {v} is out of range: the coordinates are numbered 0..{n - 1}")
        return None
    if isinstance(v, str) and v in names:
        return names.index(v)
    errs.add(node, path, f"Expected a coordinate name or a number 0..{n - 1} but received: {_shown(v)}",
             _hint(v, names) if isinstance(v, str) else None)
    return None


def parse_claims(spacetime: Spacetime) -> tuple[Claim, ...]:
    """The ``claims`` section as :class:`Claim` objects; every problem is raised at once as ConfigError(s)."""
    sec = spacetime.section("claims")
    if sec is None:
        return ()
    errs = _Errors(spacetime)
    if not isinstance(sec.node.value, list):
        errs.add(sec.node, "claims", f"Expected a list but received: {_shown(sec.data)}")
        errs.raise_if_any()
    ns = _namespace(spacetime)
    subs = spacetime.definition_substitutions()
    out: list[Claim] = []
    for i, item in enumerate(sec.node.value):
        path = f"claims[{i}]"
        if not isinstance(item.value, dict):
            errs.add(item, path, f"Expected a mapping but received: {_shown(item.value)}")
            continue
        d = item.value
        before = len(errs.items)
        for key, val in d.items():
            if key not in _CLAIM_KEYS:
                errs.add(val, f"{path}.{key}", f"Unknown key '{key}'", _hint(key, _CLAIM_KEYS))
        heads = [k for k in ("quantity", "property", "energy_condition") if k in d]
        if len(heads) != 1:
            errs.add(item, path, "Expected exactly one of 'quantity', 'property', 'energy_condition' but received: "
                     + (", ".join(f"'{h}'" for h in heads) if heads else "none"))
            continue
        head = heads[0]
        hnode = d[head]
        name = hnode.value
        text = {}
        for k in ("label", "note", "reference"):
            if k in d:
                if not isinstance(d[k].value, (str, int, float)) or isinstance(d[k].value, bool):
                    errs.add(d[k], f"{path}.{k}", f"Expected a string but received: {_shown(d[k].value)}")
                else:
                    text[k] = str(d[k].value)
        label = text.get("label", path)
        loc = Location(spacetime.source, item.line, item.column, path)
        common = dict(label=label, note=text.get("note", ""), reference=text.get("reference", ""), location=loc)
        # YAML reads `null` as nothing: accept it as the null energy condition.
        if head == "energy_condition" and name is None:
            name = "null"
        allowed = {"quantity": QUANTITIES, "property": PROPERTIES, "energy_condition": ENERGY_CONDITIONS}[head]
        if not isinstance(name, str) or name not in allowed:
            what = head.replace("_", " ")
            errs.add(hnode, f"{path}.{head}", f"Expected a {what} name but received: {_shown(name)}",
                     _hint(name, allowed) if isinstance(name, str) else "allowed: " + ", ".join(allowed))
            continue
        if head == "property":
            if "equals" in d or "indices" in d or "verdict" in d:
                bad = next(k for k in ("equals", "indices", "verdict") if k in d)
                errs.add(d[bad], f"{path}.{bad}", f"A property claim takes 'holds', not '{bad}'")
                continue
            holds = True
            if "holds" in d:
                if not isinstance(d["holds"].value, bool):
                    errs.add(d["holds"], f"{path}.holds", f"Expected true or false but received: "
                             f"{_shown(d['holds'].value)}")
                    continue
                holds = d["holds"].value
            if name == "conformally_flat" and spacetime.dimension < 4:
                errs.add(hnode, f"{path}.property", "conformally_flat needs four or more dimensions "
                         "(the Weyl tensor vanishes identically below four)")
                continue
            out.append(Claim(kind="property", name=name, expected=holds, written=str(holds).lower(), **common))
            continue
        if head == "energy_condition":
            if "verdict" not in d:
                errs.add(item, path, "Missing required key 'verdict'")
                continue
            v = d["verdict"].value
            if v not in VERDICTS:
                errs.add(d["verdict"], f"{path}.verdict", f"Expected one of: {', '.join(VERDICTS)} but received: "
                         f"{_shown(v)}", _hint(v, VERDICTS) if isinstance(v, str) else None)
                continue
            out.append(Claim(kind="energy_condition", name=name, expected=v, written=v, **common))
            continue
        if "equals" not in d:
            errs.add(item, path, "Missing required key 'equals'")
            continue
        enode = d["equals"]
        nidx = COMPONENTS.get(name, 1 if name == "pressure" else 0)
        idx: list[int] = []
        if nidx:
            if "indices" not in d:
                errs.add(item, path, f"Missing required key 'indices' ({nidx} for {name})")
                continue
            inode = d["indices"]
            if not isinstance(inode.value, list):
                errs.add(inode, f"{path}.indices", f"Expected a list of {nidx} indices but received: "
                         f"{_shown(inode.value)}")
                continue
            if len(inode.value) != nidx:
                errs.add(inode, f"{path}.indices", f"Expected {nidx} indices for {name} but received: "
                         f"{len(inode.value)}")
                continue
            for j, x in enumerate(inode.value):
                k = _index(errs, x, f"{path}.indices[{j}]", spacetime)
                if k is not None:
                    idx.append(k)
            if name == "pressure" and idx == [_time_index(spacetime)]:
                errs.add(inode.value[0], f"{path}.indices[0]", "A pressure is along a spatial frame direction, "
                         "not along time")
        elif "indices" in d:
            errs.add(d["indices"], f"{path}.indices", f"{name} is a scalar and takes no indices")
            continue
        if name == "horizons":
            if not isinstance(enode.value, list):
                errs.add(enode, f"{path}.equals", f"Expected a list of radii but received: {_shown(enode.value)}")
                continue
            vals = [_expr(errs, x, f"{path}.equals[{j}]", ns, subs) for j, x in enumerate(enode.value)]
            if len(errs.items) == before:
                out.append(Claim(kind="horizons", name=name, expected=tuple(vals),
                                 written="[" + ", ".join(str(x.value) for x in enode.value) + "]", **common))
            continue
        e = _expr(errs, enode, f"{path}.equals", ns, subs)
        if len(errs.items) != before or e is None:
            continue
        kind = "scalar" if name in SCALARS else "matter" if name in MATTER else "component"
        out.append(Claim(kind=kind, name=name, indices=tuple(idx), expected=e, written=str(enode.value), **common))
    errs.raise_if_any()
    return tuple(out)


def _time_index(spacetime: Spacetime) -> int:
    sig = spacetime.conventions.signature
    odd = "-" if spacetime.conventions.metric_sign > 0 else "+"
    return sig.index(odd) if sig.count(odd) == 1 else 0


def parse_source(spacetime: Spacetime) -> _sources.Source | None:
    """The ``source`` section as a :class:`texgen.physics.sources.Source`, or ``None`` if there is none."""
    sec = spacetime.section("source")
    if sec is None:
        return None
    errs = _Errors(spacetime)
    node = sec.node
    if not isinstance(node.value, dict):
        errs.add(node, "source", f"Expected a mapping but received: {_shown(sec.data)}")
        errs.raise_if_any()
    d = node.value
    if "type" not in d:
        errs.add(node, "source", "Missing required key 'type'")
        errs.raise_if_any()
    typ = d["type"].value
    if typ not in _sources.SOURCE_TYPES:
        errs.add(d["type"], "source.type", f"Expected one of: {', '.join(_sources.SOURCE_TYPES)} but received: "
                 f"{_shown(typ)}", _hint(typ, _sources.SOURCE_TYPES) if isinstance(typ, str) else None)
        errs.raise_if_any()
    keys = _sources.SOURCE_KEYS[typ]
    for k, v in d.items():
        if k != "type" and k not in keys:
            errs.add(v, f"source.{k}", f"Unknown key '{k}' for a {typ} source",
                     _hint(k, keys) if keys else "a vacuum source takes only 'type'")
    for k in keys:
        if k not in d and not (typ == "scalar_field" and k == "potential"):
            errs.add(node, "source", f"Missing required key '{k}' for a {typ} source")
    errs.raise_if_any()
    subs = spacetime.definition_substitutions()
    ns = _namespace(spacetime)
    names = [c.name for c in spacetime.coordinates]
    vals: dict[str, Any] = {}
    for k in keys:
        if k not in d:
            continue
        if k in ("potential", "velocity", "null_vector") and typ != "scalar_field":
            vnode = d[k]
            if not isinstance(vnode.value, dict):
                errs.add(vnode, f"source.{k}", f"Expected a mapping from coordinate names to components but "
                         f"received: {_shown(vnode.value)}")
                continue
            comp = [sp.S.Zero] * spacetime.dimension
            for cname, cnode in vnode.value.items():
                if cname not in names:
                    errs.add(cnode, f"source.{k}.{cname}", f"Unknown coordinate '{cname}'", _hint(cname, names))
                    continue
                e = _expr(errs, cnode, f"source.{k}.{cname}", ns, subs)
                if e is not None:
                    comp[names.index(cname)] = e
            vals["vector"] = tuple(comp)
        elif k == "potential":
            fsym = sp.Symbol("field", real=True)
            e = _expr(errs, d[k], "source.potential", _namespace(spacetime, {"field": fsym}), subs)
            vals["potential"] = e
        else:
            vals[k] = _expr(errs, d[k], f"source.{k}", ns, subs)
    errs.raise_if_any()
    if typ == "scalar_field" and vals.get("potential") is not None:
        vals["potential"] = vals["potential"].xreplace({sp.Symbol("field", real=True): vals["field"]})
    return _sources.Source(type=typ, **{k: v for k, v in vals.items() if v is not None})


def parse_impose(spacetime: Spacetime) -> tuple[sp.Expr, ...]:
    """The ``impose`` equations as expressions ``lhs - rhs`` that the author sets to zero."""
    sec = spacetime.section("impose")
    if sec is None:
        return ()
    errs = _Errors(spacetime)
    ns = _namespace(spacetime)
    subs = spacetime.definition_substitutions()
    out = []
    for i, item in enumerate(sec.node.value if isinstance(sec.node.value, list) else []):
        path = f"impose[{i}]"
        v = item.value
        if not isinstance(v, str) or v.count("=") != 1 or "==" in v or "<=" in v or ">=" in v:
            errs.add(item, path, f"Expected an equation 'lhs = rhs' but received: {_shown(v)}")
            continue
        lhs, rhs = v.split("=")
        try:
            left = parse_expression(lhs.strip(), ns)
        except ExpressionError as exc:
            col = getattr(exc, "column", None)
            errs.add(item, path, exc.message, exc.hint,
                     None if col is None else col + len(lhs) - len(lhs.lstrip()))
            continue
        try:
            right = parse_expression(rhs.strip(), ns)
        except ExpressionError as exc:
            col = getattr(exc, "column", None)
            errs.add(item, path, exc.message, exc.hint,
                     None if col is None else col + len(lhs) + 1 + len(rhs) - len(rhs.lstrip()))
            continue
        out.append((left - right).xreplace(subs))
    errs.raise_if_any()
    return tuple(out)
