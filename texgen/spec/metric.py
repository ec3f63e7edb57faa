"""The ``metric`` section: line element, components or matrix, and the numerical checks of the result.

The line element is split into coefficients of products of differentials on its
own structure (no global expand), so a coefficient keeps the grouping its author
wrote; the degeneracy and signature checks run at seeded points in the declared ranges.
"""
from __future__ import annotations

import difflib
import random
import re

import mpmath
import sympy as sp

from ..errors import ConfigError, ExpressionError, Location
from . import sampling
from .checker import _Builder
from .expressions import Namespace, expression_to_text
from .model import Coordinate, Spacetime

_TERM_HINT = "each term is a coefficient times two differentials, e.g. r^2 dtheta^2 or 2 A dt dphi"


def _differential_form(expr: sp.Expr, diffs: dict[sp.Symbol, int]) -> dict[tuple[int, ...], sp.Expr]:
    """Split an expression into coefficients of products of differentials.

    Works on the expression's own structure (no global expand), so that a
    coefficient such as ``-(1 - 2*M/r)`` stays as the user grouped it.
    """
    if not expr.free_symbols & set(diffs):
        return {(): expr}
    if isinstance(expr, sp.Symbol):
        return {(diffs[expr],): sp.S.One}
    if isinstance(expr, sp.Add):
        out: dict[tuple[int, ...], sp.Expr] = {}
        for term in expr.args:
            for k, v in _differential_form(term, diffs).items():
                out[k] = out.get(k, sp.S.Zero) + v
        return out
    if isinstance(expr, sp.Mul):
        out = {(): sp.S.One}
        for factor in expr.args:
            f = _differential_form(factor, diffs)
            new: dict[tuple[int, ...], sp.Expr] = {}
            for k1, v1 in out.items():
                for k2, v2 in f.items():
                    key = tuple(sorted(k1 + k2))
                    if len(key) > 2:
                        raise ExpressionError(f"A term has more than two differentials: '{_shown_expr(expr)}'")
                    new[key] = new.get(key, sp.S.Zero) + v1 * v2
            out = new
        return out
    if isinstance(expr, sp.Pow) and expr.exp.is_Integer and 0 < expr.exp <= 2:
        base = _differential_form(expr.base, diffs)
        return _differential_form(sp.Mul(expr.base, expr.base, evaluate=False), diffs) if expr.exp == 2 else base
    if isinstance(expr, sp.Pow) and expr.exp.is_Integer and expr.exp < 0:
        raise ExpressionError(f"A differential may not stand in a denominator: '{_shown_expr(expr)}'")
    raise ExpressionError(f"A differential may only appear in products and squares, not in "
                          f"{expr.func.__name__}(...): '{_shown_expr(expr)}'")


def _shown_expr(expr: sp.Expr) -> str:
    """An expression for an error message, written the way a spacetime file writes it."""
    return expression_to_text(expr).replace("**", "^")


def _component_key(key: str, names: list[str]) -> tuple[list[int] | None, str | None]:
    parts = [p for p in re.split(r"[\s,]+", key.strip().strip("[]()")) if p]
    if len(parts) != 2:
        return None, f"Expected a pair of coordinates such as 't,phi' but received: '{key}'"
    out = []
    for p in parts:
        if p in names:
            out.append(names.index(p))
        elif p.isdigit() and int(p) < len(names):
            out.append(int(p))
        else:
            close = difflib.get_close_matches(p, names, n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            return None, f"'{p}' is not a coordinate of this spacetime{hint}"
    return out, None


def _metric(b: _Builder, coordinates: list[Coordinate], ns: Namespace) -> sp.ImmutableMatrix | None:
    ck = b.ck
    node = b.root.get("metric")
    n = len(coordinates)
    if node is None:
        return None
    if not ck.expect(node, "metric", (dict,), "a mapping with one of: line_element, components, matrix"):
        return None
    ck.keys(node, "metric", ("line_element", "components", "matrix"))
    forms = [k for k in ("line_element", "components", "matrix") if k in node.value]
    if len(forms) != 1:
        ck.error(node, "metric", "Expected exactly one of: line_element, components, matrix but received: "
                 + (", ".join(forms) if forms else "none"))
        return None
    form = forms[0]
    sub = node.value[form]
    g = [[sp.S.Zero] * n for _ in range(n)]
    names = [c.name for c in coordinates]
    if form == "line_element":
        diffs = {}
        for i, c in enumerate(coordinates):
            dname = "d" + c.name
            if dname in ns.symbols or dname in ns.functions:
                ck.error(sub, "metric.line_element", f"The differential '{dname}' clashes with the declared "
                         f"{b.names.get(dname, 'name')} '{dname}'", "rename it or give metric.components instead")
                return None
            diffs[dname] = sp.Symbol(dname)
        ns_le = Namespace({**ns.symbols, **diffs}, ns.functions)
        expr = ck.expression(sub, "metric.line_element", ns_le, juxtapose=True)
        if expr is None:
            return None
        index = {diffs["d" + c.name]: i for i, c in enumerate(coordinates)}
        try:
            form_ = _differential_form(expr, index)
        except ExpressionError as exc:
            ck.error(sub, "metric.line_element", exc.message, _TERM_HINT)
            return None
        bad = [k for k, v in form_.items() if len(k) != 2 and v != 0]
        if bad:
            k = bad[0]
            term = form_[k] * sp.Mul(*[sp.Symbol("d" + names[i]) for i in k])
            ck.error(sub, "metric.line_element",
                     f"Every term must be a product of two differentials; this one has {len(k)}: "
                     f"'{_shown_expr(term)}'", _TERM_HINT)
            return None
        for key, v in form_.items():
            if len(key) != 2 or v == 0:  # what is left of terms that cancelled
                continue
            i, j = key
            if i == j:
                g[i][i] = v
            else:
                g[i][j] = g[j][i] = v / 2
    elif form == "components":
        if not ck.expect(sub, "metric.components", (dict,), "a mapping 'a,b': expression"):
            return None
        seen: dict[tuple[int, int], tuple[str, sp.Expr]] = {}
        errors_before = len(ck.errors)
        for key, item in sub.value.items():
            path = f"metric.components[{key}]"
            idx, err = _component_key(key, names)
            if err:
                line, col = b.doc.key_lines.get(f"metric.components.{key}", (item.line, item.column))
                ck.errors.append(ConfigError(err, Location(b.doc.source, line, col, path)))
                continue
            e = ck.expression(item, path, ns)
            if e is None:
                continue
            i, j = sorted(idx)
            if (i, j) in seen:
                other, prev = seen[(i, j)]
                if sp.simplify(prev - e) != 0:
                    ck.error(item, path, f"The metric is not symmetric: [{other}] = {prev} but [{key}] = {e}",
                             "give each pair of coordinates once")
                continue
            seen[(i, j)] = (key, e)
            g[i][j] = g[j][i] = e
        for i in range(n if len(ck.errors) == errors_before else 0):
            if (i, i) not in seen and not any(k[0] == i or k[1] == i for k in seen):
                ck.error(sub, "metric.components", f"No component involves coordinate '{names[i]}'",
                         "the metric would be degenerate")
    else:
        if not ck.expect(sub, "metric.matrix", (list,), f"a list of {n} rows"):
            return None
        rows = sub.value
        if len(rows) != n or any(not isinstance(r.value, list) or len(r.value) != n for r in rows):
            shape = f"{len(rows)} rows of lengths " + ", ".join(
                str(len(r.value)) if isinstance(r.value, list) else "?" for r in rows)
            ck.error(sub, "metric.matrix", f"Expected a {n}x{n} matrix (one row and column per coordinate) "
                     f"but received: {shape}")
            return None
        for i, row in enumerate(rows):
            for j, item in enumerate(row.value):
                e = ck.expression(item, f"metric.matrix[{i}][{j}]", ns)
                if e is not None:
                    g[i][j] = e
        for i in range(n):
            for j in range(i + 1, n):
                if sp.simplify(g[i][j] - g[j][i]) != 0:
                    ck.error(rows[j].value[i], f"metric.matrix[{j}][{i}]",
                             f"The metric is not symmetric: [{i}][{j}] = {g[i][j]} but [{j}][{i}] = {g[j][i]}")
    return sp.ImmutableMatrix(g)


def _numerical_checks(b: _Builder, model: Spacetime) -> None:
    """Degenerate metric and signature, tested at sample points in the declared ranges."""
    ck = b.ck
    mnode = b.root["metric"]
    g = model.metric
    for (i, j), e in zip(((i, j) for i in range(g.rows) for j in range(g.cols)), g):
        if e.has(sp.zoo, sp.nan, sp.oo):
            ck.error(mnode, f"metric[{model.coordinates[i].name},{model.coordinates[j].name}]",
                     "The metric component is undefined (division by zero after expanding definitions)")
            return
    if all(e == 0 for e in g):
        ck.error(mnode, "metric", "The metric is zero")
        return
    rng = random.Random(20260101)
    try:
        points = [sampling.sample_point(model, rng) for _ in range(4)]
    except ValueError:
        ck.error(mnode, "metric", "No point satisfies every declared range, so the metric cannot be checked",
                 "check the coordinate and parameter ranges")
        return
    want_neg = model.conventions.signature.count("-")
    tested = degenerate = 0
    mismatch = None
    for pt in points:
        fvals = sampling.function_values(g, rng)
        # Floats, not the exact rationals: an exact Rational**Rational such as
        # t**(2*p1) at a sampled point makes sympy factor huge integers.
        fpt = {k: sp.Float(v, 30) for k, v in pt.items()}
        ffv = {k: sp.Float(v, 30) for k, v in fvals.items()}
        try:
            with mpmath.workdps(30):
                num = [[complex(sp.N(e.xreplace(ffv).xreplace(fpt), 30)) for e in row] for row in g.tolist()]
                if any(abs(z.imag) > 1e-20 for row in num for z in row):
                    continue
                m = mpmath.matrix([[z.real for z in row] for row in num])
                tested += 1
                # Scale symmetrically, m_ij / (s_i s_j) with s_i the root of row i's length:
                # the number of negative eigenvalues is unchanged (Sylvester's law of
                # inertia), and components of very different sizes (1 and 10^64) no
                # longer look singular to mpmath's pivoting. A zero row is degenerate.
                s = [mpmath.sqrt(mpmath.norm(m[i, :])) for i in range(g.rows)]
                if any(x == 0 for x in s):
                    degenerate += 1
                    continue
                m = mpmath.matrix([[m[i, j] / (s[i] * s[j]) for j in range(g.cols)] for i in range(g.rows)])
                bound = mpmath.fprod(mpmath.norm(m[i, :]) for i in range(g.rows))  # Hadamard's bound on |det|
                if abs(mpmath.det(m)) < mpmath.mpf(10) ** -20 * bound:
                    degenerate += 1
                    continue
                ev = mpmath.eigsy(m, eigvals_only=True)
                neg = sum(1 for x in ev if x < 0)
        except (TypeError, ValueError, ZeroDivisionError, OverflowError):
            continue
        if neg == want_neg:
            return
        mismatch = (pt, neg)
    if tested and degenerate == tested:
        ck.error(mnode, "metric", "The metric is degenerate: its determinant vanishes at every sampled point",
                 "check for a missing or repeated component")
        return
    if mismatch is not None:
        pt, neg = mismatch
        where = ", ".join(f"{k}={float(v):.4g}" for k, v in pt.items())
        sig = model.conventions.signature
        ck.error(b.root.get("conventions", mnode), "conventions.signature",
                 f"Declared signature '{sig}' has {want_neg} negative sign(s) but the metric has {neg} negative "
                 f"eigenvalue(s) at {where}",
                 "fix the metric or declare the signature it has")
