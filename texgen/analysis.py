"""Physical analysis: matter content, energy conditions, horizons, singularities, causality, clocks.

:func:`analyse` is pure computation on the frozen model and its
:class:`texgen.derive.Curvature`; :func:`report_section` turns the result into
plain data for ``templates/sections/analysis.*.j2``; :func:`results` into JSON.

Conventions: ``T_ab = (s G_ab + σ Λ g_ab)/κ`` from the curvature engine's field tensor
(the same covariant ``T_ab`` in every sign convention), frame components
``T_(i)(j) = e_(i)^a e_(j)^b T_ab``; ρ = T_(0)(0), p_i = T_(i)(i) for unit spacelike
e_(i) in either signature.
"""
from __future__ import annotations

import weakref
from dataclasses import dataclass, field, replace

import mpmath
import sympy as sp
from mpmath.libmp import NoConvergence
from sympy.polys.polyerrors import BasePolynomialError

from . import _analysis_tools as tools
from .errors import ConfigError, DerivationError, Location
from .expressions import expression_to_text, parse_expression

__all__ = ["Analysis", "Verdict", "analyse", "report_section", "results", "clock_rate_difference"]

SAMPLES = 40
"""Random points per energy condition (plus radial sweeps and points near horizons)."""
SEED = 20240601

CONDITIONS = ("null", "weak", "strong", "dominant")


@dataclass(frozen=True)
class Verdict:
    """The verdict on one point-wise energy condition."""

    status: str
    """``holds`` (proved), ``violated`` (witness found), ``holds_at_samples`` (not proved), ``undecided``."""
    inequalities: tuple[sp.Expr, ...]
    """Each expression is required to be ``>= 0``."""
    witness: dict | None = None
    """A point (symbol -> number, free-function values included) where one inequality fails."""
    samples: int = 0
    """Number of points evaluated."""
    region: str | None = None
    """Where it fails, when that could be said (``r < 2 M``)."""
    failing: int | None = None
    """Index of the inequality the witness violates."""


@dataclass(frozen=True)
class Analysis:
    """Results of the physical analysis of one spacetime."""

    stress_energy: sp.ImmutableMatrix
    """T_ab (covariant)."""
    stress_energy_mixed: sp.ImmutableMatrix
    """T^a_b."""
    frame: sp.ImmutableMatrix | None
    """Rows e_(i)^a (upper index) of the orthonormal frame used, or None."""
    frame_kind: str | None
    """``static``, ``zamo``, ``eulerian`` (normal observers of t = const), ``tetrad`` or None."""
    frame_components: sp.ImmutableMatrix | None
    """T_(i)(j) in that frame."""
    energy_density: sp.Expr | None
    pressures: tuple[sp.Expr, ...]
    """Principal pressures p_i (frame order), when T is diagonal in the frame."""
    hawking_ellis_type: str
    """``vacuum``, ``I``, ``I (at samples)``, ``not I at samples`` or ``unknown``."""
    energy_conditions: dict
    """``null``/``weak``/``strong``/``dominant`` -> :class:`Verdict`."""
    radial: sp.Symbol | None
    horizon_function: sp.Expr | None
    horizons: tuple[sp.Expr, ...]
    """Radii where the horizon function vanishes, outermost first."""
    horizons_numeric: tuple[float, ...]
    """The radii at the sample parameter values :attr:`parameter_point` (also when no closed form)."""
    parameter_point: dict
    naked_condition: sp.Basic | None
    """Condition on the parameters under which there is no horizon."""
    ergosurfaces: tuple[sp.Expr, ...]
    curvature_singularities: tuple[sp.Basic, ...]
    """Equations (sympy ``Eq``) where the Kretschmann scalar's denominator vanishes."""
    coordinate_singularities: tuple[sp.Basic, ...]
    """Equations where a metric component blows up while the invariants stay finite."""
    parameter_degeneracies: tuple[sp.Basic, ...]
    """Equations in the parameters alone where a curvature or metric denominator vanishes (no place in spacetime)."""
    curvature_limits: dict
    """Description (``r -> 0``) -> limit of the Kretschmann scalar there."""
    surface_gravities: tuple[sp.Expr | None, ...]
    """Signed κ per horizon (negative where the lapse squared decreases outwards)."""
    surface_gravity_forms: tuple[sp.Expr | None, ...]
    """κ as a function of the radial coordinate at the horizon (a parameter eliminated with H = 0), or None."""
    hawking_temperatures: tuple[sp.Expr | None, ...]
    ctc_regions: dict
    """Periodic coordinate name -> description of where its Killing vector is timelike."""
    null_directions: tuple[sp.Expr, ...]
    """Radial null directions dr/dt in the t–r plane."""
    cone_tilt: str | None
    """Where the light cones tip over (both radial null directions on one side)."""
    clock_rate: sp.Expr | None
    """dτ/dt of static observers."""
    static_region: str | None
    orbit_angular_velocity: sp.Expr | None
    """Ω² of circular equatorial orbits (spherical symmetry)."""
    orbit_clock_rate: sp.Expr | None
    photon_sphere: sp.Expr | None
    isco: sp.Expr | None
    notes: tuple[str, ...] = field(default_factory=tuple)
    """What could not be done, in words."""


# ------------------------------------------------------------------ small helpers
def _time_index(st) -> int | None:
    sig = st.conventions.signature
    if "-" not in sig or "+" not in sig:
        return None
    odd = "+" if sig.count("+") == 1 else "-"
    return sig.index(odd)


def _signs(st) -> list[int]:
    return [1 if c == "+" else -1 for c in st.conventions.signature]


def _radial(st) -> sp.Symbol | None:
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


def _upper(st, sym, point) -> float | None:
    """The declared upper bound of a coordinate at the sample parameters, or None."""
    for c in st.coordinates:
        if c.symbol == sym and c.range is not None and c.range.upper is not None:
            return tools.value_at(sp.sympify(c.range.upper), point)
    return None


def _lower(st, sym) -> float | None:
    for c in st.coordinates:
        if c.symbol == sym and c.range is not None and c.range.lower is not None:
            try:
                return float(c.range.lower)
            except TypeError:
                return None
    if sym.is_positive or sym.is_nonnegative:
        return 0.0
    return None


def _param_point(st) -> dict:
    """Representative parameter values: declared values, else the first seeded sample."""
    import random

    from .sampling import sample_point

    try:
        pt = sample_point(st, random.Random(SEED), use_values=True)
    except ValueError:
        return {}
    return {p.symbol: pt[p.symbol] for p in st.parameters if p.symbol in pt}


def _order_outer_first(roots: list[sp.Expr], point: dict) -> list[sp.Expr]:
    def key(r):
        v = tools.value_at(r, point)
        return -(v if v is not None else -1e300)
    return sorted(roots, key=key)


def _text_of_region(intervals: list[tuple] | None, var: sp.Symbol, lower_known: bool) -> str | None:
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


def _coupling_split(cv, kappa):
    """``(inner, scale)`` with ``1/kappa = scale/inner``: ``inner`` fits the engine's field, ``scale > 0`` is a constant."""
    inner, outer = [], []
    for f in sp.Mul.make_args(kappa):
        (inner if cv._elem(f) is not None else outer).append(f)
    scale = 1 / sp.Mul(*outer)
    if not outer or scale.free_symbols or scale.is_positive is not True:
        return kappa, sp.S.One
    return sp.Mul(*inner), scale


# ------------------------------------------------------------------ frames
def _tetrad_frame(st, cv) -> sp.ImmutableMatrix | None:
    sec = st.section("tetrad")
    if sec is None:
        return None
    from .schema import namespace

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
    eta = _signs(st)
    ti = _time_index(st)
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
    ti = _time_index(st)
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
    sg = _signs(st)
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
    ti = _time_index(st)
    if kind == "tetrad":
        comps = [[cv.canonical((e[i, :] * T * e[j, :].T)[0, 0]) for j in range(n)] for i in range(n)]
        return sp.ImmutableMatrix(comps)
    sg = _signs(st)
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


# ------------------------------------------------------------------ energy conditions
def _frame_valid(st, cv, kind):
    """Expressions that must be positive where the built frame exists (t = const spacelike, e_(i) real)."""
    if kind in (None, "tetrad"):
        return []
    ti = _time_index(st)
    sg = _signs(st)
    out = [cv.canonical(sg[ti] * cv.inverse[ti, ti])]
    out += [cv.canonical(sg[i] * st.metric[i, i]) for i in range(st.dimension) if i != ti]
    return [x for x in out if not x.is_number]


def _valid_points(points, valid):
    return [p for p in points if all((tools.value_at(v, p) or 0) > 0 for v in valid)]


def _inequalities(rho, ps):
    sec_sum = rho + sp.Add(*ps)
    return {
        "null": tuple(rho + p for p in ps),
        "weak": (rho,) + tuple(rho + p for p in ps),
        "strong": (sec_sum,) + tuple(rho + p for p in ps),
        "dominant": (rho,) + tuple(x for p in ps for x in (rho - p, rho + p)),
    }


def _verdict(st, cv, ineqs, points, radial, stand_ins, param_point, extra_note=None, provable=True):
    canon = tuple(cv.canonical(x) for x in ineqs)
    if provable and all(cv.is_zero(x) or tools.proved_nonnegative(x, stand_ins) for x in canon):
        return Verdict("holds", canon, None, 0, None)
    pending = [k for k, x in enumerate(canon) if not (cv.is_zero(x) or tools.proved_nonnegative(x, stand_ins))]
    for pt in points:
        for k in pending:
            if tools.confirmed_negative(canon[k], pt):
                return Verdict("violated", canon, dict(pt), len(points),
                               _region(st, canon[k], radial, pt), k)
    if not points:
        return Verdict("undecided", canon, None, 0, None)
    return Verdict("holds_at_samples", canon, None, len(points), None)


def _region(st, expr, radial, point) -> str | None:
    if radial is None or expr.atoms(sp.core.function.AppliedUndef):
        return None
    others = {s for s in expr.free_symbols if s in set(st.coordinate_symbols)} - {radial}
    if others:
        return None
    lower = _lower(st, radial)
    intervals = tools.negative_region(expr, radial, point, lower)
    if intervals:
        return _text_of_region(intervals, radial, lower is not None)
    vals = [float(point[radial])] if radial in point else []
    return f"violated at sampled points with {radial} = {vals[0]:.6g}" if vals else None


# ------------------------------------------------------------------ structure
def _horizon_function(st, cv, radial):
    sec = st.section("structure")
    if sec is not None and isinstance(sec.data, dict) and "horizon_function" in sec.data:
        from .schema import namespace

        nd = sec.node.value.get("horizon_function") if sec.node is not None else None
        try:
            h = parse_expression(sec.data["horizon_function"], namespace(st))
        except ConfigError as exc:
            raise ConfigError(exc.message, Location(st.source, nd.line if nd else sec.line,
                                                    nd.column if nd else None, "structure.horizon_function")) from None
        return cv.canonical(h.xreplace(st.definition_substitutions()))
    if radial is None:
        return None
    i = st.coordinate_symbols.index(radial)
    num, _ = sp.fraction(cv.canonical(cv.inverse[i, i]))
    return num


def _naked_condition(h, radial):
    try:
        poly = sp.Poly(h, radial)
    except sp.PolynomialError:
        return None
    if poly.degree() != 2:
        return None
    disc = sp.expand(sp.discriminant(poly) / poly.LC() ** 2)
    if disc.free_symbols == set():
        return None
    neg = sp.expand(-disc)
    c, prim = neg.as_content_primitive()
    if c.is_positive is not True:
        return None
    pos_terms = [t for t in sp.Add.make_args(prim) if not t.could_extract_minus_sign()]
    neg_terms = [-t for t in sp.Add.make_args(prim) if t.could_extract_minus_sign()]
    if (sp.Add(*neg_terms) - sp.Add(*pos_terms)).is_nonnegative:
        return None  # impossible under the parameters' assumptions: the roots are always real
    return sp.StrictGreaterThan(sp.Add(*pos_terms), sp.Add(*neg_terms), evaluate=False)


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
            lo, hi = _lower(st, radial), _upper(st, radial, point)
            vals = [(r, tools.value_at(r, point)) for r in roots]
            return [sp.Eq(radial, r, evaluate=False) for r, v in vals
                    if v is not None and (lo is None or v >= lo) and (hi is None or v <= hi)]
    return [sp.Eq(f, 0, evaluate=False)]


def _surface_gravity(st, cv, radial, rh, point, h=None):
    """Signed κ = ½ ∂_r N² √(g^rr/N²) at the horizon ``rh`` (N² = −1/g^tt, the ZAMO lapse squared).

    κ² is a rational function; coordinates other than the radius must drop out on the
    horizon (checked at sample values), so they are set to a simple value before ``rh``
    is substituted. κ < 0 where N² decreases outwards (inner and cosmological horizons).
    """
    ti = _time_index(st)
    if ti is None or radial is None:
        return None
    sg = _signs(st)
    i = st.coordinate_symbols.index(radial)
    ginv = cv.inverse
    g = st.metric
    if all(cv.is_zero(g[ti, j]) for j in range(st.dimension) if j not in (ti, i)):
        # No rotation: the Killing vector ∂_t itself, κ² = -½ ∇_a ξ_b ∇^a ξ^b
        # = (∂_r g_tt)² / (4 (g_tr² - g_tt g_rr)); right also in Painlevé–Gullstrand and
        # Eddington–Finkelstein charts, where g^tt is not the lapse of ∂_t.
        n2 = cv.canonical(sg[ti] * g[ti, ti])
        det = cv.canonical(g[ti, i] ** 2 - g[ti, ti] * g[i, i])
        if cv.is_zero(n2) or cv.is_zero(det):
            return None
        ratio = cv.canonical(1 / det)
    else:
        if cv.is_zero(ginv[ti, ti]):
            return None
        n2 = cv.canonical(sg[ti] / ginv[ti, ti])
        if cv.is_zero(n2):
            return None
        ratio = cv.canonical(sg[i] * ginv[i, i] / n2)
    dn2 = cv.canonical(sp.diff(n2, radial))
    others = sorted((dn2.free_symbols | ratio.free_symbols) & set(st.coordinate_symbols) - {radial}, key=str)
    at_h = {k: v for k, v in point.items()} | {radial: sp.Float(tools.value_at(rh, point) or 0, 30)}
    sub = {}
    for x in others:
        # The value on the horizon must not depend on x: compare three sample values.
        vals = [tools.value_at(ratio * dn2**2, at_h | {y: sp.Rational(k, 7) for y in others}) for k in (3, 5, 9)]
        if any(v is None for v in vals) or max(vals) - min(vals) > 1e-12 * (1 + abs(vals[0])):
            return None
        for c in (sp.pi / 2, sp.S.One, sp.S.Zero):
            test = tools.value_at((ratio * dn2**2).xreplace(sub | {x: c}), at_h)
            if test is not None and abs(test - vals[0]) < 1e-12 * (1 + abs(vals[0])):
                sub[x] = c
                break
        else:
            return None
    try:
        k2 = sp.cancel(sp.together((dn2**2 * ratio).xreplace(sub))) / 4
        d = sp.cancel(sp.together(dn2.xreplace(sub)))
        slope = tools.value_at(d.subs(radial, rh), point)
        form = _on_horizon(st, cv, k2, radial, h)
        if form is not None:
            # |u| from the square root: its sign on this horizon is known numerically.
            at = point | {radial: sp.Float(tools.value_at(rh, point) or 0, 30)}
            form = form.xreplace({x: x.args[0] if (tools.value_at(x.args[0], at) or 0) >= 0 else -x.args[0]
                                  for x in form.atoms(sp.Abs)})
            v = tools.value_at(form, at)
            if v is not None and slope is not None and (v < 0) != (slope < 0):
                form = -form
            form = sp.factor(form)
            val = form.subs(radial, rh)
            val = sp.factor(val) if sp.count_ops(val) < 80 else val
        else:
            val = sp.sqrt(sp.factor(k2.subs(radial, rh)))
            val = sp.simplify(val) if sp.count_ops(val) < 200 else val
            val = val if slope is None or slope >= 0 else -val
    except tools._SOLVE_ERRORS:
        return None
    if val.has(sp.nan, sp.zoo) or set(st.coordinate_symbols) & val.free_symbols:
        return None
    if tools.value_at(val, point) is None or slope is None:
        return None
    return val, form


def _on_horizon(st, cv, k2, radial, h):
    """√k2 as a function of the horizon radius: a parameter that H = 0 fixes linearly is eliminated."""
    if h is None:
        return None
    for p in st.parameter_symbols:
        try:
            poly = sp.Poly(h, p)
        except tools._SOLVE_ERRORS:
            continue
        if poly.degree() != 1:
            continue
        sol = sp.cancel(-poly.coeff_monomial(1) / poly.coeff_monomial(p))
        if p in sol.free_symbols:
            continue
        red = sp.factor(sp.cancel(sp.together(k2.xreplace({p: sol}))))
        out = sp.factor(sp.sqrt(red))
        if not out.has(sp.sqrt(red)) or not out.has(sp.Pow):
            return out
        return sp.powdenest(out, force=False)
    return None


# ------------------------------------------------------------------ the analysis
_CACHE: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def analyse(spacetime, curvature) -> Analysis:
    """The physical analysis of ``spacetime`` (memoised per curvature object).

    Parameters
    ----------
    spacetime:
        The frozen model.
    curvature:
        Its :class:`texgen.derive.Curvature`.

    Raises :class:`~texgen.errors.ConfigError` for a bad ``tetrad`` or ``structure``
    section and :class:`~texgen.errors.DerivationError` when the field tensor cannot be computed.
    """
    try:
        cached = _CACHE.get(curvature)
    except TypeError:
        cached = None
    if cached is not None and cached[0] is spacetime:
        return cached[1]
    result = _analyse(spacetime, curvature)
    try:
        _CACHE[curvature] = (spacetime, result)
    except TypeError:
        pass
    return result


def _analyse(st, cv) -> Analysis:
    n = st.dimension
    notes: list[str] = []
    F = cv.field_tensor
    # The algebra works in the engine's exact field, which has no pi: T is computed as
    # Tw = T / scale with the constant scale > 0 (e.g. 1/(8 pi)) put back at the end.
    inner, scale = _coupling_split(cv, st.conventions.coupling)
    Tw = sp.ImmutableMatrix(n, n, [cv.canonical(x / inner) for x in F])
    ginv = cv.inverse
    Twmix = sp.ImmutableMatrix(n, n, [cv.canonical(sum(ginv[a, c] * Tw[c, b] for c in range(n)))
                                      for a in range(n) for b in range(n)])
    T = Tw.applyfunc(lambda x: x * scale)
    Tmix = Twmix.applyfunc(lambda x: x * scale)
    vacuum = all(cv.is_zero(x) for x in Tw)
    radial = _radial(st)
    ppoint = _param_point(st)
    stand_ins = tools.positive_stand_ins(st)
    ti = _time_index(st)

    # Frame and matter.
    e = _tetrad_frame(st, cv)
    kind = "tetrad" if e is not None else None
    if e is None:
        e, kind = _built_frame(st, cv)
    comps = None
    rho = None
    ps: tuple = ()
    he_type = "vacuum" if vacuum else "unknown"
    ec: dict = {}
    if e is not None and ti is not None:
        Tup_t = sum(ginv[ti, a] * ginv[ti, b] * Tw[a, b] for a in range(n) for b in range(n))
        comps = _frame_components(st, cv, Tw, Tup_t, kind, e)
        rho = cv.canonical(comps[0, 0])
        diagonal = all(cv.is_zero(comps[i, j]) for i in range(n) for j in range(n) if i != j)
        if diagonal:
            ps = tuple(cv.canonical(comps[i, i]) for i in range(1, n))
            if not vacuum:
                he_type = "I"
    special = []
    h = _horizon_function(st, cv, radial) if ti is not None else None
    horizons: list = []
    hnum: list = []
    if h is not None and radial is not None and radial in h.free_symbols:
        roots = tools.real_roots(h, radial)
        lower = _lower(st, radial)
        if roots is not None:
            keep = []
            upper = _upper(st, radial, ppoint)
            for r in roots:
                v = tools.value_at(r, ppoint)
                if v is not None and (lower is None or v > lower) and (upper is None or v < upper):
                    keep.append(r)
            horizons = _order_outer_first(keep, ppoint)
            hnum = [tools.value_at(r, ppoint) for r in horizons]
        else:
            notes.append("the horizon function has no closed-form roots; radii given at sample parameter values")
            try:
                hpoly = sp.Poly(h.xreplace(ppoint), radial)
                hnum = sorted((float(sp.re(x)) for x in hpoly.nroots(n=30) if abs(sp.im(x)) < 1e-20
                               and (lower is None or float(sp.re(x)) > lower)), reverse=True)
            except tools._SOLVE_ERRORS:
                hnum = []
        special = list(horizons) + [sp.Float(x) for x in hnum]
    # Throats of b(r)-type wormholes: where g_rr blows up but no horizon (g_tt stays negative).
    if radial is not None and not horizons and h is not None:
        roots = tools.real_roots(h, radial) or []
        special.extend(roots)

    if not vacuum and ti is not None:
        if rho is not None and ps:
            ineqs = _inequalities(rho, ps)
            base = list(ineqs["dominant"]) + [ineqs["strong"][0]]
            points = _valid_points(tools.sample_set(st, SAMPLES, SEED, radial, special, base),
                                   _frame_valid(st, cv, kind))
            for name in CONDITIONS:
                ec[name] = _verdict(st, cv, ineqs[name], points, radial, stand_ins, ppoint)
        elif comps is not None:
            ec, he_type = _nondiagonal_conditions(st, cv, comps, radial, special, stand_ins, ppoint,
                                                  valid=_frame_valid(st, cv, kind))
            notes.append("T_(i)(j) is not diagonal in the frame: principal pressures from its eigenvalues "
                         "at sample points only")
        else:
            ec, he_type = _nondiagonal_conditions(st, cv, None, radial, special, stand_ins, ppoint, Twmix)
            notes.append("no orthonormal frame could be built: energy conditions from the eigenvalues of "
                         "T^a_b at sample points only")

    naked = _naked_condition(h, radial) if h is not None and radial is not None and radial in h.free_symbols else None

    # Ergosurfaces: g_tt = 0 where it differs from the horizons (stationary, rotating).
    ergos: list = []
    if ti is not None and radial is not None and any(not cv.is_zero(st.metric[ti, j]) for j in range(n) if j != ti):
        roots = tools.real_roots(cv.canonical(st.metric[ti, ti]), radial)
        if roots:
            ergos = [r for r in roots if not any(cv.is_zero(r - x) for x in horizons)]
            ergos = _order_outer_first(ergos, ppoint | {c.symbol: sp.Rational(1, 3) for c in st.coordinates})

    # Singularities.
    curv_sing: list = []
    coord_sing: list = []
    limits: dict = {}
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
        lower = _lower(st, radial)
        if lower is not None and K.count_ops() < tools.MAX_OPS:
            try:
                lim = sp.limit(K, radial, sp.Float(lower) if lower else 0, "+")
                if lim.has(sp.oo, -sp.oo, sp.zoo):
                    lim = sp.oo
                limits[f"{radial} -> {lower:g}"] = lim
            except tools._SOLVE_ERRORS:
                pass

    kforms = [_surface_gravity(st, cv, radial, r, ppoint, h) for r in horizons]
    kappas = tuple(None if k is None else k[0] for k in kforms)
    kappa_forms = tuple(None if k is None else k[1] for k in kforms)
    temps = tuple(None if k is None else (k if (tools.value_at(k, ppoint) or 0) >= 0 else -k) / (2 * sp.pi)
                  for k in kappas)

    # Causality.
    ctc: dict = {}
    for i, c in enumerate(st.coordinates):
        if c.period is None or ti is None:
            continue
        gpp = cv.canonical(st.metric[i, i])
        sg_space = -_signs(st)[ti]  # the sign a spacelike norm has
        test = cv.canonical(sg_space * gpp)  # >= 0 means the Killing vector is not timelike
        if tools.proved_nonnegative(test, stand_ins):
            ctc[c.name] = "none: the Killing vector is nowhere timelike in the declared ranges"
            continue
        desc = None
        if radial is not None and (test.free_symbols & set(st.coordinate_symbols)) <= {radial}:
            iv = tools.negative_region(test, radial, ppoint | {radial: 1}, _lower(st, radial))
            desc = _text_of_region(iv, radial, True)
            if desc:
                ctc[c.name] = f"timelike (closed timelike curves) for {desc}"
                continue
        pts = tools.sample_set(st, SAMPLES, SEED + 7, radial, special, [test])
        bad = [p for p in pts if tools.confirmed_negative(test, p)]
        if bad:
            rs = sorted(float(p[radial]) for p in bad) if radial is not None else []
            ctc[c.name] = ("timelike at sampled points" + (f" with {radial} in [{rs[0]:.4g}, {rs[-1]:.4g}]" if rs else ""))
        else:
            ctc[c.name] = f"none found at {len(pts)} sampled points (not proved)"

    # Light cones in the t-r plane.
    nulls: tuple = ()
    tilt = None
    if ti is not None and radial is not None:
        i = st.coordinate_symbols.index(radial)
        gtt, gtr, grr = st.metric[ti, ti], st.metric[ti, i], st.metric[i, i]
        if cv.is_zero(grr) and not cv.is_zero(gtr):
            # Null-coordinate charts (Eddington–Finkelstein): one radial null direction is
            # t = const (along ∂_r), the other has dr/dt = -g_tt/(2 g_tr). Both point to one
            # side exactly where ∂_t is spacelike (future ∂_r side fixed by g(k, ∓∂_r) < 0).
            nulls = (cv.canonical(-gtt / (2 * gtr)),)
            sgt = _signs(st)[ti] * cv.canonical(gtt)
            if (sgt.free_symbols & set(st.coordinate_symbols)) <= {radial}:
                iv = tools.negative_region(sgt, radial, ppoint | {radial: 1}, _lower(st, radial))
                tilt = _text_of_region(iv, radial, True)
        elif not cv.is_zero(grr):
            disc = cv.canonical(gtr**2 - gtt * grr)
            root = sp.sqrt(disc)
            nulls = (sp.simplify(cv.canonical(-gtr / grr) + root / cv.canonical(grr)),
                     sp.simplify(cv.canonical(-gtr / grr) - root / cv.canonical(grr)))
            prod = cv.canonical(-gtt / grr)  # < 0: both radial null directions on one side
            if (prod.free_symbols & set(st.coordinate_symbols)) <= {radial}:
                iv = tools.negative_region(prod, radial, ppoint | {radial: 1}, _lower(st, radial))
                tilt = _text_of_region(iv, radial, True)

    # Clocks and orbits.
    clock = None
    static_region = None
    omega2 = orbit_rate = photon = isco = None
    if ti is not None:
        gtt = cv.canonical(st.metric[ti, ti])
        sg = _signs(st)[ti]
        c_sym = st.conventions.c
        # Static clocks need a stationary chart: no metric component may depend on t.
        t_sym = st.coordinate_symbols[ti]
        stationary = not any(t_sym in cv.canonical(x).free_symbols for x in st.metric)
        clock = sp.sqrt(cv.canonical(sg * gtt)) if stationary else None
        if clock is not None and c_sym is not None and c_sym in gtt.free_symbols:
            clock = clock / c_sym
        if clock is not None and radial is not None and (gtt.free_symbols & set(st.coordinate_symbols)) <= {radial}:
            iv = tools.negative_region(cv.canonical(sg * gtt), radial, ppoint | {radial: 1}, _lower(st, radial))
            bad = _text_of_region(iv, radial, True) if iv is not None else None
            static_region = (None if iv is None else "everywhere in the declared range" if not bad
                             else f"static observers cannot exist for {bad}")
        omega2, orbit_rate, photon, isco = _orbits(st, cv, radial, ppoint, horizons, hnum)
        if isinstance(isco, sp.Float):
            notes.append("the innermost stable circular orbit has no usable closed form: its radius is given "
                         "numerically at " + ", ".join(f"{k} = {float(v):.6g}" for k, v in ppoint.items()))

    # Back from Tw to T: positive constant factors change no sign, so verdicts stand.
    if scale != 1:
        comps = comps.applyfunc(lambda x: x * scale) if comps is not None else None
        rho = rho * scale if rho is not None else None
        ps = tuple(x * scale for x in ps)
        ec = {k: replace(v, inequalities=tuple(x * scale for x in v.inequalities)) for k, v in ec.items()}
    return Analysis(
        stress_energy=T, stress_energy_mixed=Tmix, frame=e, frame_kind=kind, frame_components=comps,
        energy_density=rho, pressures=ps, hawking_ellis_type=he_type, energy_conditions=ec,
        radial=radial, horizon_function=h, horizons=tuple(horizons), horizons_numeric=tuple(hnum),
        parameter_point=ppoint, naked_condition=naked, ergosurfaces=tuple(ergos),
        curvature_singularities=tuple(curv_sing), coordinate_singularities=tuple(coord_sing),
        parameter_degeneracies=tuple(degenerate),
        curvature_limits=limits, surface_gravities=kappas, surface_gravity_forms=kappa_forms, hawking_temperatures=temps, ctc_regions=ctc,
        null_directions=nulls, cone_tilt=tilt, clock_rate=clock, static_region=static_region,
        orbit_angular_velocity=omega2, orbit_clock_rate=orbit_rate, photon_sphere=photon, isco=isco,
        notes=tuple(notes))


def _nondiagonal_conditions(st, cv, comps, radial, special, stand_ins, ppoint, Tmix=None, valid=()):
    """Energy conditions when T is not diagonal in a frame: numerical, at sample points.

    Necessary conditions in the frame (ρ ≥ 0, and T_ab k^a k^b ≥ 0 for the null
    vectors e_(0) ± e_(i)) give witnesses of violation; the eigenvalues of T^a_b give
    the Hawking–Ellis type and ρ, p_i at each point.
    """
    n = st.dimension
    nec, wec = [], []
    if comps is not None:
        rho = comps[0, 0]
        for i in range(1, n):
            for s in (1, -1):
                nec.append(comps[0, 0] + 2 * s * comps[0, i] + comps[i, i])
        wec = [rho] + nec
    exprs = nec + wec
    Tm = Tmix if Tmix is not None else None
    points = tools.sample_set(st, SAMPLES // 2, SEED, radial, special, exprs or [sp.S.One])
    points = _valid_points(points, valid)
    out = {}
    ineq_by = {"null": tuple(nec), "weak": tuple(wec), "strong": tuple(nec), "dominant": tuple(wec)}
    for name in CONDITIONS:
        ineqs = ineq_by[name]
        verdict = None
        for pt in points:
            for k, x in enumerate(ineqs):
                if tools.confirmed_negative(x, pt):
                    verdict = Verdict("violated", ineqs, dict(pt), len(points), _region(st, x, radial, pt), k)
                    break
            if verdict:
                break
        out[name] = verdict
    he = "unknown"
    if Tm is not None or comps is not None:
        types = set()
        eigen_fail = {name: None for name in CONDITIONS}
        evaluate = tools.evaluator(list(comps if comps is not None else Tm))
        for pt in points[:8]:
            res = _eigen_at(st, cv, comps, Tm, pt, evaluate)
            if res is None:
                types.add("?")
                continue
            typ, rho_v, ps_v = res
            types.add(typ)
            if typ == "I":
                checks = {
                    "null": [rho_v + p for p in ps_v],
                    "weak": [rho_v] + [rho_v + p for p in ps_v],
                    "strong": [rho_v + sum(ps_v)] + [rho_v + p for p in ps_v],
                    "dominant": [rho_v] + [rho_v - abs(p) for p in ps_v],
                }
                for name, vals in checks.items():
                    if eigen_fail[name] is None and any(v < -1e-20 for v in vals):
                        eigen_fail[name] = pt
        he = "I (at samples)" if types == {"I"} else "not I at samples" if types - {"I", "?"} else "unknown"
        for name in CONDITIONS:
            if out[name] is None and eigen_fail[name] is not None:
                out[name] = Verdict("violated", ineq_by[name], dict(eigen_fail[name]), len(points), None)
    for name in CONDITIONS:
        if out[name] is None:
            status = "holds_at_samples" if he == "I (at samples)" else "undecided"
            out[name] = Verdict(status, ineq_by[name], None, len(points), None)
    return out, he


def _eigen_at(st, cv, comps, Tm, pt, evaluate):
    """Hawking–Ellis type, ρ and p_i at one point from T^(a)_(b) (mpmath, 30 digits)."""
    n = st.dimension
    mpmath.mp.dps = 30
    source = comps if comps is not None else Tm
    vals = evaluate(pt)
    if vals is None:
        return None
    eta = [-1] + [1] * (n - 1) if comps is not None else None
    M = mpmath.matrix(n, n)
    for a in range(n):
        for b in range(n):
            M[a, b] = vals[a * n + b] * (eta[a] if eta else 1)
    vals, vecs = mpmath.eig(M)
    if any(abs(mpmath.im(v)) > 1e-15 * (1 + abs(v)) for v in vals):
        return "not I", None, None
    if eta is None:
        return "I?", None, None
    norms = []
    for k in range(n):
        v = [mpmath.re(vecs[i, k]) for i in range(n)]
        norms.append(sum(eta[i] * v[i] ** 2 for i in range(n)))
    tl = [k for k in range(n) if norms[k] < 0]
    if len(tl) != 1:
        return "not I", None, None
    k0 = tl[0]
    rho = -float(mpmath.re(vals[k0]))
    ps = [float(mpmath.re(vals[k])) for k in range(n) if k != k0]
    return "I", rho, ps


def _orbits(st, cv, radial, ppoint, horizons, hnum):
    """Circular equatorial orbits, photon sphere and ISCO of static spherically symmetric metrics."""
    ti = _time_index(st)
    names = [c.name for c in st.coordinates]
    if radial is None or ti is None or "theta" not in names or "phi" not in names:
        return None, None, None, None
    n = st.dimension
    g = st.metric
    if any(not cv.is_zero(g[i, j]) for i in range(n) for j in range(n) if i != j):
        return None, None, None, None
    th = st.coordinates[names.index("theta")].symbol
    ph = names.index("phi")
    sg = _signs(st)
    A = cv.canonical(sg[ti] * g[ti, ti])
    C = cv.canonical(-sg[ti] * g[ph, ph].subs(th, sp.pi / 2))
    coords = set(st.coordinate_symbols)
    if (A.free_symbols | C.free_symbols) & coords - {radial}:
        return None, None, None, None
    # A = -g_tt > 0 where static observers exist, C = g_phiphi at the equator (mostly plus).
    dA, dC = sp.diff(A, radial), sp.diff(C, radial)
    omega2 = cv.canonical(dA / dC)
    rate = sp.sqrt(cv.canonical(A - C * omega2))
    outer = max([x for x in hnum if x is not None], default=None)
    lower = outer if outer is not None else _lower(st, radial)

    def pick(expr):
        roots = tools.real_roots(cv.canonical(expr), radial)
        if not roots:
            return None
        good = []
        for r in roots:
            v = tools.value_at(r, ppoint)
            if v is not None and (lower is None or v > lower + 1e-12):
                good.append((v, r))
        return max(good, key=lambda x: x[0])[1] if good else None

    photon = pick(sp.diff(A / C, radial))
    denom = cv.canonical(A * dC - dA * C)
    L2 = cv.canonical(C**2 * dA / denom)
    isco = pick(sp.diff(L2, radial))
    if isco is None:
        isco = _numeric_root(cv.canonical(sp.diff(L2, radial)), radial, ppoint, lower)
    return omega2, rate, photon, isco


def _numeric_root(expr, radial, ppoint, lower):
    """The outermost real root above ``lower`` of ``expr``'s numerator at the sample parameters (a Float)."""
    num, _ = sp.fraction(sp.together(expr.xreplace(ppoint)))
    try:
        roots = sp.Poly(num, radial).nroots(n=20)
    except tools._SOLVE_ERRORS + (BasePolynomialError, NoConvergence):
        return None
    real = [sp.re(x) for x in roots if abs(sp.im(x)) < 1e-15 * (1 + abs(x)) and (lower is None or sp.re(x) > lower + 1e-12)]
    return sp.Float(max(real), 15) if real else None


# ------------------------------------------------------------------ clocks in SI units
def clock_rate_difference(spacetime, r1, r2, values: dict, *, curvature=None):
    """Fractional rate difference ``(dτ/dt(r2) − dτ/dt(r1)) / dτ/dt(r1)`` of two static clocks.

    Parameters
    ----------
    spacetime:
        A static spacetime (``g_tt`` depends on the radial coordinate and parameters only).
    r1, r2:
        The clocks' radii (numbers, in the units of ``values``).
    values:
        Parameter values by name (``M``, and ``G``, ``c`` with explicit units), numbers or strings.

    Returns an ``mpmath.mpf`` computed with 50 digits (the difference of two numbers
    near 1 needs them). Raises :class:`DerivationError` if the clocks are not static there.
    """
    from .derive import Curvature

    cv = curvature or Curvature(spacetime)
    st = spacetime
    ti = _time_index(st)
    radial = _radial(st)
    if ti is None or radial is None:
        raise DerivationError("clock rates need a time coordinate and a radial coordinate")
    names = {p.name: p.symbol for p in st.parameters}
    if st.conventions.G is not None:
        names["G"] = st.conventions.G
    if st.conventions.c is not None:
        names["c"] = st.conventions.c
    sub = {}
    for k, v in values.items():
        sym = names.get(k) if isinstance(k, str) else k
        if sym is None:
            raise DerivationError(f"Expected one of: {', '.join(repr(x) for x in sorted(names))} but received: '{k}'")
        sub[sym] = sp.nsimplify(v, rational=True) if not isinstance(v, str) else sp.Rational(v)
    gtt = cv.canonical(st.metric[ti, ti])
    rate = sp.sqrt(_signs(st)[ti] * gtt)
    c_sym = st.conventions.c
    if c_sym is not None and c_sym in gtt.free_symbols:
        rate = rate / c_sym
    missing = (rate.free_symbols - {radial}) - set(sub)
    if missing:
        raise DerivationError("clock rates need values for: " + ", ".join(sorted(map(str, missing))))
    mpmath.mp.dps = 50
    out = []
    for r in (r1, r2):
        x = sp.N(rate.xreplace(sub | {radial: sp.nsimplify(r, rational=True)}), 50)
        if not x.is_real or x <= 0:
            raise DerivationError(f"no static clock at {radial} = {r}: the static Killing vector is not timelike there")
        out.append(mpmath.mpf(str(x)))
    return (out[1] - out[0]) / out[0]


# ------------------------------------------------------------------ report and JSON
_STATUS_TEXT = {
    "holds": "holds (proved under the declared assumptions and ranges)",
    "violated": "violated",
    "holds_at_samples": "holds at all {n} sampled points (not proved)",
    "undecided": "undecided",
}
_CONDITION_TITLE = {"null": "Null", "weak": "Weak", "strong": "Strong", "dominant": "Dominant"}


def _wanted(st, name):
    return not st.derive or name in st.derive


def _point_text(pt: dict) -> dict:
    return {expression_to_text(k): f"{float(v):.6g}" for k, v in pt.items()}


_DISPLAY = None
"""The curvature object whose short display form the section's formulas use (set per section)."""


def _math(p, lhs: str, expr) -> dict:
    """One formula for the section: inline when short (``short``), else a display with broken lines.

    A formula whose lines still do not fit (a denominator too wide to break) is marked
    ``too_long``; the templates then point to the JSON results instead of overflowing the page.
    """
    from .latex import estimate_width
    from .report import equation

    if (_DISPLAY is not None and isinstance(expr, sp.Expr) and not expr.is_number
            and sp.count_ops(expr) < tools.MAX_OPS):
        try:
            expr = _DISPLAY.display(expr)
        except (DerivationError, *tools._SOLVE_ERRORS):
            pass
    eq = equation(p, lhs, expr, text=False)
    eq["short"] = not eq["multiline"] and estimate_width(lhs + " = " + eq["latex"]) < 40
    limit = p.options.max_width + 6
    eq["too_long"] = any(estimate_width(line) > limit for line in eq["lines"])
    return eq


def _labels(name: str, diagonal: bool, n_space: int) -> list[str]:
    """LaTeX names of the inequalities of one condition, in :func:`_inequalities` order."""
    if diagonal:
        sums = [rf"\rho + p_{{({i})}}" for i in range(1, n_space + 1)]
        return {"null": sums, "weak": [r"\rho"] + sums,
                "strong": [r"\rho + \textstyle\sum_{i} p_{(i)}"] + sums,
                "dominant": [r"\rho"] + [x for i in range(1, n_space + 1)
                                          for x in (rf"\rho - p_{{({i})}}", rf"\rho + p_{{({i})}}")]}[name]
    kk = [rf"T_{{ab}} k_{{({i}{s})}}^{{a}} k_{{({i}{s})}}^{{b}}" for i in range(1, n_space + 1) for s in "+-"]
    return kk if name in ("null", "strong") else [r"\rho"] + kk


def _singularity(p, eq) -> dict:
    lhs, rhs = (eq.lhs, eq.rhs) if isinstance(eq, sp.Equality) else (eq, sp.S.Zero)
    return _math(p, p.tex(lhs), rhs)


def report_section(spacetime, curvature, printer) -> dict | None:
    """Plain data for ``templates/sections/analysis.*.j2``, or None when nothing applies."""
    from .report import equation

    st = spacetime
    try:
        an = analyse(st, curvature)
    except DerivationError as exc:
        return {"template_tex": "sections/analysis.tex.j2", "template_md": "sections/analysis.md.j2",
                "failed": exc.message, "matter": None, "conditions": [], "structure": None, "notes": []}
    global _DISPLAY
    _DISPLAY = curvature
    try:
        return _section(st, an, printer)
    finally:
        _DISPLAY = None


def _section(st, an, p) -> dict | None:
    s: dict = {"template_tex": "sections/analysis.tex.j2", "template_md": "sections/analysis.md.j2",
               "failed": "", "notes": list(an.notes)}
    vacuum = an.hawking_ellis_type == "vacuum"
    s["vacuum"] = vacuum
    matter = None
    if _wanted(st, "matter") and not vacuum and an.energy_density is not None:
        matter = {
            "frame_kind": an.frame_kind or "",
            "frame_text": {"static": "static observers", "zamo": "locally non-rotating (ZAMO) observers",
                           "eulerian": "Eulerian observers (normal to t = const)",
                           "tetrad": "the tetrad given in the file"}.get(an.frame_kind or "", ""),
            "type": an.hawking_ellis_type,
            "density": _math(p, r"\rho", an.energy_density),
            "pressures": [_math(p, f"p_{{({i})}}", x) for i, x in enumerate(an.pressures, start=1)],
            "coupling_tex": p.tex(st.conventions.coupling),
        }
    s["matter"] = matter
    conds = []
    if _wanted(st, "energy_conditions") and not vacuum:
        for name in CONDITIONS:
            v = an.energy_conditions.get(name)
            if v is None:
                continue
            labels = _labels(name, bool(an.pressures), st.dimension - 1)
            if len(labels) != len(v.inequalities):
                labels = [f"E_{{{k}}}" for k in range(1, len(v.inequalities) + 1)]
            witness = [f"{p.tex(k)} = {float(val):.6g}" for k, val in v.witness.items()] if v.witness else []
            conds.append({
                "name": name, "title": _CONDITION_TITLE[name], "status": v.status,
                "status_text": _STATUS_TEXT[v.status].format(n=v.samples),
                "inequalities": [_math(p, lab, x) for lab, x in zip(labels, v.inequalities)],
                "witness": witness, "region": v.region or "",
                "failing_tex": labels[v.failing] if v.failing is not None else "",
            })
    s["conditions"] = conds
    struct = None
    if _wanted(st, "structure"):
        r_tex = p.tex(an.radial) if an.radial is not None else ""
        forms = an.surface_gravity_forms if len(an.surface_gravity_forms) == len(an.horizons) else (None,) * len(an.horizons)
        horizons = []
        for k, (r, kap, tk, form) in enumerate(zip(an.horizons, an.surface_gravities, an.hawking_temperatures, forms), 1):
            horizons.append({
                "radius": _math(p, f"{r_tex}_{{({k})}}", r),
                "kappa": _math(p, rf"\kappa_{{({k})}}", kap) if kap is not None else None,
                "kappa_form": _math(p, rf"\kappa_{{({k})}}", form) if form is not None else None,
                "temperature": _math(p, rf"T_{{({k})}}", tk) if tk is not None else None,
            })
        struct = {
            "radial_tex": r_tex,
            "horizon_function": _math(p, "H", an.horizon_function) if an.horizon_function is not None else None,
            "horizons": horizons,
            "horizons_numeric": [f"{x:.6g}" for x in an.horizons_numeric] if not an.horizons else [],
            "parameter_point": [f"{p.tex(k)} = {float(v):.6g}" for k, v in an.parameter_point.items()],
            "naked": _math(p, p.tex(an.naked_condition.lhs), an.naked_condition.rhs) if an.naked_condition is not None else None,
            "ergosurfaces": [_math(p, r_tex, x) for x in an.ergosurfaces],
            "curvature_singularities": [_singularity(p, x) for x in an.curvature_singularities],
            "parameter_degeneracies": [_singularity(p, x) for x in an.parameter_degeneracies],
            "coordinate_singularities": [_singularity(p, x) for x in an.coordinate_singularities],
            "curvature_limits": [{"where": k, "eq": _math(p, "K", v)} for k, v in an.curvature_limits.items()],
            "ctc": [{"coordinate": k, "text": v} for k, v in an.ctc_regions.items()],
            "null_directions": [_math(p, rf"\left(\mathrm{{d}}{r_tex}/\mathrm{{d}}{p.tex(st.coordinates[_time_index(st)].symbol)}\right)_{{{s_}}}", x)
                                for s_, x in zip("+-", an.null_directions)] if an.null_directions else [],
            "cone_tilt": an.cone_tilt or "",
            "clock_rate": _math(p, r"\mathrm{d}\tau/\mathrm{d}t", an.clock_rate) if an.clock_rate is not None else None,
            "static_region": an.static_region or "",
            "omega2": _math(p, r"\Omega^{2}", an.orbit_angular_velocity) if an.orbit_angular_velocity is not None else None,
            "orbit_rate": _math(p, r"\mathrm{d}\tau/\mathrm{d}t", an.orbit_clock_rate) if an.orbit_clock_rate is not None else None,
            "photon_sphere": _math(p, r_tex, an.photon_sphere) if an.photon_sphere is not None else None,
            "isco": _math(p, r_tex, an.isco) if an.isco is not None else None,
            "isco_numeric": isinstance(an.isco, sp.Float),
        }
    if struct is not None and not any(v for k, v in struct.items()
                                      if k not in ("radial_tex", "isco_numeric", "parameter_point")):
        struct = None  # an empty list would be a LaTeX error
    s["structure"] = struct
    if not matter and not conds and not struct:
        return None
    return s


def _txt(x):
    if x is None:
        return None
    try:
        return expression_to_text(x)
    except ConfigError:
        return str(x)


def results(spacetime, curvature) -> dict:
    """JSON-ready results: ``matter``, ``energy_conditions`` and ``structure``."""
    try:
        an = analyse(spacetime, curvature)
    except DerivationError as exc:
        return {"analysis_error": exc.message}
    out: dict = {
        "matter": {
            "frame": an.frame_kind,
            "hawking_ellis_type": an.hawking_ellis_type,
            "energy_density": _txt(an.energy_density),
            "pressures": [_txt(x) for x in an.pressures],
            "stress_energy": {",".join((spacetime.coordinates[i].name, spacetime.coordinates[j].name)):
                              _txt(an.stress_energy[i, j])
                              for i in range(spacetime.dimension) for j in range(i, spacetime.dimension)
                              if an.stress_energy[i, j] != 0},
        },
        "energy_conditions": {
            name: {"status": v.status, "inequalities": [_txt(x) for x in v.inequalities],
                   "witness": _point_text(v.witness) if v.witness else None, "samples": v.samples,
                   "region": v.region}
            for name, v in an.energy_conditions.items()},
        "structure": {
            "radial": _txt(an.radial),
            "horizon_function": _txt(an.horizon_function),
            "horizons": [_txt(x) for x in an.horizons],
            "horizons_numeric": list(an.horizons_numeric),
            "naked_condition": _txt(an.naked_condition),
            "ergosurfaces": [_txt(x) for x in an.ergosurfaces],
            "curvature_singularities": [_txt(x) for x in an.curvature_singularities],
            "coordinate_singularities": [_txt(x) for x in an.coordinate_singularities],
            "parameter_degeneracies": [_txt(x) for x in an.parameter_degeneracies],
            "curvature_limits": {k: _txt(v) for k, v in an.curvature_limits.items()},
            "surface_gravities": [_txt(x) for x in an.surface_gravities],
            "surface_gravities_at_horizon_radius": [_txt(x) for x in an.surface_gravity_forms],
            "hawking_temperatures": [_txt(x) for x in an.hawking_temperatures],
            "closed_timelike_curves": dict(an.ctc_regions),
            "radial_null_directions": [_txt(x) for x in an.null_directions],
            "light_cones_tip_over": an.cone_tilt,
            "static_clock_rate": _txt(an.clock_rate),
            "static_region": an.static_region,
            "circular_orbit_omega_squared": _txt(an.orbit_angular_velocity),
            "circular_orbit_clock_rate": _txt(an.orbit_clock_rate),
            "photon_sphere": _txt(an.photon_sphere),
            "isco": _txt(an.isco),
            "notes": list(an.notes),
        },
    }
    return out
