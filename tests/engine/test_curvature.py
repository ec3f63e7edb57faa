"""Curvature engine: published values, conventions, laziness, budgets and the API."""
from __future__ import annotations

import dataclasses

import pytest
import sympy as sp

from texgen.engine import QUANTITIES, Budget, Curvature
from texgen.engine import compute_all as derive
from texgen.errors import BudgetExceeded, DerivationError
from texgen.spec.model import Conventions, Definition, spacetime_from_matrix

t, r, th, ph = sp.symbols("t r theta phi", real=True)
M, a, Q, L, ell, rho = sp.symbols("M a Q Lambda ell rho", positive=True)
k = sp.Symbol("k", real=True)
s, c = sp.sin(th), sp.cos(th)
SPHERE = (r**2, r**2 * s**2)


def schwarzschild(conventions=None):
    f = 1 - 2 * M / r
    return spacetime_from_matrix((t, r, th, ph), sp.diag(-f, 1 / f, *SPHERE), parameters=(M,),
                                 conventions=conventions)


def reissner_nordstrom(sign=1):
    f = 1 - 2 * M / r + Q**2 / r**2
    conv = Conventions(signature="-+++" if sign > 0 else "+---")
    return spacetime_from_matrix((t, r, th, ph), sign * sp.diag(-f, 1 / f, *SPHERE),
                                 parameters=(M, Q), conventions=conv)


def kerr_newman(charge=Q):
    sig = r**2 + a**2 * c**2
    dlt = r**2 - 2 * M * r + a**2 + charge**2
    g = sp.zeros(4)
    g[0, 0] = -(dlt - a**2 * s**2) / sig
    g[0, 3] = g[3, 0] = -a * s**2 * (r**2 + a**2 - dlt) / sig
    g[1, 1] = sig / dlt
    g[2, 2] = sig
    g[3, 3] = ((r**2 + a**2)**2 - dlt * a**2 * s**2) * s**2 / sig
    params = (M, a, Q) if charge != 0 else (M, a)
    return spacetime_from_matrix((t, r, th, ph), g, parameters=params)


def de_sitter_static(sign=1):
    f = 1 - L * r**2 / 3
    conv = Conventions(signature="-+++" if sign > 0 else "+---")
    return spacetime_from_matrix((t, r, th, ph), sign * sp.diag(-f, 1 / f, *SPHERE), parameters=(L,),
                                 conventions=conv, cosmological_constant=L)


def flat(x):
    """Components of a matrix or array, in index order."""
    return list(x) if isinstance(x, sp.MatrixBase) else sp.flatten(x.tolist())


def same(cv, x, y):
    """Equality decided by the engine's canonical form."""
    return cv.is_zero(sp.sympify(x) - y)


# --- published invariants ------------------------------------------------------------------

def test_schwarzschild_kretschmann_and_ricci_flat():
    # K = 48 M^2 / r^6: Misner, Thorne & Wheeler 1973, Gravitation, Box 31.1 area;
    # C. Cherubini et al. 2002, Int. J. Mod. Phys. D 11, 827.
    cv = Curvature(schwarzschild())
    assert cv.kretschmann == 48 * M**2 / r**6
    assert cv.ricci == sp.zeros(4)
    assert cv.ricci_scalar == 0
    assert cv.weyl_squared == 48 * M**2 / r**6


def test_reissner_nordstrom_kretschmann():
    # K = (48 M^2 r^2 - 96 M Q^2 r + 56 Q^4) / r^8: Cherubini et al. 2002, Int. J. Mod. Phys. D 11,
    # 827; R. C. Henry 2000, ApJ 535, 350 (a = 0 limit of the Kerr-Newman value).
    cv = Curvature(reissner_nordstrom())
    assert same(cv, cv.kretschmann, (48 * M**2 * r**2 - 96 * M * Q**2 * r + 56 * Q**4) / r**8)
    assert cv.ricci_scalar == 0  # Maxwell stress-energy is trace-free (common practice)


KERR_K = 48 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6) \
    / (r**2 + a**2 * c**2)**6
# R. C. Henry 2000, ApJ 535, 350, "Kretschmann scalar for a Kerr-Newman black hole".  The formula
# was written from memory; it is cross-checked below by its Q = 0 (Kerr) and a = 0
# (Reissner-Nordstrom) limits and numerically in tests/engine/test_curvature_reference.py.
KN_K = 8 / (r**2 + a**2 * c**2)**6 * (
    6 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6)
    - 12 * M * Q**2 * r * (r**4 - 10 * a**2 * r**2 * c**2 + 5 * a**4 * c**4)
    + Q**4 * (7 * r**4 - 34 * a**2 * r**2 * c**2 + 7 * a**4 * c**4))


def test_kerr_newman_formula_limits():
    # the recalled Henry (2000) formula must reduce to Kerr at Q = 0 and to RN at a = 0
    assert sp.cancel(KN_K.subs(Q, 0) - KERR_K) == 0
    assert sp.cancel(KN_K.subs(a, 0) - (48 * M**2 * r**2 - 96 * M * Q**2 * r + 56 * Q**4) / r**8) == 0


def test_kerr_kretschmann_and_ricci_flat():
    cv = Curvature(kerr_newman(charge=0))
    assert same(cv, cv.kretschmann, KERR_K)
    assert cv.ricci == sp.zeros(4)
    assert cv.einstein == sp.zeros(4)


def test_kerr_newman_everything():
    cv = derive(kerr_newman())
    assert same(cv, cv.kretschmann, KN_K)
    assert cv.ricci_scalar == 0
    assert cv.invariant_identity == 0
    assert cv.bianchi == (0, 0, 0, 0)
    assert len(cv.geodesic_equations) == 4
    # the Weyl tensor of an electrovacuum: C^2 = K - 2 R_ab R^ab (n = 4, R = 0)
    assert same(cv, cv.weyl_squared, cv.kretschmann - 2 * cv.ricci_squared)


def test_flrw_ricci_scalar_and_conformal_flatness():
    # R = 6 (a a'' + a'^2 + k) / a^2 and C_abcd = 0: S. Carroll 2004, Spacetime and Geometry,
    # ch. 8 (Robertson-Walker curvature); also MTW 1973 Box 14.5.
    A = sp.Function("A")
    at = A(t)
    g = sp.diag(-1, at**2 / (1 - k * r**2), at**2 * r**2, at**2 * r**2 * s**2)
    cv = Curvature(spacetime_from_matrix((t, r, th, ph), g, parameters=(k,)))
    ad, add = sp.diff(at, t), sp.diff(at, t, 2)
    assert same(cv, cv.ricci_scalar, 6 * (at * add + ad**2 + k) / at**2)
    assert cv.weyl == sp.ImmutableDenseNDimArray([0] * 256, (4, 4, 4, 4))
    assert cv.weyl_squared == 0


def test_de_sitter_static():
    # R = 4 Lambda, K = 8 Lambda^2 / 3 for the maximally symmetric vacuum with R_abcd =
    # (Lambda/3)(g_ac g_bd - g_ad g_bc): Hawking & Ellis 1973, The Large Scale Structure of
    # Space-Time, section 5.2; K = 24 (Lambda/3)^2 is common practice.
    cv = Curvature(de_sitter_static())
    assert cv.ricci_scalar == 4 * L
    assert cv.kretschmann == sp.Rational(8, 3) * L**2
    assert cv.field_tensor == sp.zeros(4)
    assert cv.weyl_squared == 0


def maxwell_stress_energy(g, coords, sign=1):
    """T_ab = (sign/4pi)(F_ac F_b^c - 1/4 g_ab F^2) for A = -Q/r dt, built independently of the engine.

    sign = -1 in +--- (Landau & Lifshitz 1975, The Classical Theory of Fields, eq. 33.1), so
    that the covariant T_ab is the same physical tensor in both signatures.
    """
    n = 4
    A = [-Q / r, 0, 0, 0]
    F = sp.Matrix(n, n, lambda i, j: sp.diff(A[j], coords[i]) - sp.diff(A[i], coords[j]))
    gi = g.inv()
    Fup = gi * F * gi
    F2 = sum(F[i, j] * Fup[i, j] for i in range(n) for j in range(n))
    return sp.Matrix(n, n, lambda i, j: (sum(F[i, m] * F[j, l] * gi[m, l] for m in range(n)
                                              for l in range(n)) - g[i, j] * F2 / 4) * sign / (4 * sp.pi))


@pytest.mark.parametrize("sign", [1, -1])
def test_reissner_nordstrom_einstein_is_maxwell(sign):
    # G_ab = 8 pi T_ab with the Maxwell stress-energy (MTW 1973 eq. 22.17; Carroll 2004 ch. 6)
    st = reissner_nordstrom(sign)
    cv = Curvature(st)
    T = maxwell_stress_energy(st.metric, (t, r, th, ph), sign)
    diff = cv.field_tensor - 8 * sp.pi * T
    assert all(cv.is_zero(x) for x in diff)
    assert cv.field_tensor[0, 0] == (Q**2 * r**2 - 2 * M * Q**2 * r + Q**4) / r**6


# --- conventions ---------------------------------------------------------------------------

def test_default_conventions_text():
    cv = Curvature(schwarzschild())
    assert cv.conventions == {
        "signature": "-+++",
        "riemann": "R^a_{bcd} = ∂_c Γ^a_{db} − ∂_d Γ^a_{cb} + Γ^a_{ce}Γ^e_{db} − Γ^a_{de}Γ^e_{cb}",
        "ricci": "R_{bd} = R^a_{bad}",
        "field_equations": "G_{ab} + Λ g_{ab} = 8π T_{ab}",
        "units": "geometrized",
    }


def test_mostly_minus_and_riemann_sign_text():
    conv = Conventions(signature="+---", riemann_sign=-1, units="explicit",
                       G=sp.Symbol("G"), c=sp.Symbol("c"))
    cv = Curvature(schwarzschild(conv))
    assert cv.conventions["field_equations"] == "−G_{ab} − Λ g_{ab} = (8πG/c⁴) T_{ab}"
    assert cv.conventions["riemann"] == \
        "R^a_{bcd} = ∂_d Γ^a_{cb} − ∂_c Γ^a_{db} + Γ^a_{de}Γ^e_{cb} − Γ^a_{ce}Γ^e_{db}"
    assert cv.conventions["units"] == "explicit"


def test_de_sitter_mostly_minus():
    # the same physical de Sitter space with g -> -g: R flips (R = -4 Lambda) while the field
    # equations still read vacuum with Lambda > 0 (common practice: Landau-Lifshitz signs).
    cv = Curvature(de_sitter_static(-1))
    assert cv.ricci_scalar == -4 * L
    assert cv.field_tensor == sp.zeros(4)
    plus = Curvature(de_sitter_static(1))
    assert cv.christoffel == plus.christoffel
    assert cv.riemann == plus.riemann
    assert cv.ricci == plus.ricci


def test_field_tensor_same_in_both_signatures():
    plus, minus = Curvature(reissner_nordstrom(1)), Curvature(reissner_nordstrom(-1))
    assert plus.field_tensor == minus.field_tensor
    assert plus.einstein == minus.einstein


def test_riemann_sign_flips_riemann_not_physics():
    plus = Curvature(reissner_nordstrom(1))
    conv = Conventions(signature="-+++", riemann_sign=-1)
    minus = Curvature(dataclasses.replace(reissner_nordstrom(1), conventions=conv))
    for name in ("riemann", "riemann_down", "ricci", "weyl"):
        pairs = zip(flat(getattr(minus, name)), flat(getattr(plus, name)))
        assert all(minus.canonical(x) == minus.canonical(-y) for x, y in pairs), name
    assert minus.riemann[0, 1, 0, 1] != 0
    assert minus.kretschmann == plus.kretschmann
    assert minus.field_tensor == plus.field_tensor


# --- other dimensions and free functions ------------------------------------------------------

def test_two_sphere():
    # R = 2 / rho^2 for the round 2-sphere of radius rho (Carroll 2004, sec. 3.6)
    st = spacetime_from_matrix((th, ph), sp.diag(rho**2, rho**2 * s**2), parameters=(rho,),
                               conventions=Conventions(signature="++"))
    cv = Curvature(st)
    assert cv.ricci_scalar == 2 / rho**2
    assert cv.kretschmann == 4 / rho**4
    assert cv.einstein == sp.zeros(2)
    with pytest.raises(DerivationError, match="the Weyl tensor is defined for n >= 3"):
        cv.weyl


def test_btz():
    # BTZ: f = -M + r^2/ell^2 + J^2/(4 r^2), R = -6/ell^2 (Banados, Teitelboim & Zanelli 1992,
    # Phys. Rev. Lett. 69, 1849)
    J = sp.Symbol("J", positive=True)
    # ds^2 = -N^2 dt^2 + dr^2/N^2 + r^2 (dphi + N^phi dt)^2, N^2 = f, N^phi = -J/(2 r^2)
    f = -M + r**2 / ell**2 + J**2 / (4 * r**2)
    g = sp.Matrix([[M - r**2 / ell**2, 0, -J / 2], [0, 1 / f, 0], [-J / 2, 0, r**2]])
    cv = Curvature(spacetime_from_matrix((t, r, ph), g, parameters=(M, J, ell)))
    assert cv.ricci_scalar == -6 / ell**2
    assert cv.weyl == sp.ImmutableDenseNDimArray([0] * 81, (3, 3, 3, 3))
    assert cv.invariant_identity == 0
    assert cv.kretschmann == 12 / ell**4  # locally AdS_3: K = 2 n (n-1)/ell^4 (common practice)


def test_tangherlini_five_dimensions():
    # f = 1 - mu / r^2 is Ricci-flat in 5D (Tangherlini 1963, Nuovo Cimento 27, 636)
    mu = sp.Symbol("mu", positive=True)
    chi = sp.Symbol("chi", real=True)
    f = 1 - mu / r**2
    g = sp.diag(-f, 1 / f, r**2, r**2 * sp.sin(chi)**2, r**2 * sp.sin(chi)**2 * sp.sin(th)**2)
    cv = Curvature(spacetime_from_matrix((t, r, chi, th, ph), g, parameters=(mu,)))
    assert cv.ricci == sp.zeros(5)
    # common practice: K = (n-1)(n-2)^2(n-3) mu^2 / r^(2n-2); n = 4, mu = 2M gives 48 M^2/r^6
    assert cv.kretschmann == 72 * mu**2 / r**8
    assert cv.invariant_identity == 0


def test_morris_thorne_wormhole():
    # G^t_t = -b'/r^2, i.e. rho = b'/(8 pi r^2): Morris & Thorne 1988, Am. J. Phys. 56, 395, eq. (14a)
    Phi, b = sp.Function("Phi"), sp.Function("b")
    g = sp.diag(-sp.exp(2 * Phi(r)), 1 / (1 - b(r) / r), *SPHERE)
    cv = Curvature(spacetime_from_matrix((t, r, th, ph), g))
    assert cv.einstein_mixed[0, 0] == -sp.diff(b(r), r) / r**2
    assert cv.bianchi == (0, 0, 0, 0)


def test_painleve_gullstrand_square_roots():
    # Schwarzschild in Painleve-Gullstrand coordinates: same K = 48 M^2/r^6 (MTW 1973 ex. 31.4 area)
    rp = sp.Symbol("r", positive=True)  # sqrt(1/r) = 1/sqrt(r) needs r > 0
    g = sp.Matrix([[-(1 - 2 * M / rp), sp.sqrt(2 * M / rp), 0, 0],
                   [sp.sqrt(2 * M / rp), 1, 0, 0], [0, 0, rp**2, 0], [0, 0, 0, rp**2 * s**2]])
    cv = Curvature(spacetime_from_matrix((t, rp, th, ph), g, parameters=(M,)))
    assert cv.algebra.exact
    assert cv.kretschmann == 48 * M**2 / rp**6
    assert cv.ricci == sp.zeros(4)


def test_de_sitter_global_hyperbolic():
    # -dt^2 + ell^2 cosh^2(t/ell) dOmega_3^2 is de Sitter with Lambda = 3/ell^2 (Hawking & Ellis 1973 5.2)
    chi = sp.Symbol("chi", real=True)
    h = ell**2 * sp.cosh(t / ell)**2
    g = sp.diag(-1, h, h * sp.sin(chi)**2, h * sp.sin(chi)**2 * s**2)
    cv = Curvature(spacetime_from_matrix((t, chi, th, ph), g, parameters=(ell,),
                                         cosmological_constant=3 / ell**2))
    assert cv.algebra.exact
    assert cv.ricci_scalar == 12 / ell**2
    assert cv.field_tensor == sp.zeros(4)


# --- listings and forms -----------------------------------------------------------------

def test_nonzero_christoffel_schwarzschild():
    # the nine Schwarzschild Christoffel symbols: Carroll 2004, ch. 5 (recalled, not looked up;
    # the sympy.diffgeom comparison in test_curvature_reference.py checks the machinery)
    cv = Curvature(schwarzschild())
    assert cv.nonzero_christoffel() == [
        ((0, 0, 1), M / (r * (r - 2 * M))),
        ((1, 0, 0), (M * r - 2 * M**2) / r**3),
        ((1, 1, 1), -M / (r * (r - 2 * M))),
        ((1, 2, 2), 2 * M - r),
        ((1, 3, 3), 2 * M * s**2 - r * s**2),
        ((2, 1, 2), 1 / r),
        ((2, 3, 3), -s * c),
        ((3, 1, 3), 1 / r),
        ((3, 2, 3), c / s),
    ]


def test_independent_riemann_schwarzschild():
    # orthonormal-frame values R_trtr = -2M/r^3, R_tθtθ = M/r^3, R_θφθφ = 2M/r^3 (MTW 1973,
    # eq. 31.4, recalled) times the metric factors of each coordinate pair
    cv = Curvature(schwarzschild())
    assert cv.independent_riemann() == [
        ((0, 1, 0, 1), -2 * M / r**3),
        ((0, 2, 0, 2), (M * r - 2 * M**2) / r**2),
        ((0, 3, 0, 3), (M * r * s**2 - 2 * M**2 * s**2) / r**2),
        ((1, 2, 1, 2), -M / (r - 2 * M)),
        ((1, 3, 1, 3), -M * s**2 / (r - 2 * M)),
        ((2, 3, 2, 3), 2 * M * r * s**2),
    ]


def test_riemann_array_symmetries():
    # pair antisymmetry and pair exchange (common practice); R^t_rtr = g^tt R_trtr
    cv = Curvature(schwarzschild())
    R = cv.riemann_down
    assert R[1, 0, 0, 1] == 2 * M / r**3
    assert R[0, 1, 1, 0] == 2 * M / r**3
    assert cv.riemann[0, 1, 0, 1] == 2 * M / (r**2 * (r - 2 * M))


def test_geodesic_equations_form():
    cv = Curvature(schwarzschild())
    tau = cv.affine_parameter
    T, R_ = sp.Function("t")(tau), sp.Function("r")(tau)
    eq = cv.geodesic_equations[0]
    assert isinstance(eq, sp.Equality)
    assert eq.rhs == 0
    assert sp.cancel(eq.lhs - (sp.Derivative(T, (tau, 2))
                               + 2 * M / (R_ * (R_ - 2 * M)) * sp.Derivative(T, tau) * sp.Derivative(R_, tau))) == 0


def test_canonical_and_is_zero():
    cv = Curvature(kerr_newman())
    assert cv.canonical(s**2 + c**2) == 1
    assert cv.canonical(1 / (1 - c**2)) == 1 / s**2
    assert cv.canonical((r**2 - 4 * M**2) / (r - 2 * M)) == r + 2 * M
    assert cv.is_zero(sp.sin(2 * th) - 2 * s * c)
    assert not cv.is_zero(s - c)


def test_display_uses_definitions():
    sig_s, dlt_s = sp.symbols("Sigma Delta", positive=True)
    sig = r**2 + a**2 * c**2
    dlt = r**2 - 2 * M * r + a**2 + Q**2
    st = dataclasses.replace(kerr_newman(), definitions=(
        Definition("Sigma", sig_s, r"\Sigma", sig, sig),
        Definition("Delta", dlt_s, r"\Delta", dlt, dlt)))
    cv = Curvature(st)
    assert cv.display(cv.inverse[1, 1]) == dlt_s / sig_s
    assert cv.display(cv.metric[2, 2]) == sig_s
    assert cv.display(sig_s**2 / dlt_s) == sig_s**2 / dlt_s
    assert cv.display(cv.determinant) == -sig_s**2 * s**2
    assert cv.display(cv.christoffel[1, 2, 2]) == -dlt_s * r / sig_s
    assert cv.canonical(sig_s) == r**2 + a**2 * c**2


# --- laziness, budget, progress, errors ----------------------------------------------------

def test_lazy_ricci_scalar_does_not_build_weyl():
    cv = Curvature(kerr_newman())
    assert cv.timings == {}
    cv.ricci_scalar
    assert "ricci_scalar" in cv.timings
    assert "weyl" not in cv.timings
    assert "riemann" not in cv.timings  # R^a_bcd (raised) is not needed for R
    assert "kretschmann" not in cv.timings


def test_budget_time_names_stage():
    cv = Curvature(kerr_newman(), budget=Budget(seconds=1e-9))
    with pytest.raises(BudgetExceeded) as info:
        cv.kretschmann
    assert info.value.stage == "christoffel_first"
    assert info.value.component == "Gamma_000"
    assert str(info.value) == ("stage 'christoffel_first' went over its budget of 1e-09 s "
                               "at component Gamma_000")


def test_budget_size_keeps_finished_results():
    # Kerr-Newman: Γ_abc numerators have at most 15 terms, some Γ^a_bc have 45
    cv = Curvature(kerr_newman(), budget=Budget(max_terms=20))
    with pytest.raises(BudgetExceeded) as info:
        cv.kretschmann
    assert info.value.stage == "christoffel"
    assert info.value.component.startswith("Gamma^")
    assert "christoffel_first" in cv.timings
    assert cv.christoffel_first[2, 1, 2] == r


def test_budget_number_and_bad_budget():
    assert Curvature(schwarzschild(), budget=5).budget == Budget(seconds=5.0)
    with pytest.raises(DerivationError, match="Expected a positive number of seconds or a Budget"):
        Curvature(schwarzschild(), budget="soon")


def test_progress_called_per_component():
    calls = []
    cv = Curvature(schwarzschild(), progress=lambda *args: calls.append(args))
    cv.christoffel
    assert ("christoffel_first", 1, 40) in calls
    assert ("christoffel", 40, 40) in calls
    assert [d for st, d, _ in calls if st == "christoffel"] == list(range(1, 41))


def test_derive_eager_and_unknown_quantity():
    cv = derive(schwarzschild(), ["kretschmann"])
    assert "kretschmann" in cv.timings and "weyl" not in cv.timings
    full = derive(schwarzschild())
    assert set(QUANTITIES) <= set(full.timings)
    with pytest.raises(DerivationError, match="but received: 'ricci_tensor'"):
        derive(schwarzschild(), ["ricci_tensor"])


@pytest.mark.parametrize("matrix, message", [
    (sp.Matrix([[-1, r], [0, 1]]), "the metric is not symmetric: g[0,1] differs from g[1,0]"),
    (sp.Matrix([[1, 1], [1, 1]]), "the metric is degenerate: its determinant is 0"),
])
def test_bad_metrics(matrix, message):
    cv = Curvature(spacetime_from_matrix((t, r), matrix))
    with pytest.raises(DerivationError) as info:
        cv.inverse
    assert info.value.message == message


def test_bad_backend():
    with pytest.raises(DerivationError, match="Expected one of: 'auto', 'flint', 'polys', 'expr'"):
        Curvature(schwarzschild(), backend="fast")


def test_results_are_immutable_and_hashable():
    cv = Curvature(schwarzschild())
    for value in (cv.metric, cv.inverse, cv.christoffel, cv.riemann, cv.ricci, cv.weyl, cv.kretschmann):
        hash(value)
    assert isinstance(cv.christoffel, sp.ImmutableDenseNDimArray)
    assert isinstance(cv.einstein, sp.ImmutableMatrix)


def test_progress_counts_reach_their_totals():
    calls = []
    cv = Curvature(schwarzschild(), progress=lambda *args: calls.append(args))
    cv.field_tensor
    last = {}
    for stage, done, total in calls:
        last[stage] = (done, total)
    assert last["einstein"] == (10, 10)
    assert last["field_tensor"] == (10, 10)
    assert last["riemann_down"] == (21, 21)
    assert last["ricci"] == (10, 10)
