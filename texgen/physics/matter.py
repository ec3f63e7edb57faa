"""Matter content: the stress-energy the field equations demand and its components in a frame.

``T_ab = (s G_ab + σ Λ g_ab)/κ`` from the curvature engine's field tensor (the same
covariant ``T_ab`` in every sign convention); frame components
``T_(i)(j) = e_(i)^a e_(j)^b T_ab`` in the file's tetrad or in a frame built from
the metric (static, zero-angular-momentum or Eulerian observers); ρ = T_(0)(0),
p_i = T_(i)(i) for unit spacelike e_(i) in either signature.
"""
from __future__ import annotations

from typing import NamedTuple

import sympy as sp

from ..errors import ConfigError, Location
from ..spec.expressions import expression_to_text, parse_expression
from ..spec.schema import namespace
from .chart import coupling_split, signs, time_index


class StressEnergy(NamedTuple):
    """T_ab and T^a_b, and the same divided by the constant ``scale`` (what the exact field holds)."""

    T: sp.ImmutableMatrix
    mixed: sp.ImmutableMatrix
    Tw: sp.ImmutableMatrix
    """T_ab / scale: rational in the engine's field (no π)."""
    Twmix: sp.ImmutableMatrix
    scale: sp.Expr
    """A positive constant, e.g. 1/(8π)."""
    vacuum: bool


def stress_energy(st, cv) -> StressEnergy:
    """T_ab from the field tensor, as :class:`StressEnergy`."""
    n = st.dimension
    F = cv.field_tensor
    # The algebra works in the engine's exact field, which has no pi: T is computed as
    # Tw = T / scale with the constant scale > 0 (e.g. 1/(8 pi)) put back at the end.
    inner, scale = coupling_split(cv, st.conventions.coupling)
    Tw = sp.ImmutableMatrix(n, n, [cv.canonical(x / inner) for x in F])
    ginv = cv.inverse
    Twmix = sp.ImmutableMatrix(n, n, [cv.canonical(sum(ginv[a, c] * Tw[c, b] for c in range(n)))
                                      for a in range(n) for b in range(n)])
    T = Tw.applyfunc(lambda x: x * scale)
    Tmix = Twmix.applyfunc(lambda x: x * scale)
    vacuum = all(cv.is_zero(x) for x in Tw)
    return StressEnergy(T, Tmix, Tw, Twmix, scale, vacuum)


class FrameMatter(NamedTuple):
    """The frame used and ρ, p_i in it (divided by the stress-energy's ``scale``)."""

    frame: sp.ImmutableMatrix | None
    kind: str | None
    components: sp.ImmutableMatrix | None
    density: sp.Expr | None
    pressures: tuple
    hawking_ellis_type: str


def frame_matter(st, cv, se: StressEnergy, ti: int | None) -> FrameMatter:
    """The file's tetrad, else a built frame, and the matter in it (ρ and p_i when T is diagonal there)."""
    n = st.dimension
    ginv = cv.inverse
    Tw = se.Tw
    e = _tetrad_frame(st, cv)
    kind = "tetrad" if e is not None else None
    if e is None:
        e, kind = _built_frame(st, cv)
    comps = None
    rho = None
    ps: tuple = ()
    he_type = "vacuum" if se.vacuum else "unknown"
    if e is not None and ti is not None:
        Tup_t = sum(ginv[ti, a] * ginv[ti, b] * Tw[a, b] for a in range(n) for b in range(n))
        comps = _frame_components(st, cv, Tw, Tup_t, kind, e)
        rho = cv.canonical(comps[0, 0])
        diagonal = all(cv.is_zero(comps[i, j]) for i in range(n) for j in range(n) if i != j)
        if diagonal:
            ps = tuple(cv.canonical(comps[i, i]) for i in range(1, n))
            if not se.vacuum:
                he_type = "I"
    return FrameMatter(e, kind, comps, rho, ps, he_type)


def _tetrad_frame(st, cv) -> sp.ImmutableMatrix | None:
    sec = st.section("tetrad")
    if sec is None:
        return None
    ns = namespace(st)
    n = st.dimension
    names = [c.name for c in st.coordinates]
    node = sec.node
    rows = sec.data if isinstance(sec.data, list) else None

    def loc(path, nd=None):
        nd = nd or node
        return Location(st.source, nd.line if nd is not None else sec.line,
                        nd.column if nd is not None else None, path)

    if rows is None or len(rows) != n:
        got = len(rows) if rows is not None else type(sec.data).__name__
        raise ConfigError(f"Expected a list of {n} rows e_(i)^a but received: {got}", loc("tetrad"))
    subs = st.definition_substitutions()
    out = []
    for i, row in enumerate(rows):
        rnode = node.value[i] if node is not None else None
        if not isinstance(row, dict):
            raise ConfigError(f"Expected a mapping coordinate -> component but received: {row!r}",
                              loc(f"tetrad[{i}]", rnode))
        vec = [sp.S.Zero] * n
        for key, text in row.items():
            knode = rnode.value.get(key) if rnode is not None else None
            if key not in names:
                raise ConfigError(f"Expected one of: {', '.join(repr(x) for x in names)} but received: '{key}'",
                                  loc(f"tetrad[{i}].{key}", knode))
            try:
                vec[names.index(key)] = parse_expression(text, ns).xreplace(subs)
            except ConfigError as exc:
                raise ConfigError(exc.message, loc(f"tetrad[{i}].{key}", knode)) from None
        out.append(vec)
    e = sp.ImmutableMatrix(out)
    g = st.metric
    eta = signs(st)
    ti = time_index(st)
    # Orthonormal up to order: one row timelike (put first), the others spacelike.
    for i in range(n):
        for j in range(i, n):
            dot = (e[i, :] * g * e[j, :].T)[0, 0]
            if i == j:
                if cv.is_zero(dot - 1) or cv.is_zero(dot + 1):
                    continue
            elif cv.is_zero(dot):
                continue
            raise ConfigError(f"Expected orthonormal rows but e_({i})·e_({j}) = {expression_to_text(cv.canonical(dot))}",
                              loc(f"tetrad[{j}]", node.value[j] if node is not None else None))
    first = cv.canonical((e[0, :] * g * e[0, :].T)[0, 0])
    if ti is not None and first != eta[ti]:
        raise ConfigError("Expected the first row e_(0) to be the timelike vector", loc("tetrad[0]",
                          node.value[0] if node is not None else None))
    return e


def _built_frame(st, cv):
    """The static / ZAMO / Eulerian frame when the spatial block is diagonal, else None."""
    ti = time_index(st)
    if ti is None:
        return None, None
    g = st.metric
    n = st.dimension
    space = [i for i in range(n) if i != ti]
    for i in space:
        for j in space:
            if i < j and not cv.is_zero(g[i, j]):
                return None, None
    ginv = cv.inverse
    if cv.is_zero(ginv[ti, ti]):
        return None, None
    shift = [i for i in space if not cv.is_zero(g[ti, i])]
    t = st.coordinates[ti].symbol
    stationary = all(t not in cv.canonical(x).free_symbols for x in g)
    if not shift and stationary:
        kind = "static"
    elif (len(shift) == 1 and st.coordinates[shift[0]].period is not None and stationary
          and st.coordinates[shift[0]].symbol not in set().union(*(x.free_symbols for x in g))):
        kind = "zamo"
    else:
        kind = "eulerian"
    sg = signs(st)
    # Unit normal of t = const, future pointing: n^a = α sign(g^tt) g^{ta}, α = |g^tt|^(-1/2).
    alpha = 1 / sp.sqrt(sg[ti] * ginv[ti, ti])
    rows = []
    e0 = [alpha * sg[ti] * ginv[ti, a] for a in range(n)]
    rows.append(e0)
    for i in space:
        v = [sp.S.Zero] * n
        v[i] = 1 / sp.sqrt(sg[i] * g[i, i])
        rows.append(v)
    return sp.ImmutableMatrix(rows), kind


def _frame_components(st, cv, T, Tup_t, kind, e):
    """T_(i)(j); rational (no square roots) for built frames, via T^{tt} and T_ij."""
    n = st.dimension
    ti = time_index(st)
    if kind == "tetrad":
        comps = [[cv.canonical((e[i, :] * T * e[j, :].T)[0, 0]) for j in range(n)] for i in range(n)]
        return sp.ImmutableMatrix(comps)
    sg = signs(st)
    ginv = cv.inverse
    space = [i for i in range(n) if i != ti]
    order = [ti] + space
    comps = [[sp.S.Zero] * n for _ in range(n)]
    comps[0][0] = cv.canonical(Tup_t / (sg[ti] * ginv[ti, ti]))
    for k, i in enumerate(space, start=1):
        for m, j in enumerate(space, start=1):
            comps[k][m] = e[k, i] * e[m, j] * T[i, j]
        # n^a T_ai = α sign(g^tt) T^t_i: test the rational factor, keep the root unexpanded.
        flux = cv.canonical(sum(ginv[ti, a] * T[a, i] for a in range(n)))
        comps[0][k] = comps[k][0] = (0 if cv.is_zero(flux)
                                     else sp.Mul(e[0, ti] / ginv[ti, ti], flux, e[k, i], evaluate=False))
    for k in range(1, n):
        i = order[k]
        comps[k][k] = cv.canonical(T[i, i] / (sg[i] * st.metric[i, i]))
    return sp.ImmutableMatrix(comps)
