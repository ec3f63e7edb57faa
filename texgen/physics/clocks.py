"""Clocks and circular orbits: static clock rates, circular-orbit frequencies, photon sphere, ISCO.

Static clocks tick at dτ/dt = √(−g_tt) in a stationary chart; for static
spherically symmetric metrics, circular equatorial orbits have Ω² = ∂_r(−g_tt)/∂_r g_φφ,
the photon sphere extremises −g_tt/g_φφ and the innermost stable orbit is the
extremum of the orbit's angular momentum.  :func:`clock_rate_difference` gives
the rate of one static clock against another with 50 digits.
"""
from __future__ import annotations

import mpmath
import sympy as sp
from mpmath.libmp import NoConvergence
from sympy.polys.polyerrors import BasePolynomialError

from ..engine import derive
from ..errors import DerivationError
from . import _tools as tools
from .chart import lower_bound, radial_coordinate, region_text, signs, time_index


def static_clocks(st, cv, radial, ppoint, horizons, hnum, ti, notes: list) -> tuple:
    """(clock rate, static region in words, Ω², orbit clock rate, photon sphere, ISCO)."""
    clock = None
    static_region = None
    omega2 = orbit_rate = photon = isco = None
    if ti is not None:
        gtt = cv.canonical(st.metric[ti, ti])
        sg = signs(st)[ti]
        c_sym = st.conventions.c
        # Static clocks need a stationary chart: no metric component may depend on t.
        t_sym = st.coordinate_symbols[ti]
        stationary = not any(t_sym in cv.canonical(x).free_symbols for x in st.metric)
        clock = sp.sqrt(cv.canonical(sg * gtt)) if stationary else None
        if clock is not None and c_sym is not None and c_sym in gtt.free_symbols:
            clock = clock / c_sym
        if clock is not None and radial is not None and (gtt.free_symbols & set(st.coordinate_symbols)) <= {radial}:
            iv = tools.negative_region(cv.canonical(sg * gtt), radial, ppoint | {radial: 1}, lower_bound(st, radial))
            bad = region_text(iv, radial, True) if iv is not None else None
            static_region = (None if iv is None else "everywhere in the declared range" if not bad
                             else f"static observers cannot exist for {bad}")
        omega2, orbit_rate, photon, isco = _orbits(st, cv, radial, ppoint, horizons, hnum)
        if isinstance(isco, sp.Float):
            notes.append("the innermost stable circular orbit has no usable closed form: its radius is given "
                         "numerically at " + ", ".join(f"{k} = {float(v):.6g}" for k, v in ppoint.items()))
    return clock, static_region, omega2, orbit_rate, photon, isco


def _orbits(st, cv, radial, ppoint, horizons, hnum):
    """Circular equatorial orbits, photon sphere and ISCO of static spherically symmetric metrics."""
    ti = time_index(st)
    names = [c.name for c in st.coordinates]
    if radial is None or ti is None or "theta" not in names or "phi" not in names:
        return None, None, None, None
    n = st.dimension
    g = st.metric
    if any(not cv.is_zero(g[i, j]) for i in range(n) for j in range(n) if i != j):
        return None, None, None, None
    th = st.coordinates[names.index("theta")].symbol
    ph = names.index("phi")
    sg = signs(st)
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
    lower = outer if outer is not None else lower_bound(st, radial)

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
    cv = curvature or derive(spacetime)
    st = spacetime
    ti = time_index(st)
    radial = radial_coordinate(st)
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
    rate = sp.sqrt(signs(st)[ti] * gtt)
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
