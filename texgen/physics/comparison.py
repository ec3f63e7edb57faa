"""Deciding ``claimed = derived``: exactly in the engine's normal form, else numerically at seeded points.

Numerical comparison replaces free functions by random smooth stand-ins and
evaluates both sides with :data:`NUMERIC_DIGITS` digits at points inside the declared
ranges; the first point uses the parameters' declared values so that a witness is
easy to read.  The file's ``impose`` relations are solved once per model and
substituted into both sides first.
"""
from __future__ import annotations

import random
from dataclasses import dataclass

import mpmath
import sympy as sp

from ..engine import algebra as _fields
from ..spec import sampling
from ..spec.model import Spacetime
from . import sources as _sources
from .claim_sections import parse_impose


NUMERIC_POINTS = 12
"""Points for a numerical comparison."""
NUMERIC_DIGITS = 40
"""Working precision of a numerical comparison (digits)."""
_TOLERANCE = sp.Float("1e-25", 40)
_FLOOR = sp.Float("1e-32", 40)
"""Both values below this count as zero (rounding noise at 40 digits)."""


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
