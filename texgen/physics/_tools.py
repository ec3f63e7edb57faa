"""Helpers of the physical analysis: sign proofs, sampling of inequalities, regions, roots.

Pure functions on sympy expressions; the modules of :mod:`texgen.physics` combine them.
"""
from __future__ import annotations

import math
import random

import mpmath
import sympy as sp

from ..spec.sampling import _check, function_values, sample_point

_SOLVE_ERRORS = (NotImplementedError, ValueError, TypeError, ZeroDivisionError, AttributeError,
                 sp.PolynomialError, RecursionError)

MAX_OPS = 400
"""Expressions larger than this are not handed to solve/simplify (they would take too long)."""


def positive_stand_ins(spacetime) -> dict:
    """Replacements that let sympy's assumptions see declared ranges sympy cannot read.

    ``sin(theta)`` is positive on ``0 < theta < pi``; a parameter or coordinate with
    a numeric lower bound ``x > c`` is ``c + (positive)``.
    """
    subs: dict = {}
    for item in tuple(spacetime.coordinates) + tuple(spacetime.parameters):
        rng = item.range
        if rng is None:
            continue
        lo, hi = rng.lower, rng.upper
        sym = item.symbol
        if lo is not None and hi is not None and lo == 0 and hi == sp.pi and rng.lower_strict and rng.upper_strict:
            subs[sp.sin(sym)] = sp.Dummy(f"sin_{sym}", positive=True)
    return subs


def _factor_sign(f: sp.Expr) -> int | None:
    """+1 / -1 if ``f`` is provably nonnegative / nonpositive, else None."""
    if f.is_nonnegative:
        return 1
    if f.is_nonpositive:
        return -1
    e = sp.expand(f)
    if e.is_nonnegative:
        return 1
    if e.is_nonpositive:
        return -1
    return None


def proved_nonnegative(expr: sp.Expr, stand_ins: dict | None = None) -> bool:
    """Whether sympy proves ``expr >= 0`` from the symbols' assumptions.

    The expression is factored into a quotient; every factor must have a known
    sign (even powers always have one) and the signs must multiply to +1.
    """
    if expr == 0:
        return True
    e = expr.xreplace(stand_ins) if stand_ins else expr
    if e.count_ops() > MAX_OPS:
        return bool(e.is_nonnegative)
    try:
        e = sp.factor(sp.together(e))
    except _SOLVE_ERRORS:
        return bool(e.is_nonnegative)
    if e.is_nonnegative:
        return True
    # sin^2 + cos^2 = 1 hides signs: try each square written through the other.
    for old, new in _trig_rewrites(e):
        alt = sp.expand(e.subs(old, new))
        if alt.is_nonnegative or sp.factor(alt).is_nonnegative:
            return True
    sign = 1
    num, den = sp.fraction(e)
    for part in (num, den):
        for f in sp.Mul.make_args(part):
            base, exp = f.as_base_exp()
            if exp.is_integer and exp.is_even:
                continue
            if exp.is_integer:
                s = _factor_sign(base)
                if s is None:
                    return False
                sign *= s if exp.is_odd else 1
                continue
            s = _factor_sign(f)
            if s is None:
                return False
            sign *= s
    return sign > 0


def _trig_rewrites(e: sp.Expr) -> list:
    out = []
    for f in e.atoms(sp.sin, sp.cos):
        x = f.args[0]
        if isinstance(f, sp.sin):
            out.append((sp.cos(x) ** 2, 1 - sp.sin(x) ** 2))
        else:
            out.append((sp.sin(x) ** 2, 1 - sp.cos(x) ** 2))
    return out


def _near_points(spacetime, base: dict, radial: sp.Symbol | None, special: list[sp.Expr]) -> list[dict]:
    """Extra points on a log-spaced radial sweep and close to special radii (horizons, throats)."""
    out: list[dict] = []
    if radial is None:
        return out
    coord = next(c for c in spacetime.coordinates if c.symbol == radial)
    lo = 0.0
    if coord.range is not None and coord.range.lower is not None:
        try:
            lo = float(sp.N(sp.sympify(coord.range.lower).xreplace(base), 20))
        except (TypeError, ValueError):
            lo = 0.0
    scale = 1.0
    for p in spacetime.parameters:
        v = base.get(p.symbol)
        if v is not None and p.symbol.is_positive:
            scale = max(scale, float(v))
    for k in range(-3, 4):
        pt = dict(base)
        pt[radial] = sp.Rational(round((lo + scale * 10.0 ** (k / 1.5)) * 10**9), 10**9)
        out.append(pt)
    for s in special:
        try:
            v = complex(sp.N(s.xreplace(base), 30))
        except (TypeError, ValueError):
            continue
        if abs(v.imag) > 1e-12 or v.real <= lo:
            continue
        for eps in (1e-3, 1e-1):
            for side in (1, -1):
                x = v.real * (1 + side * eps)
                if x > lo:
                    pt = dict(base)
                    pt[radial] = sp.Rational(round(x * 10**12), 10**12)
                    out.append(pt)
    return out


def sample_set(spacetime, n: int, seed: int, radial: sp.Symbol | None, special: list[sp.Expr],
               exprs: list[sp.Expr]) -> list[dict]:
    """Seeded points inside the declared ranges, with stand-in values for free functions."""
    rng = random.Random(seed)
    points: list[dict] = []
    for _ in range(n):
        try:
            base = sample_point(spacetime, rng)
        except ValueError:
            break
        points.append(base)
        if len(points) <= 6:
            points.extend(p for p in _near_points(spacetime, base, radial, special) if _in_ranges(spacetime, p))
    joined = sp.Add(*exprs) if exprs else sp.S.Zero
    if joined.atoms(sp.core.function.AppliedUndef):
        frng = random.Random(seed + 1)
        # xreplace works top-down, so f(r) and f'(r) are replaced before r is.
        points = [p | function_values(joined, frng) for p in points]
    return points


def _in_ranges(spacetime, point: dict) -> bool:
    for item in tuple(spacetime.parameters) + tuple(spacetime.coordinates):
        if item.range is not None:
            for rel in item.range.relations(item.symbol):
                if not _check(rel, point):
                    return False
    return True


def value_at(expr: sp.Expr, point: dict, dps: int = 30):
    """A real float of ``expr`` at ``point`` (mpmath through sympy), or None if not real and finite."""
    try:
        v = sp.N(expr.xreplace(point), dps)
    except (TypeError, ValueError, ZeroDivisionError):
        return None
    if v.has(sp.zoo, sp.oo, -sp.oo, sp.nan) or not v.is_number:
        return None
    re, im = v.as_real_imag()
    try:
        re, im = float(re), float(im)
    except TypeError:
        return None
    if not math.isfinite(re) or abs(im) > 1e-20 * max(1.0, abs(re)):
        return None
    return re


def confirmed_negative(expr: sp.Expr, point: dict) -> bool:
    """``expr < 0`` at ``point``, confirmed at 30 and 60 digits (so not rounding noise)."""
    a = value_at(expr, point, 30)
    if a is None or a >= 0:
        return False
    b = value_at(expr, point, 60)
    return b is not None and b < 0 and abs(a) > 1e-25 * (1 + abs(b))


def real_roots(expr: sp.Expr, var: sp.Symbol) -> list[sp.Expr] | None:
    """Closed-form roots of ``expr = 0`` in ``var`` (numerator only), or None when sympy cannot."""
    num, _ = sp.fraction(sp.together(expr))
    if num.count_ops() > MAX_OPS:
        return None
    try:
        roots = sp.solve(num, var)
    except _SOLVE_ERRORS:
        return None
    # Cardano forms with the imaginary unit are real roots written through complex numbers: useless here.
    if any(r.has(sp.CRootOf, sp.I) or r.count_ops() > 120 for r in roots):
        return None
    return [sp.simplify(r) if r.count_ops() < 40 else r for r in roots]


def negative_region(expr: sp.Expr, var: sp.Symbol, point: dict, lower: float | None,
                    upper: float | None = None) -> list[tuple] | None:
    """Intervals of ``var`` (at the other values in ``point``) where ``expr < 0``.

    Returns ``(left, right)`` pairs of sympy boundaries (closed-form roots or range ends
    or ``None`` for unbounded), an empty list when ``expr`` is nowhere negative, or None when
    the roots have no closed form (nothing can be said).
    """
    roots = real_roots(expr, var)
    if roots is None:
        return None
    rest = {k: v for k, v in point.items() if k != var}
    located = []
    for r in roots:
        v = value_at(r, rest)
        if v is None:
            continue
        if lower is not None and v <= lower:
            continue
        if upper is not None and v >= upper:
            continue
        located.append((v, r))
    located.sort(key=lambda x: x[0])
    cuts = [(lower, None)] + located + [(upper, None)]
    out = []
    for (a, ra), (b, rb) in zip(cuts, cuts[1:]):
        if a is None and b is None:
            mid = 0.0
        elif a is None:
            mid = b - 1.0 - abs(b)
        elif b is None:
            mid = a + 1.0 + abs(a)
        else:
            mid = (a + b) / 2
        pt = dict(rest)
        pt[var] = sp.Rational(round(mid * 10**9), 10**9)
        v = value_at(expr, pt)
        if v is not None and v < 0:
            out.append((ra, rb))
    return out


def evaluator(exprs: list[sp.Expr], dps: int = 30):
    """A function ``point -> [mpf]`` (or None) for ``exprs``, compiled once per set of point keys.

    Points map symbols, and free functions with their derivatives, to numbers; the
    function atoms become plain arguments, so lambdify (mpmath) sees only symbols.
    """
    cache: dict = {}

    def values(point: dict):
        keys = tuple(point)
        if keys not in cache:
            dummies = {k: sp.Dummy() for k in keys if not isinstance(k, sp.Symbol)}
            try:
                cache[keys] = sp.lambdify([dummies.get(k, k) for k in keys],
                                          [e.xreplace(dummies) for e in exprs], modules="mpmath")
            except Exception:  # noqa: BLE001 - sympy's printers raise many kinds; evaluate point-wise then
                cache[keys] = None
        f = cache[keys]
        mpmath.mp.dps = dps
        if f is None:
            vals = [value_at(e, point, dps) for e in exprs]
            return None if any(v is None for v in vals) else [mpmath.mpf(v) for v in vals]
        try:
            out = f(*[mpmath.mpf(sp.Float(v, dps + 5)) for v in point.values()])
            out = [mpmath.mpf(x) if not isinstance(x, mpmath.mpc) else x for x in out]
        except (TypeError, ValueError, ZeroDivisionError, NameError, OverflowError):
            return None
        if any(isinstance(x, mpmath.mpc) and abs(x.imag) > 1e-20 * (1 + abs(x.real)) for x in out):
            return None
        return [mpmath.re(x) for x in out]

    return values
