"""Claims: what the author of a spacetime file believes, decided against the derivation.

A claim is first decided exactly (the difference of claimed and derived values
cancels in the engine's normal form); when the normal form cannot settle it,
both sides are compared numerically at many seeded points inside the declared
ranges, with free functions replaced by random smooth stand-ins. A claim that
agrees only numerically is reported as such, never as proved.

The ``source`` section is checked the same way: the field equations with the
declared matter's own stress-energy tensor, reduced by the ``impose`` relations.
"""
from __future__ import annotations

import difflib
import random
from dataclasses import dataclass, field
from typing import Any

import mpmath
import sympy as sp

from . import _sources, sampling
from .errors import ConfigError, ConfigErrors, DerivationError, ExpressionError, Location
from .expressions import expression_to_text, parse_expression
from .model import Spacetime

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
NUMERIC_POINTS = 12
"""Points for a numerical comparison."""
NUMERIC_DIGITS = 40
"""Working precision of a numerical comparison (digits)."""
_TOLERANCE = sp.Float("1e-25", 40)
_FLOOR = sp.Float("1e-32", 40)
"""Both values below this count as zero (rounding noise at 40 digits)."""


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


@dataclass(frozen=True)
class Witness:
    """A point where two values differ: the point and both values as text."""

    point: tuple[tuple[str, str], ...]
    claimed: str
    derived: str


@dataclass(frozen=True)
class Decision:
    """How an equality ``claimed = derived`` was decided."""

    status: str
    method: str
    difference: sp.Expr = sp.S.Zero
    """Claimed minus derived in the engine's normal form (zero when proved)."""
    witness: Witness | None = None
    points: int = 0


@dataclass(frozen=True)
class ClaimResult:
    """The verdict on one claim."""

    claim: Claim
    status: str
    """One of :data:`STATUSES`."""
    method: str
    """How it was decided, in words."""
    derived: Any = None
    """The derived value (expression, tuple, bool or verdict), if any."""
    difference: sp.Expr | None = None
    witness: Witness | None = None
    message: str = ""

    @property
    def holds(self) -> bool:
        return self.status in ("proved", "agrees_numerically")


@dataclass(frozen=True)
class SourceResult:
    """The verdict of the exact-solution check against the declared source."""

    type: str
    status: str
    method: str
    residual: tuple[tuple[tuple[int, int], sp.Expr], ...] = ()
    """Non-vanishing components of s G_ab + σΛg_ab − κT_ab after the imposed relations."""
    extra: tuple[tuple[str, tuple[int, ...], sp.Expr], ...] = ()
    """Non-vanishing further equations (Maxwell, normalisation)."""
    imposed: tuple[tuple[sp.Basic, sp.Expr], ...] = ()
    """The substitutions taken from ``impose``, in order."""
    witness: Witness | None = None

    @property
    def holds(self) -> bool:
        return self.status in ("proved", "agrees_numerically")


# ---------------------------------------------------------------------------- parsing
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
    from .schema import namespace

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
    """The ``source`` section as a :class:`texgen._sources.Source`, or ``None`` if there is none."""
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


# ---------------------------------------------------------------------------- deciding
def _stand_ins(expr: sp.Expr, rng: random.Random) -> dict:
    """Random smooth replacements for free functions: polynomial plus exponential, so derivatives agree."""
    funcs: dict = {}
    for a in expr.atoms(sp.core.function.AppliedUndef):
        funcs[a.func] = a.args
    for d in expr.atoms(sp.Derivative):
        if isinstance(d.expr, sp.core.function.AppliedUndef):
            funcs[d.expr.func] = d.expr.args
    out = {}
    for f in sorted(funcs, key=str):
        args = funcs[f]
        body = sp.Rational(rng.randint(6, 14), 10)
        for x in args:
            if not isinstance(x, sp.Symbol):
                continue
            body += sp.Rational(rng.randint(-5, 5), 20) * x + sp.Rational(rng.randint(-5, 5), 100) * x**2
            body += sp.Rational(rng.randint(1, 5), 20) * sp.exp(sp.Rational(rng.randint(-5, 5), 10) * x)
        out[f] = sp.Lambda(args, body)
    return out


def _replace_functions(expr: sp.Expr, stand_ins: dict) -> sp.Expr:
    for f, lam in stand_ins.items():
        expr = expr.replace(f, lam)
    return expr.doit()


def _number(e: sp.Expr, values: dict):
    try:
        with mpmath.workdps(NUMERIC_DIGITS + 10):
            v = sp.N(e.xreplace(values), NUMERIC_DIGITS)
    except (ZeroDivisionError, ValueError, TypeError):
        return None
    if v.has(sp.zoo, sp.nan, sp.oo, -sp.oo) or not v.is_number:
        return None
    return v


def _text_number(v) -> str:
    re_, im = v.as_real_imag()
    if abs(im) < _TOLERANCE:
        return sp.sstr(sp.Float(re_, 15))
    return sp.sstr(sp.Float(re_, 15)) + (" + " if im > 0 else " - ") + sp.sstr(sp.Float(abs(im), 15)) + "*I"


def _point_text(spacetime: Spacetime, values: dict) -> tuple[tuple[str, str], ...]:
    names = [(p.name, p.symbol) for p in spacetime.parameters] + [(c.name, c.symbol) for c in spacetime.coordinates]
    return tuple((n, format(float(values[s]), ".6g")) for n, s in names if s in values)


def compare_numerically(spacetime: Spacetime, claimed: sp.Expr, derived: sp.Expr, *, points: int = NUMERIC_POINTS,
                        seed: int = 0) -> tuple[int, Witness | None]:
    """Compare two expressions at seeded sample points; returns (points agreeing, first differing point)."""
    rng = random.Random(seed)
    good = 0
    tries = 0
    while good < points and tries < 4 * points:
        tries += 1
        try:
            # The first point uses the parameters' declared values, so a reported witness is easy to read.
            values = sampling.sample_point(spacetime, rng, use_values=tries == 1)
        except ValueError:
            break
        stand = _stand_ins(claimed + derived, rng)
        a = _number(_replace_functions(claimed, stand), values)
        b = _number(_replace_functions(derived, stand), values)
        if a is None or b is None:
            continue
        scale = max(abs(a), abs(b))
        if scale > _FLOOR and abs(a - b) > _TOLERANCE * scale:
            return good, Witness(_point_text(spacetime, values), _text_number(a), _text_number(b))
        good += 1
    return good, None


def imposed_substitutions(spacetime: Spacetime) -> tuple[tuple[tuple[sp.Basic, sp.Expr], ...], str]:
    """Substitutions ``target -> value`` solved from the ``impose`` relations, and a problem (or "").

    Each relation is solved (after the earlier ones are substituted) for a function
    the metric does not contain, else for its highest derivative; a relation that
    becomes 0 = 0 is redundant and skipped.
    """
    hit = _IMPOSED.get(id(spacetime))
    if hit is not None and hit[0] is spacetime:
        return hit[1]
    result = _solve_imposed(spacetime)
    if len(_IMPOSED) > 16:
        _IMPOSED.clear()
    _IMPOSED[id(spacetime)] = (spacetime, result)
    return result


_IMPOSED: dict[int, tuple[Spacetime, tuple]] = {}
"""Solved relations by model: every decision of one file uses them."""


def _solve_imposed(spacetime: Spacetime) -> tuple[tuple[tuple[sp.Basic, sp.Expr], ...], str]:
    relations = parse_impose(spacetime)
    metric_funcs = {f.func for f in spacetime.metric.atoms(sp.core.function.AppliedUndef)}
    out: list[tuple[sp.Basic, sp.Expr]] = []
    implicit = ""
    for i, rel in enumerate(relations):
        rel = sp.cancel(reduce_imposed(rel, out))
        if rel == 0:
            continue
        sol = _sources.solve_relation(rel, metric_funcs)
        if sol is not None:
            out.append(sol)
            continue
        rules = _sources.implicit_rules(rel, metric_funcs)
        if rules is None:
            return tuple(out), (f"impose[{i}] cannot be solved for a function or a derivative, "
                                "so it was not used")
        out.extend(rules)
        # Random stand-ins cannot obey an implicit relation: only exact decisions count from here on.
        implicit = f"impose[{i}] fixes a function implicitly; numbers at random points would prove nothing"
    return tuple(out), implicit


def reduce_imposed(expr: sp.Expr, imposed) -> sp.Expr:
    """``expr`` with the imposed substitutions applied in order."""
    for target, value in imposed:
        expr = _sources.apply_substitution(expr, target, value)
    return expr


def decide_equal(spacetime: Spacetime, curvature, claimed: sp.Expr, derived: sp.Expr, seed: int = 0) -> Decision:
    """Decide ``claimed = derived``: exactly when the normal form settles it, else numerically.

    The file's ``impose`` relations are substituted into both sides first.
    """
    from . import _fields

    imposed, problem = imposed_substitutions(spacetime)
    if imposed:
        claimed = reduce_imposed(sp.sympify(claimed), imposed)
        derived = reduce_imposed(sp.sympify(derived), imposed)
    diff = curvature.canonical(claimed - derived)
    if diff == 0:
        return Decision("proved", "exact: the difference cancels")
    algebra = curvature.algebra
    elem = None
    if isinstance(algebra, _fields.FieldAlgebra):
        try:
            elem = algebra.from_sympy(diff)
        except _fields.Unmappable:
            elem = None
    exact_nonzero = elem is not None and algebra.exact
    if problem:
        # Random stand-ins do not obey a relation that could not be used: numbers would prove nothing.
        return Decision("undecided", problem, diff)
    good, witness = compare_numerically(spacetime, claimed, derived, seed=seed)
    if witness is not None:
        return Decision("fails", "differs at a sample point", diff, witness, good)
    if exact_nonzero:
        # The exact field says non-zero but no sample point shows it: report the difference, never a pass.
        return Decision("fails", "exact: the difference does not cancel", diff, None, good)
    if good == 0:
        return Decision("undecided", "no sample point could be evaluated", diff)
    return Decision("agrees_numerically",
                    f"agrees numerically at {good} points ({NUMERIC_DIGITS} digits), not proved symbolically",
                    diff, None, good)


def _component(curvature, name: str, idx: tuple[int, ...]) -> sp.Expr:
    if name == "metric_inverse":
        return curvature.inverse[idx]
    table = getattr(curvature, name)
    return table[idx] if len(idx) != 2 else table[idx[0], idx[1]]


def _property_components(spacetime: Spacetime, curvature, name: str) -> list[tuple[tuple[int, ...], sp.Expr]]:
    n = spacetime.dimension
    if name == "vacuum":
        ric = curvature.ricci
        return [((a, b), ric[a, b]) for a in range(n) for b in range(a, n)]
    if name == "einstein_space":
        ric, R, g = curvature.ricci, curvature.ricci_scalar, spacetime.metric
        return [((a, b), ric[a, b] - R * g[a, b] / n) for a in range(n) for b in range(a, n)]
    table = curvature.riemann_down if name == "flat" else curvature.weyl
    return [((a, b, c, d), table[a, b, c, d]) for a in range(n) for b in range(a + 1, n)
            for c in range(n) for d in range(c + 1, n) if (a, b) <= (c, d)]


def _decide_property(spacetime, curvature, claim: Claim) -> ClaimResult:
    comps = _property_components(spacetime, curvature, claim.name)
    names = [c.name for c in spacetime.coordinates]
    worst = "proved"
    methods = set()
    for idx, value in comps:
        dec = decide_equal(spacetime, curvature, sp.S.Zero, value)
        key = ",".join(names[i] for i in idx)
        if dec.status == "fails":
            # The property fails: that decides both a true and a false claim.
            status = "fails" if claim.expected else "proved"
            how = "exactly" if dec.witness is None else "at a sample point"
            return ClaimResult(claim, status, f"component [{key}] does not vanish ({how})", False,
                               -dec.difference, dec.witness, f"component [{key}] does not vanish")
        if dec.status != "proved":
            worst = "agrees_numerically" if worst == "proved" and dec.status == "agrees_numerically" else dec.status
        methods.add(dec.method)
    if claim.expected:
        method = "exact: every component vanishes" if worst == "proved" else "; ".join(sorted(methods))
        return ClaimResult(claim, worst, method, True)
    status = "fails" if worst in ("proved", "agrees_numerically") else worst
    return ClaimResult(claim, status, "every component vanishes" + ("" if worst == "proved" else " numerically"),
                       True, message="the property holds, but the claim says it does not")


def _analysis(spacetime, curvature):
    try:
        from .analysis import analyse
    except ImportError:
        return None
    return analyse(spacetime, curvature)


def _decide_one(spacetime: Spacetime, curvature, claim: Claim, seed: int) -> ClaimResult:
    if claim.kind == "property":
        return _decide_property(spacetime, curvature, claim)
    if claim.kind in ("matter", "horizons", "energy_condition"):
        an = _analysis(spacetime, curvature)
        if an is None:
            return ClaimResult(claim, "undecided", "the matter analysis is not available in this installation")
        if claim.kind == "energy_condition":
            verdict = an.energy_conditions[claim.name]
            st = verdict.status
            if st == "undecided":
                return ClaimResult(claim, "undecided", "the analysis could not decide it", st)
            derived = "violated" if st == "violated" else "holds"
            if derived != claim.expected:
                return ClaimResult(claim, "fails", f"the analysis finds: {st.replace('_', ' ')}", st,
                                   message=f"claimed {claim.expected}, found {st.replace('_', ' ')}")
            status = "agrees_numerically" if st == "holds_at_samples" else "proved"
            return ClaimResult(claim, status, "analysis: " + st.replace("_", " "), st)
        if claim.kind == "horizons":
            return _decide_horizons(spacetime, curvature, claim, tuple(an.horizons), seed)
        if claim.name == "energy_density":
            derived = an.energy_density
        else:
            i = _frame_direction(spacetime, an, claim.indices[0])
            if i is None:
                return ClaimResult(claim, "undecided", "the analysis gives no principal pressure along "
                                   + spacetime.coordinates[claim.indices[0]].name)
            derived = an.pressures[i]
        return _from_decision(claim, derived, decide_equal(spacetime, curvature, claim.expected, derived, seed))
    if claim.kind == "scalar":
        derived = getattr(curvature, claim.name)
    else:
        derived = _component(curvature, claim.name, claim.indices)
    return _from_decision(claim, derived, decide_equal(spacetime, curvature, claim.expected, derived, seed))


def _frame_direction(spacetime: Spacetime, an, coord: int) -> int | None:
    """Which principal pressure lies along coordinate ``coord``: the frame leg pointing along it."""
    n = len(an.pressures)
    if n == 0:
        return None
    frame = getattr(an, "frame", None)
    tidx = _time_index(spacetime)
    if frame is not None and frame.rows == n + 1:
        for i in range(1, n + 1):
            spatial = [a for a in range(frame.cols) if a != tidx and frame[i, a] != 0]
            if spatial == [coord]:
                return i - 1
        return None
    order = [a for a in range(spacetime.dimension) if a != tidx]
    return order.index(coord) if coord in order and order.index(coord) < n else None


def _from_decision(claim: Claim, derived, dec: Decision) -> ClaimResult:
    msg = ""
    if dec.status == "fails":
        msg = "claimed and derived values differ"
    return ClaimResult(claim, dec.status, dec.method, derived, None if dec.status == "proved" else dec.difference,
                       dec.witness, msg)


def _decide_horizons(spacetime, curvature, claim: Claim, derived: tuple, seed: int) -> ClaimResult:
    claimed = list(claim.expected)
    left = list(derived)
    worst = "proved"
    for c in claimed:
        match = None
        for d in left:
            dec = decide_equal(spacetime, curvature, c, d, seed)
            if dec.status in ("proved", "agrees_numerically"):
                match = (d, dec)
                break
        if match is None:
            return ClaimResult(claim, "fails", "compared as sets", derived,
                               message=f"claimed horizon {expression_to_text(c)} is not among the derived ones")
        left.remove(match[0])
        if match[1].status != "proved":
            worst = match[1].status
    if left:
        return ClaimResult(claim, "fails", "compared as sets", derived,
                           message="derived horizons missing from the claim: "
                           + ", ".join(expression_to_text(d) for d in left))
    method = "exact: the same set" if worst == "proved" else \
        f"the same set, numerically at {NUMERIC_POINTS} points; not proved symbolically"
    return ClaimResult(claim, worst, method, derived)


_CACHE: dict[int, tuple[Any, Any, dict]] = {}
"""Decisions by curvature object: a build writes several formats from one derivation."""


def _cached(kind: str, spacetime: Spacetime, curvature, compute):
    key = id(curvature)
    entry = _CACHE.get(key)
    if entry is None or entry[0] is not curvature or entry[1] is not spacetime:
        if len(_CACHE) > 16:
            _CACHE.clear()
        entry = (curvature, spacetime, {})
        _CACHE[key] = entry
    store = entry[2]
    if kind not in store:
        store[kind] = compute()
    return store[kind]


def decide_claims(spacetime: Spacetime, curvature) -> tuple[ClaimResult, ...]:
    """Decide every claim of ``spacetime`` against ``curvature``.

    Parameters
    ----------
    spacetime:
        The frozen model whose ``claims`` section is read.
    curvature:
        A :class:`texgen.derive.Curvature` of it.

    Raises :class:`~texgen.errors.ConfigError` for malformed claims.
    """
    return _cached("claims", spacetime, curvature, lambda: _decide_all(spacetime, curvature))


def _decide_all(spacetime: Spacetime, curvature) -> tuple[ClaimResult, ...]:
    out = []
    for i, claim in enumerate(parse_claims(spacetime)):
        try:
            out.append(_decide_one(spacetime, curvature, claim, seed=i))
        except DerivationError as exc:
            out.append(ClaimResult(claim, "undecided", f"not derived: {exc.message}"))
    return tuple(out)


def _sample_fails(spacetime, expr: sp.Expr) -> Witness | None:
    good, w = compare_numerically(spacetime, expr, sp.S.Zero)
    return w


def check_source(spacetime: Spacetime, curvature) -> SourceResult | None:
    """The exact-solution check of the declared ``source``, or ``None`` without one.

    Decides ``s G_ab + σΛg_ab − κ T_ab = 0`` (and Maxwell's equations or the
    normalisation of the velocity) after the ``impose`` relations are substituted.
    """
    return _cached("source", spacetime, curvature, lambda: _check_source(spacetime, curvature))


def _check_source(spacetime: Spacetime, curvature) -> SourceResult | None:
    source = parse_source(spacetime)
    if source is None:
        return None
    st = spacetime
    xs = st.coordinate_symbols
    g = sp.Matrix(st.metric)
    ginv = sp.Matrix(curvature.inverse)
    sigma = st.conventions.metric_sign
    T = _sources.stress_energy(source, g, ginv, xs, sigma)
    E = curvature.field_tensor
    kappa = st.conventions.coupling
    n = st.dimension
    residual = {(a, b): curvature.canonical(E[a, b] - kappa * T[a, b]) for a in range(n) for b in range(a, n)}
    extra = {(x.name, x.key): curvature.canonical(x.expr)
             for x in _sources.extra_equations(source, g, ginv, curvature.determinant, xs, sigma)}
    imposed, problem = imposed_substitutions(st)
    if imposed:
        residual = {k: curvature.canonical(reduce_imposed(v, imposed)) for k, v in residual.items()}
        extra = {k: curvature.canonical(reduce_imposed(v, imposed)) for k, v in extra.items()}
    nonzero = {k: v for k, v in residual.items() if v != 0}
    extra_nz = {k: v for k, v in extra.items() if v != 0}
    if not nonzero and not extra_nz:
        return SourceResult(source.type, "proved", "exact: every component cancels", imposed=tuple(imposed))
    if problem:
        return SourceResult(source.type, "undecided", problem, tuple(sorted(nonzero.items())),
                            tuple((nm, key, v) for (nm, key), v in sorted(extra_nz.items())), tuple(imposed))
    # A form that did not cancel may still vanish (opaque atoms): look for a point where it does not.
    for k, v in list(nonzero.items()) + [((nm,) + key, v) for (nm, key), v in extra_nz.items()]:
        w = _sample_fails(st, v)
        if w is not None:
            return SourceResult(source.type, "fails", "the residual does not vanish",
                                tuple(sorted(nonzero.items())),
                                tuple((nm, key, v) for (nm, key), v in sorted(extra_nz.items())),
                                tuple(imposed), w)
    return SourceResult(source.type, "agrees_numerically",
                        f"residual vanishes numerically at {NUMERIC_POINTS} points, not proved symbolically",
                        tuple(sorted(nonzero.items())),
                        tuple((nm, key, v) for (nm, key), v in sorted(extra_nz.items())), tuple(imposed))


# ---------------------------------------------------------------------------- output
def _claim_symbol(printer, claim: Claim) -> str:
    tex = {"ricci_scalar": "R", "kretschmann": r"R_{abcd}R^{abcd}", "ricci_squared": r"R_{ab}R^{ab}",
           "weyl_squared": r"C_{abcd}C^{abcd}", "determinant": r"\det g", "energy_density": r"\rho",
           "horizons": r"r_{\mathrm{h}}"}
    if claim.kind in ("scalar",) or claim.name in ("energy_density", "horizons"):
        return tex[claim.name]
    if claim.name == "pressure":
        return "p_{" + printer.coord_latex[claim.indices[0]] + "}"
    kernel, pos = {"christoffel": (r"\Gamma", "udd"), "christoffel_first": (r"\Gamma", "ddd"),
                   "riemann": ("R", "uddd"), "riemann_down": ("R", "dddd"), "ricci": ("R", "dd"),
                   "einstein": ("G", "dd"), "einstein_mixed": ("G", "ud"), "weyl": ("C", "dddd"),
                   "metric_inverse": ("g", "uu")}[claim.name]
    return printer.symbol(kernel, pos, claim.indices)


_PROPERTY_TEXT = {"vacuum": "vacuum ($R_{ab} = 0$)", "flat": "flat ($R_{abcd} = 0$)",
                  "conformally_flat": "conformally flat ($C_{abcd} = 0$)",
                  "einstein_space": "an Einstein space ($R_{ab} = R g_{ab}/n$)"}
_STATUS_TEXT = {"proved": "proved", "agrees_numerically": "agrees numerically", "fails": "fails",
                "undecided": "undecided"}


def _claim_data(printer, r: ClaimResult, shorten=lambda e: e) -> dict:
    from .latex import escape_text
    from .report import equation

    c = r.claim
    item = {"label": c.label, "label_tex": escape_text(c.label), "status": r.status,
            "status_text": _STATUS_TEXT[r.status], "holds": r.holds, "method": r.method,
            "method_tex": escape_text(r.method), "message": r.message, "message_tex": escape_text(r.message),
            "note": c.note.rstrip(". "), "note_tex": escape_text(c.note.rstrip(". ")),
            "reference": c.reference.rstrip(". "), "reference_tex": escape_text(c.reference.rstrip(". ")),
            "kind": c.kind}
    if c.kind == "property":
        item["statement"] = ("the spacetime is " if c.expected else "the spacetime is not ") + _PROPERTY_TEXT[c.name]
    elif c.kind == "energy_condition":
        item["statement"] = f"the {c.name} energy condition " + ("holds" if c.expected == "holds" else "is violated")
    elif c.kind == "horizons":
        item["statement"] = "horizons at $" + ", ".join(printer.tex(x) for x in c.expected) + "$"
    else:
        lhs = _claim_symbol(printer, c)
        item["claimed"] = equation(printer, lhs, c.expected)
        item["statement"] = ""
        if r.status == "fails" and isinstance(r.derived, sp.Expr):
            item["derived"] = equation(printer, lhs, shorten(r.derived))
            if r.difference is not None:
                item["difference"] = equation(printer, r"\text{claimed} - \text{derived}", shorten(r.difference))
    item["statement_md"] = item["statement"]
    if r.witness is not None:
        item["witness"] = {"point": ", ".join(f"{k} = {v}" for k, v in r.witness.point),
                           "claimed": r.witness.claimed, "derived": r.witness.derived}
    return item


def _source_data(printer, s: SourceResult, shorten=lambda e: e) -> dict:
    from .latex import escape_text
    from .report import equation

    names = printer.coord_latex
    item = {"type": s.type, "type_text": s.type.replace("_", " "), "status": s.status,
            "status_text": _STATUS_TEXT[s.status], "holds": s.holds, "method": s.method,
            "method_tex": escape_text(s.method),
            "residual": [equation(printer, r"\mathcal{E}_{" + names[a] + " " + names[b] + "}", shorten(v))
                         for (a, b), v in s.residual],
            "extra": [equation(printer, (r"\partial_a(\sqrt{|g|}F^{a" + names[k[0]] + "})/\\sqrt{|g|}")
                               if nm == "maxwell" else r"\text{normalisation}", v) for nm, k, v in s.extra],
            "imposed": [equation(printer, printer.tex(t), v) for t, v in s.imposed]}
    if s.witness is not None:
        item["witness"] = {"point": ", ".join(f"{k} = {v}" for k, v in s.witness.point),
                           "value": s.witness.claimed}
    return item


def report_section(spacetime: Spacetime, curvature, printer) -> dict | None:
    """Plain data for the report's "Checks" section, or ``None`` without claims or source."""
    if spacetime.section("claims") is None and spacetime.section("source") is None:
        return None
    def shorten(e):
        # The engine's display form (definitions' symbols, factors), where it applies.
        try:
            return curvature.display(e)
        except DerivationError:
            return e

    claims = [_claim_data(printer, r, shorten) for r in decide_claims(spacetime, curvature)]
    src = check_source(spacetime, curvature)
    return {"template_tex": "sections/claims.tex.j2", "template_md": "sections/claims.md.j2",
            "claims": claims, "failed": sum(1 for c in claims if not c["holds"]),
            "source": _source_data(printer, src, shorten) if src is not None else None}


def _text(x) -> Any:
    if isinstance(x, sp.Basic):
        return expression_to_text(x)
    if isinstance(x, tuple):
        return [_text(y) for y in x]
    return x


def claim_json(spacetime: Spacetime, r: ClaimResult) -> dict:
    """One claim's verdict as JSON-ready data."""
    c = r.claim
    names = [co.name for co in spacetime.coordinates]
    out = {"label": c.label, "kind": c.kind, "name": c.name, "indices": [names[i] for i in c.indices],
           "claimed": c.written, "status": r.status, "holds": r.holds, "method": r.method}
    if r.derived is not None:
        out["derived"] = _text(r.derived)
    if r.difference is not None:
        out["difference"] = _text(r.difference)
    if r.witness is not None:
        out["witness"] = {"point": dict(r.witness.point), "claimed": r.witness.claimed,
                          "derived": r.witness.derived}
    if r.message:
        out["message"] = r.message
    if c.note:
        out["note"] = c.note
    if c.location is not None and c.location.line is not None:
        out["line"] = c.location.line
    return out


def source_json(spacetime: Spacetime, s: SourceResult | None) -> dict | None:
    """The source check as JSON-ready data."""
    if s is None:
        return None
    names = [c.name for c in spacetime.coordinates]
    out = {"type": s.type, "status": s.status, "holds": s.holds, "method": s.method,
           "residual": {f"{names[a]},{names[b]}": _text(v) for (a, b), v in s.residual},
           "extra": {f"{nm}[{','.join(names[i] for i in k)}]": _text(v) for nm, k, v in s.extra},
           "imposed": [{"target": _text(t), "value": _text(v)} for t, v in s.imposed]}
    if s.witness is not None:
        out["witness"] = {"point": dict(s.witness.point), "value": s.witness.claimed}
    return out


def results(spacetime: Spacetime, curvature) -> dict:
    """JSON-ready results: ``{"claims": [...], "source_check": {...} or None}``."""
    return {"claims": [claim_json(spacetime, r) for r in decide_claims(spacetime, curvature)],
            "source_check": source_json(spacetime, check_source(spacetime, curvature))}
