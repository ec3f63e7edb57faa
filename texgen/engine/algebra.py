"""The arithmetic the curvature engine runs on: the exact field, or plain expressions as a fallback.

:func:`make_algebra` picks the fastest arithmetic that represents a metric
(:class:`~texgen.engine.field.FieldAlgebra` on python-flint or sympy polynomials,
else :class:`ExprAlgebra`); :func:`numeric_zero` is the numerical zero test used
where a form is not canonical.
"""
from __future__ import annotations

import random
from typing import Iterable, Sequence

import mpmath
import sympy as sp
from sympy.core.function import AppliedUndef

from .field import FieldAlgebra, Rat
from .generators import MAX_DEPTH, Gen, prepare
from .polys import Unmappable, available_backends

__all__ = ["ExprAlgebra", "FieldAlgebra", "Gen", "MAX_DEPTH", "Rat", "Unmappable", "available_backends",
           "make_algebra", "numeric_zero", "prepare"]


class ExprAlgebra:
    """Fallback: plain sympy expressions, normalised with ``cancel`` (not ``simplify``)."""

    name = "expr"
    backend = "sympy"
    exact = False

    def __init__(self, coordinates: Sequence[sp.Symbol], expressions: Iterable[sp.Expr] = ()):
        self.coordinates = tuple(coordinates)
        self.zero = sp.S.Zero
        self.one = sp.S.One

    def coerce(self, x):
        return sp.sympify(x)

    const = coerce

    def from_sympy(self, expr):
        return self.normal(sp.sympify(expr))

    def to_sympy(self, x):
        return x

    def normal(self, x):
        x = sp.sympify(x)
        if x.is_Rational:
            return x
        return sp.cancel(sp.together(sp.expand(x)))

    def add(self, x, y):
        return self.normal(x + y)

    def mul(self, x, y):
        return self.normal(x * y)

    def inv(self, x):
        if x == 0:
            raise ZeroDivisionError("division by zero")
        return self.normal(1 / x)

    def sum_products(self, terms):
        return self.normal(sp.Add(*[sp.Mul(sp.Rational(c), *fs) for c, fs in terms]))

    def diff(self, x, k):
        return self.normal(sp.diff(x, self.coordinates[k]))

    def is_zero_fast(self, x) -> bool:
        return x == 0

    def size(self, x) -> int:
        return len(sp.Add.make_args(sp.numer(x)))


def make_algebra(coordinates, expressions, backend: str = "auto"):
    """The fastest algebra that can represent ``expressions``.

    :param backend: ``auto`` (flint if installed, else sympy polys; the expression
        fallback if the field cannot represent the input), ``flint``, ``polys`` or ``expr``.
    """
    expressions = list(expressions)
    if backend == "expr":
        return ExprAlgebra(coordinates, expressions)
    want = available_backends()[0] if backend == "auto" else backend
    try:
        F = FieldAlgebra(coordinates, expressions, backend=want)
        for e in expressions:
            F.from_sympy(e)
        return F
    except Unmappable:
        if backend != "auto":
            raise
        return ExprAlgebra(coordinates, expressions)


# ---------------------------------------------------------------------------
# numerical zero test
# ---------------------------------------------------------------------------

def numeric_zero(expr: sp.Expr, symbols: Sequence[sp.Symbol], *, points: int = 3,
                 digits: int = 50, seed: int = 12345) -> bool:
    """True if ``expr`` vanishes at random points (free functions replaced by random polynomials).

    Magnitudes are taken in [1/2, 3/2], with either sign unless the symbol's assumptions
    fix it; with 50 digits a value below 10^-30 is taken as zero.  Singular points are
    skipped; if no point can be evaluated the answer is False.
    """
    rng = random.Random(seed)
    expr = sp.sympify(expr)
    funcs = {a.func: a.args for a in expr.atoms(AppliedUndef)}
    for d in expr.atoms(sp.Derivative):
        if isinstance(d.expr, AppliedUndef):
            funcs[d.expr.func] = d.expr.args
    free = sorted(expr.free_symbols | set(symbols), key=str)
    tried = 0
    for _ in range(4 * points):
        if tried == points:
            break
        e = expr
        for f, args in funcs.items():
            poly = sum(sp.Rational(rng.randint(1, 9), rng.randint(1, 9)) * sp.Mul(*args) ** k
                       for k in range(4))
            e = e.replace(f, sp.Lambda(args, poly))
        e = e.doit()
        subs = {}
        for s in free:
            v = sp.Rational(rng.randint(500, 1500), 1000)
            if s.is_negative or (not s.is_nonnegative and rng.random() < 0.5):
                v = -v  # a symbol without a sign may be negative: |r| - r is not zero
            subs[s] = v
        with mpmath.workdps(digits):
            try:
                v = sp.N(e.subs(subs), digits)
            except (ZeroDivisionError, ValueError):
                continue
            if v.has(sp.zoo, sp.nan, sp.oo, -sp.oo):
                continue  # a singular point proves nothing: draw another
            if not v.is_number or abs(complex(v)) > 1e-30:
                return False
            tried += 1
    return tried == points
