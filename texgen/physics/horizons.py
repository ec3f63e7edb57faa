"""Horizons, ergosurfaces and surface gravity.

The horizon function is the file's ``structure.horizon_function`` or the numerator
of g^rr; its real roots inside the declared range are the horizons, ordered from
the outermost in (numerically at the sample parameters when they have no closed
form).  Surface gravity comes from the Killing vector ∂_t where there is no rotation
and from the zero-angular-momentum lapse otherwise.
"""
from __future__ import annotations

from typing import NamedTuple

import sympy as sp

from ..errors import ConfigError, Location
from ..spec.expressions import parse_expression
from ..spec.schema import namespace
from . import _tools as tools
from .chart import lower_bound, outer_first, signs, time_index, upper_bound


class Horizons(NamedTuple):
    """What :func:`find_horizons` found."""

    function: sp.Expr | None
    """The horizon function H (its zeros are the horizons)."""
    radii: list
    """Closed-form radii inside the declared range, outermost first."""
    numeric: list
    """The radii at the sample parameter values."""
    special: list
    """Radii where sampling looks closer: horizons, and throats where g_rr blows up without one."""


def find_horizons(st, cv, radial, ppoint, ti, notes: list) -> Horizons:
    """The horizons of ``st``; a horizon function without closed-form roots is noted in ``notes``."""
    special = []
    h = _horizon_function(st, cv, radial) if ti is not None else None
    horizons: list = []
    hnum: list = []
    if h is not None and radial is not None and radial in h.free_symbols:
        roots = tools.real_roots(h, radial)
        lower = lower_bound(st, radial)
        if roots is not None:
            keep = []
            upper = upper_bound(st, radial, ppoint)
            for r in roots:
                v = tools.value_at(r, ppoint)
                if v is not None and (lower is None or v > lower) and (upper is None or v < upper):
                    keep.append(r)
            horizons = outer_first(keep, ppoint)
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
    return Horizons(h, horizons, hnum, special)


def ergosurfaces(st, cv, radial, horizons, ppoint, ti) -> list:
    """Where g_tt = 0 away from the horizons, for stationary rotating metrics (outermost first)."""
    n = st.dimension
    ergos: list = []
    if ti is not None and radial is not None and any(not cv.is_zero(st.metric[ti, j]) for j in range(n) if j != ti):
        roots = tools.real_roots(cv.canonical(st.metric[ti, ti]), radial)
        if roots:
            ergos = [r for r in roots if not any(cv.is_zero(r - x) for x in horizons)]
            ergos = outer_first(ergos, ppoint | {c.symbol: sp.Rational(1, 3) for c in st.coordinates})
    return ergos


def naked_condition(h, radial):
    """The condition on the parameters under which a quadratic horizon function has no root, or None."""
    if h is None or radial is None or radial not in h.free_symbols:
        return None
    return _naked_condition(h, radial)


def surface_gravities(st, cv, radial, horizons, ppoint, h) -> tuple[tuple, tuple, tuple]:
    """(signed κ, κ as a function of the horizon radius, Hawking temperature) per horizon."""
    kforms = [_surface_gravity(st, cv, radial, r, ppoint, h) for r in horizons]
    kappas = tuple(None if k is None else k[0] for k in kforms)
    kappa_forms = tuple(None if k is None else k[1] for k in kforms)
    temps = tuple(None if k is None else (k if (tools.value_at(k, ppoint) or 0) >= 0 else -k) / (2 * sp.pi)
                  for k in kappas)
    return kappas, kappa_forms, temps


def _horizon_function(st, cv, radial):
    sec = st.section("structure")
    if sec is not None and isinstance(sec.data, dict) and "horizon_function" in sec.data:
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


def _surface_gravity(st, cv, radial, rh, point, h=None):
    """Signed κ = ½ ∂_r N² √(g^rr/N²) at the horizon ``rh`` (N² = −1/g^tt, the ZAMO lapse squared).

    κ² is a rational function; coordinates other than the radius must drop out on the
    horizon (checked at sample values), so they are set to a simple value before ``rh``
    is substituted. κ < 0 where N² decreases outwards (inner and cosmological horizons).
    """
    ti = time_index(st)
    if ti is None or radial is None:
        return None
    sg = signs(st)
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
