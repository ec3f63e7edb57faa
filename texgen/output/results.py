"""The JSON results: every derived curvature quantity, keyed by coordinate names, as parsable text.

Expressions are canonical (definitions expanded) and written as text that
:func:`texgen.spec.expressions.parse_expression` reads back exactly; later stages
add their blocks (:mod:`texgen.output.stages`).
"""
from __future__ import annotations

import itertools
from typing import Any, Callable

from .._version import __version__
from ..errors import DerivationError
from ..spec.expressions import expression_to_text
from ..spec.model import Spacetime


def _texts(items) -> dict[str, str]:
    return {key: expression_to_text(v) for key, v in items}


def build_results(spacetime: Spacetime, curvature, extra: dict | None = None) -> dict:
    """Machine-readable results: every derived quantity, keyed by coordinate names.

    Expressions are canonical (definitions expanded) and written as text that
    :func:`texgen.spec.expressions.parse_expression` reads back exactly.
    """
    st, cv = spacetime, curvature
    n = st.dimension
    names = [c.name for c in st.coordinates]

    def key(idx):
        return ",".join(names[i] for i in idx)

    is_zero = cv.is_zero
    out: dict[str, Any] = {
        "generator": "texgen",
        "texgen_version": __version__,
        "format": 1,
        "spacetime": {
            "id": st.id, "title": st.title, "version": st.version, "source": st.source.rsplit("/", 1)[-1],
            "sha256": st.sha256,
            "coordinates": names,
            "parameters": {q.name: list(q.assumptions) for q in st.parameters},
            "functions": {f.name: [str(a) for a in f.arguments] for f in st.functions},
            "definitions": {d.name: expression_to_text(d.expression) for d in st.definitions},
        },
        "conventions": dict(cv.conventions),
        "metric": _texts((key((i, j)), st.metric[i, j]) for i in range(n) for j in range(i, n)
                         if st.metric[i, j] != 0),
    }
    wanted = set(st.derive) if st.derive else None
    missing = []

    def put(name: str, fn: Callable[[], Any]) -> None:
        if wanted is not None and name not in wanted and name not in ("ricci", "inverse"):
            return
        try:
            out.update(fn())
        except DerivationError as exc:
            missing.append({"stage": name, "reason": exc.message})

    put("inverse", lambda: {
        "inverse": _texts((key((i, j)), cv.inverse[i, j]) for i in range(n) for j in range(i, n)
                          if not is_zero(cv.inverse[i, j])),
        "determinant": expression_to_text(cv.determinant)})
    put("christoffel", lambda: {"christoffel": _texts((key(i), v) for i, v in cv.nonzero_christoffel())})
    put("riemann", lambda: {"riemann_down": _texts((key(i), v) for i, v in cv.independent_riemann())})
    put("ricci", lambda: {
        "ricci": _texts((key((i, j)), cv.ricci[i, j]) for i in range(n) for j in range(i, n)
                        if not is_zero(cv.ricci[i, j])),
        "ricci_scalar": expression_to_text(cv.ricci_scalar)})
    put("einstein", lambda: {
        "einstein": _texts((key((i, j)), cv.einstein[i, j]) for i in range(n) for j in range(i, n)
                           if not is_zero(cv.einstein[i, j])),
        "einstein_mixed": _texts((key((i, j)), cv.einstein_mixed[i, j]) for i in range(n) for j in range(n)
                                 if not is_zero(cv.einstein_mixed[i, j]))})
    if n >= 4:
        put("weyl", lambda: {"weyl": _texts(
            (key((a, b, c, d)), cv.weyl[a, b, c, d])
            for a, b in itertools.combinations(range(n), 2) for c, d in itertools.combinations(range(n), 2)
            if (a, b) <= (c, d) and not is_zero(cv.weyl[a, b, c, d]))})

    def invariants():
        inv = {"kretschmann": expression_to_text(cv.kretschmann),
               "ricci_squared": expression_to_text(cv.ricci_squared)}
        checks = {}
        if n >= 4:
            inv["weyl_squared"] = expression_to_text(cv.weyl_squared)
            checks["invariant_identity"] = bool(is_zero(cv.invariant_identity))
        return {"invariants": inv, "checks": checks}

    put("invariants", invariants)
    put("bianchi", lambda: {"checks": dict(out.get("checks", {}), bianchi=all(is_zero(x) for x in cv.bianchi))})
    if extra:
        out.update(extra)
    out["missing"] = missing
    return out
