"""Generators of the exact field: the atoms of a metric (coordinates, sin θ, e^r, sqrt(P), f(r), ...).

:class:`_Discovery` walks the input and collects every atom with the derivatives
the curvature stages will need, up to :data:`MAX_DEPTH`; :func:`prepare` first
rewrites tan-like functions and multiple angles so that one argument gives one pair
of generators.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable, Sequence

import sympy as sp
from sympy.core.function import AppliedUndef

from .polys import Unmappable

#: Derivative depth kept for generators: Riemann needs 2, the Bianchi check 3.
MAX_DEPTH = 4

# ---------------------------------------------------------------------------
# generators
# ---------------------------------------------------------------------------


@dataclass
class Gen:
    """One generator of the polynomial ring and what it stands for."""

    expr: sp.Expr
    kind: str  # symbol, const, sin, cos, sinh, cosh, sqrt, exp, func, opaque, imag
    depth: int = 0
    key: Any = None  # argument of a trig pair, or radicand of a sqrt
    derivs: dict = field(default_factory=dict)  # coordinate index -> sympy expr (missing: 0)
    algebraic: bool = False


_TRIG_REWRITE = {
    sp.tan: lambda u: sp.sin(u) / sp.cos(u),
    sp.cot: lambda u: sp.cos(u) / sp.sin(u),
    sp.sec: lambda u: 1 / sp.cos(u),
    sp.csc: lambda u: 1 / sp.sin(u),
    sp.tanh: lambda u: sp.sinh(u) / sp.cosh(u),
    sp.coth: lambda u: sp.cosh(u) / sp.sinh(u),
    sp.sech: lambda u: 1 / sp.cosh(u),
    sp.csch: lambda u: 1 / sp.sinh(u),
}


def prepare(expr: sp.Expr, sums: bool = False) -> sp.Expr:
    """Rewrite tan-like functions through sin/cos and expand multiple angles.

    With ``sums``, sin/cos/sinh/cosh of a sum are expanded by the addition theorems
    too (used when the arguments present are linearly dependent).
    """
    expr = sp.sympify(expr)
    for f, rule in _TRIG_REWRITE.items():
        if expr.has(f):
            expr = expr.replace(f, rule)

    def multiple(x):
        if isinstance(x, (sp.sin, sp.cos, sp.sinh, sp.cosh)):
            c, _ = x.args[0].as_coeff_Mul()
            return c.is_Integer and abs(c) > 1
        return False

    if expr.has(sp.sin, sp.cos, sp.sinh, sp.cosh):
        expr = expr.replace(multiple, lambda x: sp.expand_trig(x))
        if sums:
            def summed(x):
                return isinstance(x, (sp.sin, sp.cos, sp.sinh, sp.cosh)) and \
                    sp.expand(x.args[0], deep=False).is_Add

            def theorem(x):
                # expand over placeholder symbols so the summands themselves stay as written
                terms = sp.Add.make_args(sp.expand(x.args[0], deep=False))
                marks = [sp.Dummy() for _ in terms]
                return sp.expand_trig(x.func(sp.Add(*marks))).xreplace(dict(zip(marks, terms)))

            expr = expr.replace(summed, theorem)
            expr = expr.replace(multiple, lambda x: sp.expand_trig(x))
    return expr


def _linearly_independent(keys: Sequence[sp.Expr]) -> bool:
    """Whether the arguments are linearly independent over Q modulo constants.

    Then sin/cos (sinh/cosh/exp) of them are algebraically independent and the field's
    form is canonical; sin θ, sin 2θ or sinh(u + R), sinh(u - R), sinh R are not.
    """
    rows = []
    monomials: dict[sp.Expr, int] = {}
    for u in keys:
        row: dict[int, sp.Rational] = {}
        for term in sp.Add.make_args(sp.expand(u)):
            c, m = term.as_coeff_Mul()
            if not c.is_Rational:
                c, m = sp.S.One, term
            if m.is_number:
                continue  # constants shift the argument without changing independence
            j = monomials.setdefault(m, len(monomials))
            row[j] = row.get(j, 0) + c
        if not any(row.values()):
            return False
        rows.append(row)
    if not rows:
        return True
    mat = sp.Matrix(len(rows), len(monomials), lambda i, j: rows[i].get(j, 0))
    return mat.rank() == len(rows)


class _Discovery:
    """Walks expressions and collects the generators (closed under differentiation)."""

    def __init__(self, coordinates: Sequence[sp.Symbol], sums: bool = False, depth: int = MAX_DEPTH):
        self.coords = tuple(coordinates)
        self.sums = sums
        self.depth = depth
        self.gens: dict[sp.Expr, Gen] = {}
        self.exp_coeffs: dict[sp.Expr, set] = {}
        self.exp_gens: dict[sp.Expr, Gen] = {}
        self.pending: list[Gen] = []

    def add(self, expr: sp.Expr, kind: str, depth: int, key=None) -> None:
        if expr in self.gens:
            g = self.gens[expr]
            if depth < g.depth:  # reached by a shorter chain: derive again from here
                g.depth = depth
                g.derivs = {}
                if kind not in ("symbol", "const", "imag"):
                    self.pending.append(g)
            return
        g = Gen(expr, kind, depth, key)
        self.gens[expr] = g
        if kind not in ("symbol", "const", "imag"):
            self.pending.append(g)

    def walk(self, e: sp.Expr, depth: int = 0) -> None:
        if e.is_Rational:
            return
        if e.is_Float:
            raise Unmappable(f"floating-point number {e}")
        if e is sp.I:
            self.add(e, "imag", 0)
            return
        if e.is_Symbol:
            self.add(e, "symbol", 0)
            return
        if e.is_NumberSymbol:
            if e is sp.E:
                self.exp_coeffs.setdefault(sp.S.One, set()).add(sp.S.One)
                return
            self.add(e, "const", 0)
            return
        if e.is_Add or e.is_Mul:
            for a in e.args:
                self.walk(a, depth)
            return
        if e.is_Pow:
            b, x = e.args
            if x.is_Integer:
                self.walk(b, depth)
                return
            if x.is_Rational and x.q == 2:
                self._sqrt(b, depth)
                return
            if b is sp.E:
                self._exp(x, depth)
                return
            self.walk(b, depth)
            self.walk(x, depth)
            self.add(e, "opaque", depth)
            return
        if isinstance(e, sp.exp):
            self._exp(e.args[0], depth)
            return
        if isinstance(e, (sp.sin, sp.cos)):
            u = e.args[0]
            self.walk(u, depth)
            self.add(sp.cos(u), "cos", depth, u)
            self.add(sp.sin(u), "sin", depth, u)
            return
        if isinstance(e, (sp.sinh, sp.cosh)):
            u = e.args[0]
            self.walk(u, depth)
            self.add(sp.cosh(u), "cosh", depth, u)
            self.add(sp.sinh(u), "sinh", depth, u)
            return
        if isinstance(e, AppliedUndef):
            for a in e.args:
                self.walk(a, depth)
            self.add(e, "func", depth)
            return
        if isinstance(e, sp.Derivative) and isinstance(e.expr, AppliedUndef):
            self.add(e, "func", depth)
            return
        if isinstance(e, sp.Function) and not isinstance(e, sp.Piecewise):
            for a in e.args:
                self.walk(a, depth)
            self.add(e, "opaque", depth)
            return
        raise Unmappable(f"cannot represent {e}")

    def _sqrt(self, b: sp.Expr, depth: int) -> None:
        num, den = _radicands(b)
        for part in (num, den):
            if part == 1:
                continue
            root = sp.sqrt(part)
            if root != sp.sqrt(part, evaluate=False):
                self.walk(root, depth)  # sympy took squares out: sqrt(R^3) = R sqrt(R)
                continue
            self.walk(part, depth)
            self.add(sp.sqrt(part, evaluate=False), "sqrt", depth, part)
        if den != 1 and not den.is_positive:
            # sqrt(N/D) = sqrt(N)/sqrt(D) needs D > 0; without that, keep it opaque
            self.add(sp.sqrt(b), "opaque", depth)

    def _exp(self, u: sp.Expr, depth: int) -> None:
        for term in sp.Add.make_args(sp.expand(u)):
            c, rest = term.as_coeff_Mul()
            if not c.is_Rational:
                raise Unmappable(f"exponent {u}")
            self.walk(rest, depth)
            self.exp_coeffs.setdefault(rest, set()).add(c)

    def close(self) -> None:
        """Differentiate the function-like generators until the kept depth."""
        while self.pending or self._exp_pending():
            while self.pending:
                g = self.pending.pop()
                if g.kind == "exp":
                    continue  # exp generators are created in _exp_pending
                self._derive(g)

    def _exp_pending(self) -> bool:
        made = False
        for rest, cs in self.exp_coeffs.items():
            base = _rational_gcd(cs)
            g = self.exp_gens.get(rest)
            if g is None:
                g = Gen(sp.exp(base * rest), "exp", 0, (rest, base))
                self.exp_gens[rest] = g
                self.gens[g.expr] = g
                self._derive(g)
                made = True
            elif g.key != (rest, base):  # a new multiple appeared after the generator was made
                raise Unmappable(f"exponentials of {rest} with incommensurable multiples")
        return made

    def _derive(self, g: Gen) -> None:
        if g.depth >= self.depth:
            g.derivs = None  # not available: using it raises
            return
        for k, x in enumerate(self.coords):
            if g.kind == "exp":
                rest, base = g.key
                d = base * sp.diff(rest, x)
                if d != 0:
                    g.derivs[k] = ("exp", d)
                    self.walk(prepare(d, self.sums), g.depth + 1)
                continue
            if not g.expr.has(x):
                continue
            d = sp.diff(g.expr, x)
            if d != 0:
                d = prepare(d, self.sums)
                g.derivs[k] = d
                self.walk(d, g.depth + 1)


def _radicands(b: sp.Expr) -> tuple[sp.Expr, sp.Expr]:
    """Numerator and denominator of a square root's argument, expanded.

    Expanding gives one key per polynomial: sqrt((M - Q)(M + Q)) and sqrt(M^2 - Q^2)
    become the same generator.
    """
    num, den = sp.fraction(sp.together(b))
    return sp.expand(num), sp.expand(den)


def _independent_mod2(vectors: Sequence[set]) -> bool:
    """Whether sets, read as vectors over GF(2) (symmetric difference), are independent."""
    basis: dict = {}
    for vec in vectors:
        vec = set(vec)
        while vec:
            pivot = min(vec, key=repr)
            if pivot not in basis:
                basis[pivot] = vec
                break
            vec ^= basis[pivot]
        else:
            return False
    return True


def _rational_gcd(cs: Iterable[sp.Rational]) -> sp.Rational:
    num = 0
    den = 1
    for c in cs:
        num = sp.igcd(num, int(c.p))
        den = sp.ilcm(den, int(c.q))
    return sp.Rational(num, den) if num else sp.S.One
