"""Curvature engine against independent references: sympy.diffgeom, mpmath numerics, coordinate maps."""
from __future__ import annotations

import mpmath
import pytest
import sympy as sp
from sympy.diffgeom import (BaseScalarField, CoordSystem, Manifold, Patch, TensorProduct, metric_to_Christoffel_2nd,
                            metric_to_Riemann_components)

from texgen.engine import Curvature
from texgen.spec.model import spacetime_from_matrix

t, r, th, ph = sp.symbols("t r theta phi", real=True)
M, a, Q, ell = sp.symbols("M a Q ell", positive=True)
F, H, A = sp.Function("F"), sp.Function("H"), sp.Function("A")
s, c = sp.sin(th), sp.cos(th)


def diffgeom_reference(coords, g):
    """(Γ^i_jk, R^ρ_σμν) from sympy.diffgeom for the metric matrix g.

    sympy.diffgeom's metric_to_Christoffel_2nd(...)[i, j, k] is Γ^i_jk, and
    metric_to_Riemann_components(...)[ρ, σ, μ, ν] is ∂_μ Γ^ρ_νσ − ∂_ν Γ^ρ_μσ + Γ^ρ_μλ Γ^λ_νσ
    − Γ^ρ_νλ Γ^λ_μσ (its docstring): the index order and sign of texgen's R^a_bcd with
    a = ρ, b = σ, c = μ, d = ν.  Derivatives of free functions come back as
    ``Subs(Derivative(f(ξ), ξ), ξ, r)``; ``doit()`` turns them into ``Derivative(f(r), r)``.
    """
    n = len(coords)
    # the chart gets its own symbols: substituting texgen's into the metric must not reach
    # inside the coordinate fields (which carry their chart's symbols as arguments)
    chart = [sp.Dummy(str(x), real=True) for x in coords]
    patch = Patch("P", Manifold("N", n))
    system = CoordSystem("C", patch, chart)
    fields = system.coord_functions()
    forms = system.base_oneforms()
    to_fields = dict(zip(coords, fields))
    metric = sum(g[i, j].subs(to_fields, simultaneous=True) * TensorProduct(forms[i], forms[j])
                 for i in range(n) for j in range(n) if g[i, j] != 0)
    gam = metric_to_Christoffel_2nd(metric)
    riem = metric_to_Riemann_components(metric)

    def back(x):
        # results come in the chart's coordinate fields (also inside Subs points)
        def plain(e):
            return coords[e._index] if isinstance(e, BaseScalarField) else e

        derivs = {d: d.expr.subs(dict(zip(d.variables, [plain(p) for p in d.point])))
                  for d in x.atoms(sp.Subs)}
        x = x.xreplace(derivs)
        return x.xreplace({f: plain(f) for f in x.atoms(BaseScalarField)}).doit()

    return gam.applyfunc(back), riem.applyfunc(back)


REFERENCE_METRICS = {
    "static_free_functions": ((t, r, th, ph), sp.diag(-sp.exp(2 * F(r)), H(r), r**2, r**2 * s**2)),
    "rotating_btz": ((t, r, ph), sp.Matrix([[M - r**2 / ell**2, 0, -a / 2],
                                           [0, 1 / (-M + r**2 / ell**2 + a**2 / (4 * r**2)), 0],
                                           [-a / 2, 0, r**2]])),
    "flrw_flat_free_scale": ((t, r, th, ph), sp.diag(-1, A(t)**2, A(t)**2 * r**2, A(t)**2 * r**2 * s**2)),
}


@pytest.mark.parametrize("name", sorted(REFERENCE_METRICS))
def test_against_sympy_diffgeom(name):
    coords, g = REFERENCE_METRICS[name]
    n = len(coords)
    cv = Curvature(spacetime_from_matrix(coords, g))
    gam, riem = diffgeom_reference(coords, g)
    for i in range(n):
        for j in range(n):
            for k in range(n):
                assert cv.is_zero(cv.christoffel[i, j, k] - gam[i, j, k]), (i, j, k)
                for m in range(n):
                    assert cv.is_zero(cv.riemann[i, j, k, m] - riem[i, j, k, m]), (i, j, k, m)


def kerr_newman_metric():
    """The Kerr–Newman metric in Boyer–Lindquist form, as test_curvature builds it."""
    from test_curvature import kerr_newman

    return sp.Matrix(kerr_newman().metric)


def numeric_riemann(g, coords, point, values):
    """R^a_bcd at ``point`` from finite differences of g alone (mpmath, 40 digits).

    Γ^a_bc = ½ g^ad (∂_b g_dc + ∂_c g_db − ∂_d g_bc) with mpmath.diff for ∂g; ∂Γ by a
    fourth-order central difference; nothing from the engine is used.
    """
    n = len(coords)
    gf = sp.lambdify(coords, g.subs(values), "mpmath")

    seen: dict[tuple, mpmath.matrix] = {}

    def metric(x):
        # mpmath.diff asks for the same points for every component: evaluate each once
        key = tuple(x)
        if key not in seen:
            seen[key] = mpmath.matrix(gf(*x))
        return seen[key]

    def christoffel(x):
        gx = metric(x)
        gi = gx ** -1
        dg = []
        for cc in range(n):
            def comp(h, cc=cc):
                y = list(x)
                y[cc] += h
                return metric(y)
            dg.append([[mpmath.diff(lambda h, i=i, j=j, cc=cc: comp(h, cc)[i, j], 0) for j in range(n)]
                       for i in range(n)])
        return [[[sum(gi[aa, d] * (dg[b][d][cc] + dg[cc][d][b] - dg[d][b][cc]) for d in range(n)) / 2
                  for cc in range(n)] for b in range(n)] for aa in range(n)]

    h = mpmath.mpf("1e-6")
    gam0 = christoffel(point)
    dgam = []
    for e in range(n):
        shifted = {}
        for k in (-2, -1, 1, 2):
            y = list(point)
            y[e] += k * h
            shifted[k] = christoffel(y)
        dgam.append([[[(-shifted[2][i][j][m] + 8 * shifted[1][i][j][m] - 8 * shifted[-1][i][j][m]
                        + shifted[-2][i][j][m]) / (12 * h) for m in range(n)] for j in range(n)]
                     for i in range(n)])
    out = {}
    for i in range(n):
        for j in range(n):
            for k in range(n):
                for m in range(k + 1, n):
                    out[(i, j, k, m)] = (dgam[k][i][m][j] - dgam[m][i][k][j]
                                         + sum(gam0[i][k][e] * gam0[e][m][j] - gam0[i][m][e] * gam0[e][k][j]
                                               for e in range(n)))
    return out


def test_kerr_newman_riemann_against_finite_differences():
    g = kerr_newman_metric()
    coords = (t, r, th, ph)
    values = {M: sp.Rational(7, 10), a: sp.Rational(3, 10), Q: sp.Rational(2, 5)}
    point = [mpmath.mpf("0.3"), mpmath.mpf("2.7"), mpmath.mpf("1.1"), mpmath.mpf("0.4")]
    with mpmath.workdps(40):
        ref = numeric_riemann(g, coords, point, values)
    cv = Curvature(spacetime_from_matrix(coords, g, parameters=(M, a, Q)))
    at = dict(zip(coords, [sp.Float(str(x), 30) for x in point]))
    at.update(values)
    worst = max(abs(complex(sp.N(cv.riemann[key].subs(at), 30)) - complex(val)) for key, val in ref.items())
    biggest = max(abs(complex(val)) for val in ref.values())
    assert biggest > 0.01
    assert worst < 1e-12


def test_kerr_newman_kretschmann_numerically():
    # the recalled Henry (2000) formula against the engine's K at one point (40 digits)
    from test_curvature import KN_K
    cv = Curvature(spacetime_from_matrix((t, r, th, ph), kerr_newman_metric(), parameters=(M, a, Q)))
    at = {M: sp.Rational(7, 10), a: sp.Rational(3, 10), Q: sp.Rational(2, 5), r: sp.Rational(27, 10),
          th: sp.Rational(11, 10)}
    assert abs(sp.N((cv.kretschmann - KN_K).subs(at), 40)) < 1e-35


def test_schwarzschild_kretschmann_coordinate_invariance():
    # one spacetime in three charts; K = 48 M^2/r^6 in each after the coordinate map
    # (MTW 1973, Box 31.2 for Eddington-Finkelstein, exercise 31.7 for isotropic coordinates)
    v = sp.Symbol("v", real=True)
    rho = sp.Symbol("rho", positive=True)
    f = 1 - 2 * M / r
    schw = Curvature(spacetime_from_matrix((t, r, th, ph), sp.diag(-f, 1 / f, r**2, r**2 * s**2)))
    ef = sp.Matrix([[-f, 1, 0, 0], [1, 0, 0, 0], [0, 0, r**2, 0], [0, 0, 0, r**2 * s**2]])
    ingoing = Curvature(spacetime_from_matrix((v, r, th, ph), ef))
    psi = 1 + M / (2 * rho)
    iso = sp.diag(-((1 - M / (2 * rho)) / psi)**2, psi**4, psi**4 * rho**2, psi**4 * rho**2 * s**2)
    isotropic = Curvature(spacetime_from_matrix((t, rho, th, ph), iso))
    assert schw.kretschmann == 48 * M**2 / r**6
    assert ingoing.kretschmann == 48 * M**2 / r**6
    assert isotropic.is_zero(isotropic.kretschmann - (48 * M**2 / r**6).subs(r, rho * psi**2))
    assert ingoing.ricci == sp.zeros(4)
    assert isotropic.ricci == sp.zeros(4)
