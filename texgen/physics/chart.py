"""Facts about the chart that every part of the physical analysis needs.

Which coordinate is time (the odd sign of the signature) and which is radial
(``structure.radial``, else ``r``, ``rho`` or ``R``), the signature's signs, the
declared bounds of a coordinate, the representative parameter point, and regions
of the radial coordinate written in words.
"""
from __future__ import annotations

import random

import sympy as sp

from ..errors import ConfigError, Location
from ..spec.expressions import expression_to_text
from ..spec.sampling import sample_point
from . import _tools as tools

SAMPLES = 40
"""Random points per energy condition (plus radial sweeps and points near horizons)."""
SEED = 20240601


def time_index(st) -> int | None:
    sig = st.conventions.signature
    if "-" not in sig or "+" not in sig:
        return None
    odd = "+" if sig.count("+") == 1 else "-"
    return sig.index(odd)


def signs(st) -> list[int]:
    return [1 if c == "+" else -1 for c in st.conventions.signature]


def radial_coordinate(st) -> sp.Symbol | None:
    sec = st.section("structure")
    name = None
    if sec is not None and isinstance(sec.data, dict) and isinstance(sec.data.get("radial"), str):
        name = sec.data["radial"]
        found = [c.symbol for c in st.coordinates if c.name == name]
        if not found:
            node = sec.node.value.get("radial") if sec.node is not None else None
            raise ConfigError(
                f"Expected one of: {', '.join(repr(c.name) for c in st.coordinates)} but received: '{name}'",
                Location(st.source, node.line if node else sec.line, node.column if node else None,
                         "structure.radial"))
        return found[0]
    for c in st.coordinates:
        if c.name in ("r", "rho", "R"):
            return c.symbol
    return None


def upper_bound(st, sym, point) -> float | None:
    """The declared upper bound of a coordinate at the sample parameters, or None."""
    for c in st.coordinates:
        if c.symbol == sym and c.range is not None and c.range.upper is not None:
            return tools.value_at(sp.sympify(c.range.upper), point)
    return None


def lower_bound(st, sym) -> float | None:
    for c in st.coordinates:
        if c.symbol == sym and c.range is not None and c.range.lower is not None:
            try:
                return float(c.range.lower)
            except TypeError:
                return None
    if sym.is_positive or sym.is_nonnegative:
        return 0.0
    return None


def parameter_point(st) -> dict:
    """Representative parameter values: declared values, else the first seeded sample."""
    try:
        pt = sample_point(st, random.Random(SEED), use_values=True)
    except ValueError:
        return {}
    return {p.symbol: pt[p.symbol] for p in st.parameters if p.symbol in pt}


def outer_first(roots: list[sp.Expr], point: dict) -> list[sp.Expr]:
    def key(r):
        v = tools.value_at(r, point)
        return -(v if v is not None else -1e300)
    return sorted(roots, key=key)


def region_text(intervals: list[tuple] | None, var: sp.Symbol, lower_known: bool) -> str | None:
    if not intervals:
        return None
    parts = []
    for a, b in intervals:
        if a is None and b is None:
            parts.append("everywhere in the declared range")
        elif a is None:
            parts.append(f"{var} < {expression_to_text(b)}")
        elif b is None:
            parts.append(f"{var} > {expression_to_text(a)}")
        else:
            parts.append(f"{expression_to_text(a)} < {var} < {expression_to_text(b)}")
    return " or ".join(parts) if parts else None


def coupling_split(cv, kappa):
    """``(inner, scale)`` with ``1/kappa = scale/inner``: ``inner`` fits the engine's field, ``scale > 0`` is a constant."""
    inner, outer = [], []
    for f in sp.Mul.make_args(kappa):
        (inner if cv._elem(f) is not None else outer).append(f)
    scale = 1 / sp.Mul(*outer)
    if not outer or scale.free_symbols or scale.is_positive is not True:
        return kappa, sp.S.One
    return sp.Mul(*inner), scale
