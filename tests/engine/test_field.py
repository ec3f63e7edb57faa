"""The engine's exact arithmetic (texgen._fields): canonical forms, relations, backends, fallback."""
from __future__ import annotations

import pytest
import sympy as sp

from texgen.engine import algebra as _fields
from texgen.engine import Curvature
from texgen.errors import DerivationError
from texgen.spec.model import spacetime_from_matrix

t, r, th, ph = sp.symbols("t r theta phi", real=True)
M, a, Q = sp.symbols("M a Q", positive=True)
COORDS = (t, r, th, ph)


def canon(expr, *context):
    F = _fields.make_algebra(COORDS, [expr, *context])
    return F.to_sympy(F.from_sympy(expr))


@pytest.mark.parametrize("expr, expected", [
    (sp.sin(th)**2 + sp.cos(th)**2, 1),
    (sp.cosh(t)**2 - sp.sinh(t)**2, 1),
    (1 / (1 - sp.cos(th)**2), 1 / sp.sin(th)**2),
    (1 / (1 + sp.sin(th)), (1 - sp.sin(th)) / sp.cos(th)**2),
    (sp.sin(th)**3, sp.sin(th)**3),
    (sp.tan(th), sp.sin(th) / sp.cos(th)),
    (sp.sin(2 * th), 2 * sp.sin(th) * sp.cos(th)),
    (sp.exp(2 * r) * sp.exp(-r), sp.exp(r)),
    (sp.sqrt(r)**3 / r, sp.sqrt(r)),
    (1 / (sp.sqrt(r) + 1), (sp.sqrt(r) - 1) / (r - 1)),
    (sp.I**2 + 1, 0),
    (1 / (r + sp.I), (r - sp.I) / (r**2 + 1)),
    ((r**2 - 4 * M**2) / (r - 2 * M), r + 2 * M),
    ((M - r) / (r - M), -1),
])
def test_canonical_forms(expr, expected):
    assert canon(expr) == expected


def test_denominators_stay_factored():
    sig = r**2 + a**2 * sp.cos(th)**2
    dlt = r**2 - 2 * M * r + a**2
    assert canon(1 / (sig * dlt) + 1 / sig**2) == \
        (2 * r**2 - 2 * M * r + a**2 * sp.cos(th)**2 + a**2) / ((r**2 + a**2 * sp.cos(th)**2)**2
                                                                  * (r**2 - 2 * M * r + a**2))


def test_free_function_derivatives_are_generators():
    f = sp.Function("f")
    F = _fields.make_algebra(COORDS, [f(r) / r])
    x = F.from_sympy(f(r) / r)
    assert F.to_sympy(F.diff(F.diff(x, 1), 1)) == \
        (r**2 * sp.diff(f(r), r, 2) - 2 * r * sp.diff(f(r), r) + 2 * f(r)) / r**3
    assert F.is_zero_fast(F.diff(x, 0))


def test_exponential_and_trig_derivatives():
    F = _fields.make_algebra(COORDS, [sp.exp(2 * r) * sp.sin(th)])
    x = F.from_sympy(sp.exp(2 * r) * sp.sin(th))
    assert F.to_sympy(F.diff(x, 1)) == 2 * sp.exp(2 * r) * sp.sin(th)
    assert F.to_sympy(F.diff(x, 2)) == sp.exp(2 * r) * sp.cos(th)


@pytest.mark.parametrize("backend", _fields.available_backends())
def test_backends_agree_on_kerr_newman(backend):
    from test_curvature import KN_K, kerr_newman
    cv = Curvature(kerr_newman(), backend=backend)
    assert cv.algebra.backend == backend
    assert cv.is_zero(cv.kretschmann - KN_K)
    assert cv.ricci_scalar == 0


def test_expression_backend_agrees_on_reissner_nordstrom():
    from test_curvature import reissner_nordstrom
    exact = Curvature(reissner_nordstrom())
    slow = Curvature(reissner_nordstrom(), backend="expr")
    assert slow.algebra.name == "expr"
    assert exact.is_zero(slow.kretschmann - exact.kretschmann)
    assert slow.ricci_scalar == 0


def test_floats_fall_back_to_expressions():
    f = 1 - sp.Float("1.0") / r
    cv = Curvature(spacetime_from_matrix(COORDS, sp.diag(-f, 1 / f, r**2, r**2 * sp.sin(th)**2)))
    assert cv.algebra.name == "expr"
    assert cv.is_zero(cv.kretschmann - 12 / r**6)
    assert not cv.is_zero(cv.kretschmann - 13 / r**6)
    with pytest.raises(_fields.Unmappable, match="floating-point number -1.00000000000000"):
        _fields.make_algebra(COORDS, [f], backend=_fields.available_backends()[0])


def test_opaque_atoms_use_numeric_zero_test():
    # atan has no relation in the field: the form is not canonical, zero tests go numeric
    f = 1 + sp.atan(r) / r
    g = sp.diag(-f, 1 / f, r**2, r**2 * sp.sin(th)**2)
    cv = Curvature(spacetime_from_matrix(COORDS, g))
    assert cv.algebra.name == "field" and not cv.algebra.exact
    ref = Curvature(spacetime_from_matrix(COORDS, g), backend="expr")
    assert cv.is_zero(cv.ricci_scalar - ref.ricci_scalar)
    assert cv.bianchi == (0, 0, 0, 0)


def test_related_arguments_are_not_exact():
    # sin(theta/2) and sin(theta) are related, and no rewriting here removes that
    F = _fields.make_algebra(COORDS, [sp.sin(th / 2) * sp.sin(th)])
    assert not F.exact
    cv = Curvature(spacetime_from_matrix(COORDS, sp.diag(-1, 1, 1 + sp.sin(th / 2)**2, sp.sin(th)**2 + 2)))
    assert cv.is_zero(sp.sin(th) - 2 * sp.sin(th / 2) * sp.cos(th / 2))


def test_sums_in_arguments_are_expanded_when_related():
    # sinh(u + R), sinh(u - R), sinh(R) are related (Alcubierre's shape function): the
    # addition theorems turn them into functions of u and R alone, and the form is canonical
    R_, sg = sp.symbols("R sigma", positive=True)
    u = sg * sp.sqrt(r**2 + 1)
    e = sp.tanh(u + sg * R_) - sp.tanh(u - sg * R_) + sp.tanh(sg * R_)
    F = _fields.make_algebra(COORDS, [e])
    assert F.sums and F.exact
    assert {str(g.expr) for g in F.gens if g.kind == "sinh"} == {"sinh(R*sigma)", "sinh(sigma*sqrt(r**2 + 1))"}
    x = F.from_sympy(sp.sinh(u + sg * R_) - sp.sinh(u) * sp.cosh(sg * R_) - sp.cosh(u) * sp.sinh(sg * R_))
    assert F.is_zero_fast(x)


def test_independent_sums_are_left_alone():
    F = _fields.make_algebra(COORDS, [sp.sin(th + ph) * sp.sin(ph)])
    assert F.exact and not F.sums
    assert {str(g.expr) for g in F.gens if g.kind == "sin"} == {"sin(phi)", "sin(phi + theta)"}


@pytest.mark.parametrize("expr, zero", [
    (sp.sin(th)**2 + sp.cos(th)**2 - 1, True),
    (sp.atan(M) + sp.atan(1 / M) - sp.pi / 2, True),  # M > 0
    (sp.atan(r) + sp.atan(1 / r) - sp.pi / 2, False),  # r real: -pi for r < 0
    (sp.Abs(M) - M, True),
    (sp.Abs(r) - r, False),
    (sp.Derivative(sp.Function("f")(r), r) * r - sp.Derivative(r * sp.Function("f")(r), r)
     + sp.Function("f")(r), True),
    (sp.sin(th) - sp.cos(th), False),
    (r - 1, False),
])
def test_numeric_zero(expr, zero):
    assert _fields.numeric_zero(expr, COORDS) is zero


def test_generator_table_closes_under_derivatives():
    f = sp.Function("f")
    F = _fields.make_algebra(COORDS, [f(t, r)])
    names = {str(g.expr) for g in F.gens}
    assert "Derivative(f(t, r), (r, 3), t)" in names
    assert "Derivative(f(t, r), (r, 2), (t, 2))" in names


def test_correct_without_python_flint():
    # python-flint is optional: block its import (sympy then uses its pure-Python ground
    # types) and check that the engine still gives the published Kerr-Newman value
    import os
    import subprocess
    import sys
    code = (
        "import sys; sys.modules['flint'] = None; sys.path.insert(0, 'tests/engine')\n"
        "from test_curvature import KN_K, kerr_newman\n"
        "from texgen.engine import algebra as _fields\n"
        "from texgen.engine import Curvature\n"
        "assert _fields.available_backends() == ('polys',)\n"
        "cv = Curvature(kerr_newman())\n"
        "assert cv.algebra.backend == 'polys'\n"
        "assert cv.is_zero(cv.kretschmann - KN_K)\n"
        "assert cv.invariant_identity == 0 and cv.bianchi == (0, 0, 0, 0)\n"
        "print('ok')\n")
    env = dict(os.environ, SYMPY_GROUND_TYPES="python")
    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    out = subprocess.run([sys.executable, "-c", code], cwd=root, env=env, capture_output=True,
                         text=True, timeout=300)
    assert out.stderr == ""
    assert out.stdout == "ok\n"


def test_generator_depth_follows_the_shortest_chain():
    # f' is in the input itself, so f'''' is only three steps away and keeps its derivative
    f = sp.Function("f")
    F = _fields.make_algebra(COORDS, [f(r) + sp.diff(f(r), r)])
    depth = {str(g.expr): (g.depth, g.derivs is None) for g in F.gens}
    assert depth["Derivative(f(r), (r, 4))"] == (3, False)
    assert depth["Derivative(f(r), (r, 5))"] == (4, True)


def test_zero_divisor_midway_falls_back_to_expressions():
    # sqrt(r^2 + 2r + 1) is |r + 1|: S^2 = (r + 1)^2 has zero divisors, and inverting
    # S - r - 1 fails in the field; the engine starts again with plain expressions
    g = sp.diag(-1, sp.sqrt(r**2 + 2 * r + 1) - r - 1)
    cv = Curvature(spacetime_from_matrix((t, r), g))
    assert cv.algebra.name == "field" and not cv.algebra.exact
    assert cv.inverse[1, 1] == -1 / (r - sp.sqrt(r**2 + 2 * r + 1) + 1)
    assert cv.algebra.name == "expr"
    assert cv.ricci_scalar == 0


def test_fixed_backend_reports_what_it_cannot_do():
    g = sp.diag(-1, sp.sqrt(r**2 + 2 * r + 1) - r - 1)
    cv = Curvature(spacetime_from_matrix((t, r), g), backend=_fields.available_backends()[0])
    with pytest.raises(DerivationError, match="^inverse: a relation makes this denominator vanish$"):
        cv.inverse


def test_atoms_outside_the_metric_get_a_field_of_their_own():
    from test_curvature import kerr_newman
    cv = Curvature(kerr_newman())
    eps = sp.Symbol("epsilon", positive=True)
    assert cv.canonical(eps * (sp.sin(th)**2 + sp.cos(th)**2)) == eps
    assert cv.is_zero(eps * (sp.sin(th)**2 + sp.cos(th)**2 - 1))
    assert cv.canonical(sp.Abs(r) / (1 - 2 * M / r)) == r * sp.Abs(r) / (r - 2 * M)
    assert cv.is_zero(sp.Abs(r) * (sp.sin(th)**2 + sp.cos(th)**2 - 1))
    assert not cv.is_zero(sp.Abs(r) - r)


def test_square_roots_of_related_radicands():
    from test_curvature import reissner_nordstrom
    cv = Curvature(reissner_nordstrom())
    # sympy writes sqrt((M - Q)(M + Q)) as sqrt(M - Q) sqrt(M + Q) (M + Q > 0): three roots with
    # one relation, so the form is not canonical and the numeric test decides
    assert cv.is_zero(sp.sqrt((M - Q) * (M + Q)) - sp.sqrt(M**2 - Q**2))
    assert not cv.is_zero(sp.sqrt((M - Q) * (M + Q)) + sp.sqrt(M**2 - Q**2))
    F = _fields.make_algebra(COORDS, [sp.sqrt(M - Q) * sp.sqrt(M + Q), sp.sqrt(M**2 - Q**2)])
    assert not F.exact
    assert _fields.make_algebra(COORDS, [sp.sqrt(M - Q) * sp.sqrt(M + Q)]).exact
    assert canon(sp.sqrt(M**2 - Q**2)**3 + sp.sqrt((M - Q) * (M + Q) * (Q - M))**2) == \
        -Q**2 * sp.sqrt(M**2 - Q**2) + M**2 * sp.sqrt(M**2 - Q**2) - M**3 + M**2 * Q + M * Q**2 - Q**3


def test_square_factors_leave_the_root():
    # sqrt(1 - 2 M r^2/R^3) with R > 0 needs sqrt(R^3) = R sqrt(R): one generator sqrt(R)
    R_ = sp.Symbol("R", positive=True)
    F = _fields.make_algebra(COORDS, [sp.sqrt(1 - 2 * M * r**2 / R_**3), sp.sqrt(1 - 2 * M / R_)])
    assert F.exact
    assert sorted(str(g.expr) for g in F.gens if g.kind == "sqrt") == \
        ["sqrt(-2*M + R)", "sqrt(-2*M*r**2 + R**3)", "sqrt(R)"]
