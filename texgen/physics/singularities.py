"""Curvature and coordinate singularities, and the degenerate parameter values of a family.

Where a factor of the Kretschmann scalar's denominator vanishes, the curvature
diverges (a curvature singularity, unless free functions could cancel it); where a
metric or inverse-metric component blows up but the invariant stays finite, the
chart fails (a coordinate singularity); a factor without coordinates marks
parameter values where the family degenerates, not a place.
"""
from __future__ import annotations

from typing import NamedTuple

import sympy as sp

from ..errors import DerivationError
from . import _tools as tools
from .chart import lower_bound, upper_bound


class Singularities(NamedTuple):
    curvature: list
    """Equations (sympy ``Eq``) where the Kretschmann scalar's denominator vanishes."""
    coordinate: list
    degenerate: list
    """Equations in the parameters alone."""
    limits: dict
    """Description (``r -> 0``) -> limit of the Kretschmann scalar there."""


def classify(st, cv, radial, ppoint, notes: list) -> Singularities:
    """The singular loci of ``st``; what cannot be classified is noted in ``notes``."""
    curv_sing: list = []
    coord_sing: list = []
    limits: dict = {}
    ginv = cv.inverse
    try:
        K = cv.kretschmann
    except DerivationError as exc:
        K = None
        notes.append(f"Kretschmann scalar not available: {exc.message}")
    kfactors = _factors(K, cv) if K is not None else []
    coords = set(st.coordinate_symbols)
    degenerate: list = []
    if K is not None and K.atoms(sp.core.function.AppliedUndef):
        # With free functions the numerator may cancel a vanishing denominator: no claim.
        notes.append("the Kretschmann scalar depends on the free functions: whether it diverges where a "
                     "denominator vanishes depends on them, so no singularity is classified")
        free_functions = True
    else:
        free_functions = False
    for f in ([] if free_functions else kfactors):
        if f.free_symbols & coords:
            curv_sing.extend(_zero_set(f, st, radial, ppoint))
        else:
            # No coordinate: a value of the parameters where the family degenerates, not a place.
            degenerate.append(sp.Eq(f, 0, evaluate=False))
    seen = list(kfactors)
    for m in ((st.metric, ginv) if not free_functions else ()):
        for x in m:
            for f in _factors(cv.canonical(x), cv):
                if any(cv.is_zero(f - y) or cv.is_zero(f + y) for y in seen):
                    continue
                seen.append(f)
                if f.free_symbols & coords:
                    coord_sing.extend(_zero_set(f, st, radial, ppoint))
                else:
                    degenerate.append(sp.Eq(f, 0, evaluate=False))
    if K is not None and radial is not None:
        lower = lower_bound(st, radial)
        if lower is not None and K.count_ops() < tools.MAX_OPS:
            try:
                lim = sp.limit(K, radial, sp.Float(lower) if lower else 0, "+")
                if lim.has(sp.oo, -sp.oo, sp.zoo):
                    lim = sp.oo
                limits[f"{radial} -> {lower:g}"] = lim
            except tools._SOLVE_ERRORS:
                pass
    return Singularities(curv_sing, coord_sing, degenerate, limits)


def _factors(expr, cv=None):
    """Distinct non-constant factors of the denominator (over the exact normal form)."""
    x = cv._elem(expr) if cv is not None else None
    if x is not None and hasattr(cv.algebra, "denominator_parts"):
        # The engine keeps denominators factored: no sympy factor() of a large numerator.
        _, den = cv.algebra.denominator_parts(x)
    elif sp.count_ops(expr) > tools.MAX_OPS:
        return []
    else:
        num, den = sp.fraction(sp.factor(sp.together(expr)))
    out = []
    for f in sp.Mul.make_args(den):
        base, _ = f.as_base_exp()
        if base.free_symbols and base not in out:
            out.append(base)
    return out


def _zero_set(f, st, radial, point):
    """Where the factor ``f`` vanishes: ``r = r_0`` when it depends on the radius only, else ``f = 0``."""
    coords = [s for s in st.coordinate_symbols if s in f.free_symbols]
    # A factor positive for all real coordinates (g^2 + r^2 with g > 0) vanishes nowhere.
    real = {s: sp.Dummy(str(s), real=True) for s in coords}
    if f.xreplace(real).is_positive or (-f).xreplace(real).is_positive:
        return []
    if coords == [radial] and radial is not None:
        roots = tools.real_roots(f, radial)
        if roots:
            lo, hi = lower_bound(st, radial), upper_bound(st, radial, point)
            vals = [(r, tools.value_at(r, point)) for r in roots]
            return [sp.Eq(radial, r, evaluate=False) for r, v in vals
                    if v is not None and (lo is None or v >= lo) and (hi is None or v <= hi)]
    return [sp.Eq(f, 0, evaluate=False)]
