"""Exact rational-function arithmetic for curvature work (used by :mod:`texgen.engine.curvature`).

A metric's components are mapped into the fraction field of a polynomial ring whose
generators are the coordinates, parameters and every non-rational atom (sin, cos, exp,
free functions and their derivatives, square roots ...).  Elements are kept as
``numerator / product of irreducible factors``: denominators stay factored, so sums
need no gcd, only trial division by the known factors.  Algebraic generators (sin θ
with sin² = 1 − cos², sinh with sinh² = cosh² − 1, sqrt(P) with S² = P, i² = −1) are
reduced to degree one in numerators and removed from denominators by multiplying
with conjugates, which makes the form canonical: zero tests and equality are
structural.  Atoms without such a description become opaque generators (the form is
then no longer canonical, and :meth:`Algebra.is_zero` backs up with numbers).
Anything that cannot be mapped at all is handled by
:class:`~texgen.engine.algebra.ExprAlgebra`, plain sympy expressions normalised with ``cancel``.
"""
from __future__ import annotations

from fractions import Fraction
from typing import Any, Iterable, Sequence

import sympy as sp

from .generators import (MAX_DEPTH, _Discovery, _independent_mod2, _linearly_independent, _radicands,
                         prepare)
from .polys import Unmappable, _flint, _FlintPolys, _SympyPolys, _to_rational

# ---------------------------------------------------------------------------
# the field
# ---------------------------------------------------------------------------


def _argument_families(gens) -> tuple[list, list]:
    """Arguments of the circular and of the hyperbolic/exponential generators."""
    gens = list(gens)
    circular = [g.key for g in gens if g.kind == "sin"]
    hyperbolic = [g.key for g in gens if g.kind == "sinh"] + \
        [g.key[0] * g.key[1] for g in gens if g.kind == "exp" and g.key[0] != 1]
    return circular, hyperbolic


class Rat:
    """An element ``num / prod(factor_i ** e_i)`` of a :class:`FieldAlgebra`."""

    __slots__ = ("F", "num", "den")

    def __init__(self, F: "FieldAlgebra", num, den: tuple = ()):
        self.F = F
        self.num = num
        self.den = den  # sorted tuple of (factor index, exponent > 0)

    def __add__(self, other):
        return self.F.add(self, self.F.coerce(other))

    __radd__ = __add__

    def __sub__(self, other):
        return self.F.add(self, -self.F.coerce(other))

    def __rsub__(self, other):
        return self.F.add(self.F.coerce(other), -self)

    def __neg__(self):
        return Rat(self.F, -self.num, self.den)

    def __mul__(self, other):
        if isinstance(other, (int, Fraction, sp.Rational)):
            return self.F.scale(self, other)
        return self.F.mul(self, other)

    __rmul__ = __mul__

    def __truediv__(self, other):
        if isinstance(other, (int, Fraction, sp.Rational)):
            return self.F.scale(self, sp.S.One / sp.Rational(other))
        return self.F.mul(self, self.F.inv(other))

    def __rtruediv__(self, other):
        return self.F.mul(self.F.coerce(other), self.F.inv(self))

    def __pow__(self, k: int):
        return self.F.power(self, k)

    def __eq__(self, other):
        other = self.F.coerce(other)
        return self.den == other.den and self.num == other.num

    def __hash__(self):  # elements are only compared, never used as keys
        return hash(self.den)

    def is_zero(self) -> bool:
        return self.num == 0

    def __repr__(self):
        return f"Rat({self.F.to_sympy(self)})"


class FieldAlgebra:
    """The fraction field of one spacetime's generators, with the relations above.

    :param coordinates: coordinate symbols (derivatives are taken along these).
    :param expressions: every expression that will be converted (the metric, Λ ...).
    :param backend: ``"flint"`` or ``"polys"``.
    :param depth: derivative depth kept for generators (0 for a field that only
        normalises, never differentiates).
    """

    name = "field"

    def __init__(self, coordinates: Sequence[sp.Symbol], expressions: Iterable[sp.Expr],
                 backend: str = "flint", depth: int = MAX_DEPTH):
        self.coordinates = tuple(coordinates)
        expressions = list(expressions)
        disc = self._discover(expressions, sums=False, depth=depth)
        if not all(_linearly_independent(k) for k in _argument_families(disc.gens.values())):
            # related arguments such as sinh(u + R), sinh(u - R): expand the sums
            disc = self._discover(expressions, sums=True, depth=depth)
        self.sums = disc.sums
        gens = list(disc.gens.values())
        # algebraic generators first: with lex order the relation X^2 - R then has
        # leading term X^2 and polynomial division reduces to degree one in X.
        for g in gens:
            g.algebraic = g.kind in ("sin", "sinh", "sqrt", "imag")
        order = {"imag": 0, "sin": 1, "sinh": 1, "sqrt": 2}
        coords = {c: i for i, c in enumerate(self.coordinates)}

        def rank(g):
            # coordinates lead the lex order so that factors print as r - 2M, not 2M - r
            if g.algebraic:
                return (0, order[g.kind], 0, sp.default_sort_key(g.expr))
            if g.expr in coords:
                return (1, 0, coords[g.expr], ())
            if g.kind in ("symbol", "const"):
                return (3, 0, 0, sp.default_sort_key(g.expr))
            return (2, 0, 0, sp.default_sort_key(g.expr))

        gens.sort(key=rank)
        self.gens = gens
        self.index = {g.expr: i for i, g in enumerate(gens)}
        names = [f"x{i}" for i in range(len(gens))]
        if backend == "flint" and _flint is None:
            backend = "polys"
        self.P = _FlintPolys(names) if backend == "flint" else _SympyPolys(names)
        self.backend = self.P.name
        self.exp_of = {g.key[0]: (i, g.key[1]) for i, g in enumerate(gens) if g.kind == "exp"}
        self.trig = {(g.kind, g.key): i for i, g in enumerate(gens) if g.kind in ("sin", "cos", "sinh", "cosh")}
        self.factors: list = []
        self.factor_expr: list = []
        self.factor_key: dict = {}
        self.factor_diff: dict = {}
        self.zero = Rat(self, self.P.zero)
        self.one = Rat(self, self.P.one)
        self._memo: dict = {}
        self.exact = True
        self.relations: list[tuple[int, Any]] = []  # (generator index, X^2 - R)
        self.square_of: dict[int, tuple] = {}  # sin-like X: den factors making up X^2
        self._check_exactness()
        self._setup_relations()
        self._memo.clear()  # conversions made before all relations were known
        # derivatives of generators as field elements
        self.gen_diff: list[dict] = []
        for i, g in enumerate(gens):
            dd = {}
            if g.kind == "symbol" and g.expr in self.coordinates:
                dd = {self.coordinates.index(g.expr): self.one}
            elif g.derivs is None:
                dd = None
            else:
                for k, d in g.derivs.items():
                    if isinstance(d, tuple):  # exp: d exp(b u) = exp(b u) * b u'
                        dd[k] = self.gen(i) * self.from_sympy(d[1])
                    else:
                        dd[k] = self.from_sympy(d)
            self.gen_diff.append(dd)

    # -- setup -------------------------------------------------------------
    def _discover(self, expressions, sums: bool, depth: int) -> "_Discovery":
        disc = _Discovery(self.coordinates, sums, depth)
        for c in self.coordinates:
            disc.add(c, "symbol", 0)
        for e in expressions:
            disc.walk(prepare(e, sums))
        disc.close()
        return disc

    def _check_exactness(self) -> None:
        """Clear :attr:`exact` where generators may be algebraically related.

        sin/cos of linearly dependent arguments are related (sin θ and sin 2θ, or
        sin(θ + φ) with sin θ and sin φ); sinh, cosh and exp likewise among themselves.
        """
        for keys in _argument_families(self.gens):
            if not _linearly_independent(keys):
                self.exact = False
        for g in self.gens:
            if g.kind == "opaque":
                self.exact = False
            if isinstance(g.expr, sp.log) and not g.expr.args[0].is_Symbol:
                self.exact = False

    def _setup_relations(self) -> None:
        radicals: list[set] = []
        for i, g in enumerate(self.gens):
            if not g.algebraic:
                continue
            if g.kind == "imag":
                R = self.P.const(sp.S.NegativeOne)
            elif g.kind == "sin":
                c = self.P.gens[self.trig[("cos", g.key)]]
                R = self.P.one - c * c
            elif g.kind == "sinh":
                c = self.P.gens[self.trig[("cosh", g.key)]]
                R = c * c - self.P.one
            else:  # sqrt
                try:
                    r = self.from_sympy(g.key)
                except Unmappable:
                    r = None
                if r is None or r.den or any(
                        self.P.degrees(r.num)[j] > 0 for j, h in enumerate(self.gens) if h.algebraic):
                    g.algebraic = False
                    g.kind = "opaque"
                    self.exact = False
                    continue
                R = r.num
            X = self.P.gens[i]
            self.relations.append((i, X * X - R))
            const, fs = self.P.factor(R)
            if any(e > 1 for _, e in fs) and g.kind == "sqrt":
                self.exact = False  # S^2 = P with P not square-free: zero divisors
            if g.kind in ("sin", "sinh"):
                self.square_of[i] = (const, tuple(sorted((self._factor_id(f)[0], e) for f, e in fs)))
            else:
                radicals.append(self._square_class(const, fs))
        if not _independent_mod2(radicals):
            # sqrt(M - Q) sqrt(M + Q) next to sqrt(M^2 - Q^2), or i next to sqrt(-r), sqrt(r)
            self.exact = False

    def _square_class(self, const, fs) -> set:
        """The radicand modulo squares: its odd-power irreducible factors, primes and sign."""
        vec: set = set()
        unit = sp.Rational(const)
        for f, e in fs:
            idx, u = self._factor_id(f)
            unit *= u ** e
            if e % 2:
                vec ^= {("factor", idx)}
        if unit < 0:
            vec ^= {("sign",)}
        for part in (abs(int(unit.p)), int(unit.q)):
            for prime, e in sp.factorint(part).items():
                if e % 2:
                    vec ^= {("prime", prime)}
        return vec

    def _factor_id(self, f) -> tuple[int, sp.Rational]:
        """Index of the normalised irreducible factor f in the factor base, and the unit."""
        terms = dict(self.P.terms(f))
        lead = max(terms)  # lex-leading monomial
        coeffs = [_to_rational(c) for c in terms.values()]
        den = 1
        num = 0
        for c in coeffs:
            den = sp.ilcm(den, int(c.q))
            num = sp.igcd(num, int(c.p))
        unit = sp.Rational(num, den)
        if _to_rational(terms[lead]) < 0:
            unit = -unit
        key = tuple(sorted((m, _to_rational(c) / unit) for m, c in terms.items()))
        idx = self.factor_key.get(key)
        if idx is None:
            normal = self.P.from_terms({m: c for m, c in key})
            idx = len(self.factors)
            self.factors.append(normal)
            self.factor_expr.append(None)
            self.factor_key[key] = idx
        return idx, unit

    # -- conversion --------------------------------------------------------
    def gen(self, i: int) -> Rat:
        return Rat(self, self.P.gens[i])

    def coerce(self, x) -> Rat:
        if isinstance(x, Rat):
            return x
        if isinstance(x, Fraction):
            x = sp.Rational(x.numerator, x.denominator)
        return Rat(self, self.P.const(sp.Rational(x)))

    def const(self, q) -> Rat:
        return self.coerce(q)

    def from_sympy(self, expr: sp.Expr) -> Rat:
        """Convert a sympy expression; raise :class:`Unmappable` for unknown atoms."""
        return self._conv(prepare(sp.sympify(expr), self.sums))

    def _conv(self, e: sp.Expr) -> Rat:
        got = self._memo.get(e)
        if got is not None:
            return got
        out = self._conv_new(e)
        self._memo[e] = out
        return out

    def _conv_new(self, e: sp.Expr) -> Rat:
        if e.is_Rational:
            return self.coerce(e)
        i = self.index.get(e)
        if i is not None and self.gens[i].kind != "exp":
            return self.gen(i)
        if e.is_Add:
            return self.sum_products([(1, (self._conv(a),)) for a in e.args])
        if e.is_Mul:
            out = self.one
            for a in e.args:
                out = self.mul(out, self._conv(a))
            return out
        if e is sp.E:
            return self._exp(sp.S.One)
        if e.is_Pow:
            b, x = e.args
            if x.is_Integer:
                return self.power(self._conv(b), int(x))
            if x.is_Rational and x.q == 2:
                num, den = _radicands(b)
                if den == 1 or den.is_positive:
                    out = self.one
                    for part, sgn in ((num, 1), (den, -1)):
                        if part == 1:
                            continue
                        root = sp.sqrt(part)
                        if root != sp.sqrt(part, evaluate=False):
                            out = self.mul(out, self.power(self._conv(root), sgn * int(x.p)))
                            continue
                        j = self.index.get(sp.sqrt(part, evaluate=False))
                        if j is None:
                            raise Unmappable(f"square root of {part}")
                        out = self.mul(out, self.power(self.gen(j), sgn * int(x.p)))
                    return out
                j = self.index.get(sp.sqrt(b))
                if j is None:
                    raise Unmappable(f"{e}")
                return self.power(self.gen(j), int(x.p))
            if b is sp.E:
                return self._exp(x)
            raise Unmappable(f"power {e}")
        if isinstance(e, sp.exp):
            return self._exp(e.args[0])
        raise Unmappable(f"cannot represent {e}")

    def _exp(self, u: sp.Expr) -> Rat:
        out = self.one
        for term in sp.Add.make_args(sp.expand(u)):
            c, rest = term.as_coeff_Mul()
            got = self.exp_of.get(rest)
            if got is None:
                raise Unmappable(f"exp({u})")
            i, base = got
            k = c / base
            if not k.is_Integer:
                raise Unmappable(f"exp({u})")
            out = self.mul(out, self.power(self.gen(i), int(k)))
        return out

    def poly_to_sympy(self, p) -> sp.Expr:
        exprs = [g.expr for g in self.gens]
        terms = []
        for m, c in self.P.terms(p):
            factors = [_to_rational(c)]
            for j, e in enumerate(m):
                if e:
                    factors.append(exprs[j] ** e)
            terms.append(sp.Mul(*factors))
        return sp.Add(*terms)

    def _den_to_sympy(self, den: tuple, names: dict | None = None) -> tuple[sp.Expr, sp.Expr]:
        """(denominator expression, constant to multiply the numerator by).

        ``names`` maps factor indices to expressions shown instead (definitions).
        """
        exps = dict(den)
        out = []
        unit = sp.S.One
        for i, (const, fs) in self.square_of.items():
            # (1 - cos)(1 + cos) in a denominator is printed as sin^2
            k = min((exps.get(j, 0) // e for j, e in fs), default=0)
            if k and fs:
                for j, e in fs:
                    exps[j] -= k * e
                out.append(self.gens[i].expr ** (2 * k))
                unit *= const ** k
        for j, e in sorted(exps.items()):
            if e and names and j in names:
                out.append(names[j] ** e)
            elif e:
                if self.factor_expr[j] is None:
                    self.factor_expr[j] = self.poly_to_sympy(self.factors[j])
                out.append(self.factor_expr[j] ** e)
        return sp.Mul(*out), unit

    def _pretty(self, p):
        """Rewrite parts even in cos (cosh) through sin^2 (sinh^2) where that has fewer terms.

        A fixed function of the unique reduced form, so the result stays canonical:
        (2M - r)(1 - cos^2) prints as 2M sin^2 - r sin^2.
        """
        for i in self.square_of:
            g = self.gens[i]
            j = self.trig[("cos" if g.kind == "sin" else "cosh", g.key)]
            sign = -1 if g.kind == "sin" else 1  # cos^2 = 1 - sin^2, cosh^2 = 1 + sinh^2
            parts: dict[int, dict] = {0: {}, 1: {}}
            for m, c in self.P.terms(p):
                parts[m[i]].setdefault(m[j], {})[m] = c
            out = self.P.zero
            for e_s, by_c in parts.items():
                piece = self.P.from_terms({m: _to_rational(c) for d in by_c.values() for m, c in d.items()}) \
                    if by_c else self.P.zero
                if by_c and all(e % 2 == 0 for e in by_c) and any(by_c):
                    alt = self.P.zero
                    s2 = self.P.gens[i] ** 2
                    base = self.P.one + sign * s2
                    for e_c, d in by_c.items():
                        stripped = {tuple(0 if k == j else v for k, v in enumerate(m)): _to_rational(c)
                                    for m, c in d.items()}
                        alt = alt + self.P.from_terms(stripped) * base ** (e_c // 2)
                    if self.P.nterms(alt) < self.P.nterms(piece):
                        piece = alt
                out = out + piece
            p = out
        return p

    def to_sympy(self, x: Rat) -> sp.Expr:
        """The canonical sympy form: expanded numerator over factored denominator."""
        num = self.poly_to_sympy(self._pretty(x.num) if self.square_of else x.num)
        if not x.den:
            return num
        den, unit = self._den_to_sympy(x.den)
        return sp.Mul(num * unit, sp.Pow(den, -1)) if unit != 1 else num / den

    # -- arithmetic ----------------------------------------------------------
    def reduce(self, p):
        """Reduce a numerator modulo the algebraic relations."""
        if not self.relations:
            return p
        degs = self.P.degrees(p)
        for i, rel in self.relations:
            if degs[i] >= 2:
                p = divmod(p, rel)[1]
        return p

    def _cancel(self, num, den: dict) -> Rat:
        if num == 0:
            return self.zero
        out = []
        for i in sorted(den):
            e = den[i]
            if e <= 0:
                continue
            f = self.factors[i]
            while e:
                q, r = divmod(num, f)
                if r != 0:
                    break
                num = q
                e -= 1
            if e:
                out.append((i, e))
        return Rat(self, num, tuple(out))

    def _den_poly(self, exps: dict):
        p = self.P.one
        for i, e in exps.items():
            if e:
                p = p * self.factors[i] ** e
        return p

    def add(self, x: Rat, y: Rat) -> Rat:
        if x.num == 0:
            return y
        if y.num == 0:
            return x
        if x.den == y.den:
            return self._cancel(x.num + y.num, dict(x.den))
        return self.sum_products([(1, (x,)), (1, (y,))])

    def scale(self, x: Rat, q) -> Rat:
        q = sp.Rational(q)
        if q == 0:
            return self.zero
        return Rat(self, x.num * self.P.const(q), x.den)

    def mul(self, x: Rat, y: Rat) -> Rat:
        if x.num == 0 or y.num == 0:
            return self.zero
        den = dict(x.den)
        for i, e in y.den:
            den[i] = den.get(i, 0) + e
        return self._cancel(self.reduce(x.num * y.num), den)

    def power(self, x: Rat, k: int) -> Rat:
        if k < 0:
            return self.power(self.inv(x), -k)
        out = self.one
        base = x
        while k:
            if k & 1:
                out = self.mul(out, base)
            k >>= 1
            if k:
                base = self.mul(base, base)
        return out

    def inv(self, x: Rat) -> Rat:
        if x.num == 0:
            raise ZeroDivisionError("division by zero")
        num = self._den_poly(dict(x.den))
        d = x.num
        for i, _rel in self.relations:
            if self.P.degrees(d)[i] <= 0:
                continue
            X = self.P.gens[i]
            b, a = divmod(d, X)  # d = a + b X with a, b free of X (d is reduced)
            conj = a - b * X
            d = self.reduce(d * conj)
            num = self.reduce(num * conj)
            if d == 0:
                raise Unmappable("a relation makes this denominator vanish")
        const, fs = self.P.factor(d)
        den: dict[int, int] = {}
        unit = const
        for f, e in fs:
            i, u = self._factor_id(f)
            den[i] = den.get(i, 0) + e
            unit *= u ** e
        return self._cancel(num * self.P.const(1 / unit), den)

    def sum_products(self, terms: Sequence[tuple[Any, Sequence[Rat]]]) -> Rat:
        """``sum(c * prod(factors))`` with one common denominator and one cancellation."""
        prods = []
        for c, fs in terms:
            if c == 0 or any(f.num == 0 for f in fs):
                continue
            num = self.P.const(sp.Rational(c))
            den: dict[int, int] = {}
            for f in fs:
                num = num * f.num
                for i, e in f.den:
                    den[i] = den.get(i, 0) + e
            prods.append((num, den))
        if not prods:
            return self.zero
        common: dict[int, int] = {}
        for _, den in prods:
            for i, e in den.items():
                if e > common.get(i, 0):
                    common[i] = e
        total = self.P.zero
        for num, den in prods:
            missing = {i: e - den.get(i, 0) for i, e in common.items() if e > den.get(i, 0)}
            total = total + (num * self._den_poly(missing) if missing else num)
        return self._cancel(self.reduce(total), common)

    def diff(self, x: Rat, k: int) -> Rat:
        """Partial derivative along coordinate k."""
        dn = self._poly_diff(x.num, k)
        if not x.den:
            return dn
        # d(N/D) = dN/D - N/D * sum_i e_i dp_i/p_i
        inv_den = Rat(self, self.P.one, x.den)
        terms = [(1, (dn, inv_den))]
        xr = Rat(self, x.num, x.den)
        for i, e in x.den:
            dp = self._factor_diff(i, k)
            if dp.num == 0:
                continue
            terms.append((-e, (xr, dp, Rat(self, self.P.one, ((i, 1),)))))
        return self.sum_products(terms)

    def _factor_diff(self, i: int, k: int) -> Rat:
        got = self.factor_diff.get((i, k))
        if got is None:
            got = self._poly_diff(self.factors[i], k)
            self.factor_diff[(i, k)] = got
        return got

    def _poly_diff(self, p, k: int) -> Rat:
        if p == 0:
            return self.zero
        degs = self.P.degrees(p)
        terms = []
        for j, dg in enumerate(degs):
            if dg <= 0:  # flint reports -1 for the zero polynomial
                continue
            gd = self.gen_diff[j]
            if gd is None:
                raise Unmappable(f"derivative of {self.gens[j].expr} beyond the kept depth")
            d = gd.get(k)
            if d is None or d.num == 0:
                continue
            terms.append((1, (Rat(self, self.P.diff(p, j)), d)))
        return self.sum_products(terms)

    # -- queries --------------------------------------------------------------
    def is_zero_fast(self, x: Rat) -> bool:
        return x.num == 0

    def size(self, x: Rat) -> int:
        return self.P.nterms(x.num)

    def normal(self, x: Rat) -> Rat:
        return x

    def numerator_factors(self, x: Rat):
        """(constant, [(sympy factor, exponent)]) of the numerator, for display."""
        const, fs = self.P.factor(x.num)
        return const, [(self.poly_to_sympy(f), e) for f, e in fs]

    def denominator_parts(self, x: Rat):
        """(unit, [(sympy factor or sin-like generator power, exponent)])."""
        den, unit = self._den_to_sympy(x.den)
        return unit, den
