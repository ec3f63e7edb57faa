"""Numerical sample points inside a spacetime's declared ranges.

Used wherever texgen must test something it cannot prove: the signature and
degeneracy checks of the loader, numerical claim comparison, energy-condition
sampling. Points are drawn from a seeded generator so every run is reproducible.
"""
from __future__ import annotations

import math
import random
from typing import Iterable

import sympy as sp

from .model import Range

_DEFAULT_SCALE = (0.3, 5.0)


def _bound(expr: sp.Expr | None, values: dict) -> float | None:
    if expr is None:
        return None
    try:
        return float(sp.sympify(expr).xreplace(values).evalf(30))
    except (TypeError, ValueError):
        return None


def _draw(rng: random.Random, rng_: Range | None, sym: sp.Symbol, values: dict,
          period: sp.Expr | None = None, radial: bool = False) -> sp.Rational:
    lo = hi = None
    if rng_ is not None:
        lo, hi = _bound(rng_.lower, values), _bound(rng_.upper, values)
    if lo is None and hi is None:
        if period is not None:
            lo, hi = 0.0, float(period)
        elif sym.is_positive:
            lo = 0.0
        elif sym.is_negative:
            hi = 0.0
    if lo is not None and hi is not None:
        if hi <= lo:
            raise ValueError(f"empty range for {sym}")
        x = lo + (hi - lo) * rng.uniform(0.02, 0.98)
    elif lo is not None:
        x = lo + math.exp(rng.uniform(math.log(_DEFAULT_SCALE[0]), math.log(_DEFAULT_SCALE[1] * (4 if radial else 1))))
    elif hi is not None:
        x = hi - math.exp(rng.uniform(math.log(_DEFAULT_SCALE[0]), math.log(_DEFAULT_SCALE[1])))
    else:
        x = rng.uniform(-3.0, 3.0)
    if sym.is_integer:
        x = float(round(x)) or 1.0
    # Exact rationals keep later evaluation at any precision honest.
    return sp.Rational(round(x * 10**6), 10**6)


def _dependency_order(params) -> list:
    """Parameters ordered so that each range's bounds are drawn before it (``0 <= a < M``)."""
    done: list = []
    pending = list(params)
    while pending:
        known = {p.symbol for p in done}
        ready = [p for p in pending if p.range is None or all(
            s in known for b in (p.range.lower, p.range.upper) if b is not None
            for s in sp.sympify(b).free_symbols)]
        if not ready:  # a cycle of bounds; the relation check below will reject bad draws
            ready = pending[:1]
        for p in ready:
            pending.remove(p)
            done.append(p)
    return done


def sample_point(spacetime, rng: random.Random, *, tries: int = 200,
                 use_values: bool = False) -> dict[sp.Symbol, sp.Rational]:
    """One point (parameters and coordinates) satisfying every declared range.

    With ``use_values`` the parameters' declared representative values are used
    where given, and only the rest is drawn.
    """
    params = _dependency_order(spacetime.parameters)
    for _ in range(tries):
        values: dict[sp.Symbol, sp.Rational] = {}
        try:
            for p in params:
                if use_values and p.value is not None:
                    values[p.symbol] = p.value
                else:
                    values[p.symbol] = _draw(rng, p.range, p.symbol, values)
            for c in spacetime.coordinates:
                values[c.symbol] = _draw(rng, c.range, c.symbol, values, c.period, radial=c.name == "r")
        except ValueError:
            continue
        rels = []
        for item in tuple(params) + tuple(spacetime.coordinates):
            if item.range is not None:
                rels.extend(item.range.relations(item.symbol))
        if all(_check(rel, values) for rel in rels):
            return values
    raise ValueError("could not find a point satisfying the declared ranges")


def _check(rel: sp.Basic, values: dict) -> bool:
    lhs = sp.N(rel.lhs.xreplace(values), 30)
    rhs = sp.N(rel.rhs.xreplace(values), 30)
    if not (lhs.is_real and rhs.is_real):
        return False
    if isinstance(rel, sp.StrictGreaterThan):
        return bool(lhs > rhs)
    if isinstance(rel, sp.GreaterThan):
        return bool(lhs >= rhs)
    if isinstance(rel, sp.StrictLessThan):
        return bool(lhs < rhs)
    return bool(lhs <= rhs)


def sample_points(spacetime, n: int, seed: int = 0) -> list[dict[sp.Symbol, sp.Rational]]:
    """``n`` reproducible points satisfying every declared range."""
    rng = random.Random(seed)
    return [sample_point(spacetime, rng) for _ in range(n)]


def function_values(expr: sp.Expr, rng: random.Random) -> dict[sp.Basic, sp.Rational]:
    """Random stand-in values for free functions and their derivatives in ``expr``.

    Functions get values in [0.5, 2] (scale factors and lapse functions are
    positive), derivatives values in [-1, 1].
    """
    out: dict[sp.Basic, sp.Rational] = {}
    derivs = sorted(expr.atoms(sp.Derivative), key=sp.default_sort_key, reverse=True)
    for d in derivs:
        out[d] = sp.Rational(round(rng.uniform(-1, 1) * 1000), 1000)
    for f in sorted(expr.atoms(sp.core.function.AppliedUndef), key=sp.default_sort_key):
        out[f] = sp.Rational(round(rng.uniform(0.5, 2) * 1000), 1000)
    return out


def evaluate(expr: sp.Expr, values: dict, dps: int = 30) -> sp.Number:
    """``expr`` at ``values`` as a sympy float with ``dps`` digits (complex if it is complex)."""
    return sp.N(expr.xreplace(values), dps)
