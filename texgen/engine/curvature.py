"""The curvature engine: exact tensors and invariants of one spacetime.

Pure computation: :class:`Curvature` takes a :class:`texgen.spec.model.Spacetime` and
returns frozen sympy objects; it prints nothing and touches no files.  Every
quantity is computed on first use and memoised, so asking for the Ricci scalar
never builds the Weyl tensor.  The arithmetic runs in an exact field of rational
functions (:mod:`texgen.engine.field`), where the normal form is canonical, instead of
calling ``simplify`` per component.

Conventions (recorded in :attr:`Curvature.conventions`):

* ``Γ_abc = ½(∂_c g_ab + ∂_b g_ac − ∂_a g_bc)``, ``Γ^a_bc = g^ad Γ_dbc``;
* ``R^a_bcd = s (∂_c Γ^a_db − ∂_d Γ^a_cb + Γ^a_ce Γ^e_db − Γ^a_de Γ^e_cb)`` with
  ``s = conventions.riemann_sign`` (+1: Misner–Thorne–Wheeler, Wald, Carroll);
* ``R_bd = R^a_bad``, ``R = g^bd R_bd``, ``G_ab = R_ab − ½ R g_ab`` (all from that Riemann);
* field equations ``s G_ab + σ Λ g_ab = κ T_ab`` with ``σ = conventions.metric_sign``
  (+1 for −+++ and Riemannian, −1 for +−−−) and ``κ = conventions.coupling``.
  The factor ``s`` undoes the chosen Riemann sign, and ``σ`` the sign that g_ab (but
  not G_ab) takes under g → −g; so for one physical spacetime the left side, hence
  the covariant ``T_ab``, is the same in every convention, and Λ > 0 is de Sitter.
"""
from __future__ import annotations

import time
from typing import Any, Callable, Iterable

import sympy as sp

from ..errors import BudgetExceeded, DerivationError
from ..spec.model import Spacetime
from . import algebra as alg
from .budget import Budget, _budget
from .components import ComponentStages, _antisym

__all__ = ["Budget", "Curvature", "QUANTITIES", "compute_all"]

#: Quantities :func:`compute_all` can compute eagerly, in dependency order.
QUANTITIES = (
    "metric", "determinant", "inverse", "christoffel_first", "christoffel",
    "riemann_down", "riemann", "ricci", "ricci_scalar", "einstein", "einstein_mixed",
    "field_tensor", "weyl", "kretschmann", "ricci_squared", "weyl_squared",
    "invariant_identity", "bianchi", "geodesic_equations",
)
_NEEDS_THREE = ("weyl", "weyl_squared", "invariant_identity")

_RIEMANN_PLUS = "R^a_{bcd} = ∂_c Γ^a_{db} − ∂_d Γ^a_{cb} + Γ^a_{ce}Γ^e_{db} − Γ^a_{de}Γ^e_{cb}"
_RIEMANN_MINUS = "R^a_{bcd} = ∂_d Γ^a_{cb} − ∂_c Γ^a_{db} + Γ^a_{de}Γ^e_{cb} − Γ^a_{ce}Γ^e_{db}"



class Curvature(ComponentStages):
    """Lazy, memoised curvature of one spacetime.

    Parameters
    ----------
    spacetime:
        The frozen model; its ``metric`` (definitions expanded) is what is used.
    budget:
        ``None``, seconds per stage, or a :class:`Budget`; exceeding it raises
        :class:`~texgen.errors.BudgetExceeded` naming the stage and component.
    progress:
        Optional ``progress(stage, done, total)`` called as components finish.
    backend:
        ``"auto"`` (default), ``"flint"``, ``"polys"`` or ``"expr"``: the arithmetic
        used (see :func:`texgen.alg.make_algebra`; ``flint`` means ``polys`` when
        python-flint is not installed).  The values do not depend on it; the printed
        form does for ``expr`` (sympy's ``cancel`` form).  ``auto`` falls back to
        ``expr`` when the field cannot represent the input, also midway.
    """

    def __init__(self, spacetime: Spacetime, *, budget: Any = None,
                 progress: Callable[[str, int, int], Any] | None = None, backend: str = "auto"):
        if backend not in ("auto", "flint", "polys", "expr"):
            raise DerivationError(
                f"Expected one of: 'auto', 'flint', 'polys', 'expr' but received: {backend!r}")
        self.spacetime = spacetime
        self.dimension = spacetime.dimension
        self.coordinates = tuple(spacetime.coordinate_symbols)
        self.budget = _budget(budget)
        self.progress = progress
        self.backend = backend
        self.timings: dict[str, float] = {}
        """Wall seconds per stage, each stage's own work (inputs are timed separately)."""
        self.cpu_timings: dict[str, float] = {}
        """Process CPU seconds per stage, like :attr:`timings`."""
        self._cache: dict[str, Any] = {}
        self._stack: list[list] = []
        self._alg = None
        self._sign_r = int(spacetime.conventions.riemann_sign)
        self._sign_g = int(spacetime.conventions.metric_sign)
        if self._sign_r not in (1, -1):
            raise DerivationError(f"Expected riemann_sign 1 or -1 but received: {self._sign_r!r}")
        self.affine_parameter = sp.Symbol("tau", real=True)
        """The parameter τ of :attr:`geodesic_equations`."""

    # ------------------------------------------------------------------ plumbing
    def _stage(self, name: str, compute: Callable[[], Any]) -> Any:
        if name in self._cache:
            return self._cache[name]
        outer = not self._stack
        retry = False
        frame = [name.lstrip("_"), time.perf_counter(), time.process_time(), 0.0, 0.0]
        self._stack.append(frame)
        try:
            value = compute()
        except alg.Unmappable as exc:
            if not outer:
                raise  # the outermost stage decides
            if self.backend != "auto" or not isinstance(self._alg, alg.FieldAlgebra):
                raise DerivationError(f"{frame[0]}: {exc}") from None
            retry = True
        except ZeroDivisionError:
            raise DerivationError(f"{frame[0]}: division by zero (is the metric degenerate?)") from None
        except (TypeError, ValueError, AttributeError, NotImplementedError, sp.PolynomialError) as exc:
            # sympy's own complaints about exotic input: report them as texgen errors
            raise DerivationError(f"{frame[0]}: cannot compute: {exc}") from exc
        finally:
            self._stack.pop()
            wall = time.perf_counter() - frame[1]
            cpu = time.process_time() - frame[2]
            key = frame[0]
            self.timings[key] = self.timings.get(key, 0.0) + wall - frame[3]
            self.cpu_timings[key] = self.cpu_timings.get(key, 0.0) + cpu - frame[4]
            if self._stack:
                self._stack[-1][3] += wall
                self._stack[-1][4] += cpu
        if retry:
            # the field met something it cannot represent midway (a relation with zero
            # divisors): start again with plain expressions, which always work
            self._alg = alg.ExprAlgebra(self.coordinates)
            self._cache.clear()
            return self._stage(name, compute)
        self._cache[name] = value
        return value

    def _tick(self, component: str, elem: Any, done: int, total: int) -> None:
        frame = self._stack[-1]
        b = self.budget
        if b is not None:
            if b.max_terms is not None and elem is not None and self._alg.size(elem) > b.max_terms:
                raise BudgetExceeded(
                    f"stage '{frame[0]}': component {component} has more than {b.max_terms} terms",
                    stage=frame[0], component=component)
            if b.seconds is not None:
                own = time.perf_counter() - frame[1] - frame[3]
                if own > b.seconds:
                    raise BudgetExceeded(
                        f"stage '{frame[0]}' went over its budget of {b.seconds:g} s at component {component}",
                        stage=frame[0], component=component)
        if self.progress is not None:
            self.progress(frame[0], done, total)

    @property
    def algebra(self):
        """The arithmetic in use (built on first use)."""
        if self._alg is None:
            self._stage("_setup", self._setup)
        return self._alg

    def _setup(self) -> None:
        g = self.spacetime.metric
        n = self.dimension
        if g.shape != (n, n):
            raise DerivationError(f"Expected a {n}x{n} metric but received shape {g.shape}")
        exprs = list(g) + [self.spacetime.cosmological_constant]
        try:
            self._alg = alg.make_algebra(self.coordinates, exprs, self.backend)
        except alg.Unmappable as exc:
            raise DerivationError(f"the {self.backend} arithmetic cannot represent the metric: {exc}") from None

    # ------------------------------------------------------------------ sympy results
    def _S(self, name: str, build: Callable[[], Any]):
        return self._stage(name, build)

    def _sym(self, x):
        return self.algebra.to_sympy(x)

    def _matrix(self, rows) -> sp.ImmutableMatrix:
        return sp.ImmutableMatrix([[self._sym(x) for x in row] for row in rows])

    def _array(self, nested, shape) -> sp.ImmutableDenseNDimArray:
        flat = []

        def walk(x):
            if isinstance(x, list):
                for y in x:
                    walk(y)
            else:
                flat.append(self._sym(x))

        walk(nested)
        return sp.ImmutableDenseNDimArray(flat, shape)

    def _full4(self, table: dict) -> sp.ImmutableDenseNDimArray:
        n = self.dimension
        sym = {k: self._sym(v) for k, v in table.items()}
        flat = []
        for a in range(n):
            for b in range(n):
                for c in range(n):
                    for d in range(n):
                        flat.append(_antisym(sym, None, a, b, c, d))
        return sp.ImmutableDenseNDimArray(flat, (n,) * 4)

    @property
    def conventions(self) -> dict[str, str]:
        """The conventions in force, as plain strings."""
        conv = self.spacetime.conventions
        kappa = "8π" if conv.units != "explicit" else "(8πG/c⁴)"
        lhs = ("G_{ab}" if self._sign_r > 0 else "−G_{ab}") + (" + " if self._sign_g > 0 else " − ")
        return {
            "signature": conv.signature,
            "riemann": _RIEMANN_PLUS if self._sign_r > 0 else _RIEMANN_MINUS,
            "ricci": "R_{bd} = R^a_{bad}",
            "field_equations": f"{lhs}Λ g_{{ab}} = {kappa} T_{{ab}}",
            "units": "explicit" if conv.units == "explicit" else "geometrized",
        }

    @property
    def metric(self) -> sp.ImmutableMatrix:
        """g_ab in canonical form."""
        return self._S("metric", lambda: self._matrix(self._E("g")))

    @property
    def determinant(self) -> sp.Expr:
        """det g_ab."""
        return self._S("determinant", lambda: self._sym(self._E("inverse")[1]))

    @property
    def inverse(self) -> sp.ImmutableMatrix:
        """g^ab."""
        return self._S("inverse", lambda: self._matrix(self._E("inverse")[0]))

    @property
    def christoffel_first(self) -> sp.ImmutableDenseNDimArray:
        """Γ_abc = ½(∂_c g_ab + ∂_b g_ac − ∂_a g_bc), symmetric in b, c."""
        n = self.dimension
        return self._S("christoffel_first", lambda: self._array(self._E("christoffel_first"), (n, n, n)))

    @property
    def christoffel(self) -> sp.ImmutableDenseNDimArray:
        """Γ^a_bc, indexed [a, b, c]."""
        n = self.dimension
        return self._S("christoffel", lambda: self._array(self._E("christoffel"), (n, n, n)))

    @property
    def riemann_down(self) -> sp.ImmutableDenseNDimArray:
        """R_abcd = g_ae R^e_bcd."""
        return self._S("riemann_down", lambda: self._full4(self._E("riemann_down")))

    @property
    def riemann(self) -> sp.ImmutableDenseNDimArray:
        """R^a_bcd, indexed [a, b, c, d]."""
        n = self.dimension
        return self._S("riemann", lambda: self._array(self._E("riemann"), (n,) * 4))

    @property
    def ricci(self) -> sp.ImmutableMatrix:
        """R_bd = R^a_bad."""
        return self._S("ricci", lambda: self._matrix(self._E("ricci")))

    @property
    def ricci_scalar(self) -> sp.Expr:
        """R = g^ab R_ab."""
        return self._S("ricci_scalar", lambda: self._sym(self._E("ricci_scalar")))

    @property
    def einstein(self) -> sp.ImmutableMatrix:
        """G_ab = R_ab − ½ R g_ab."""
        return self._S("einstein", lambda: self._matrix(self._E("einstein")))

    @property
    def einstein_mixed(self) -> sp.ImmutableMatrix:
        """G^a_b = g^ac G_cb, row a, column b."""
        return self._S("einstein_mixed", lambda: self._matrix(self._E("einstein_mixed")))

    @property
    def field_tensor(self) -> sp.ImmutableMatrix:
        """riemann_sign·G_ab + metric_sign·Λ g_ab: equal to coupling × the physical T_ab."""
        return self._S("field_tensor", lambda: self._matrix(self._E("field_tensor")))

    @property
    def weyl(self) -> sp.ImmutableDenseNDimArray:
        """C_abcd (all indices down); zero for n = 3."""
        return self._S("weyl", lambda: self._full4(self._E("weyl")))

    @property
    def kretschmann(self) -> sp.Expr:
        """K = R_abcd R^abcd."""
        return self._S("kretschmann", lambda: self._sym(self._E("kretschmann")))

    @property
    def ricci_squared(self) -> sp.Expr:
        """R_ab R^ab."""
        return self._S("ricci_squared", lambda: self._sym(self._E("ricci_squared")))

    @property
    def weyl_squared(self) -> sp.Expr:
        """C_abcd C^abcd."""
        return self._S("weyl_squared", lambda: self._sym(self._E("weyl_squared")))

    @property
    def invariant_identity(self) -> sp.Expr:
        """C² − (K − 4/(n−2) R_ab R^ab + 2/((n−1)(n−2)) R²): 0 when the invariants agree."""
        return self._S("invariant_identity", lambda: self._sym(self._E("invariant_identity")))

    @property
    def bianchi(self) -> tuple[sp.Expr, ...]:
        """(∇_a G^ab for b = 0..n−1): the contracted Bianchi identity, each 0."""
        return self._S("bianchi", lambda: tuple(self._sym(x) for x in self._E("bianchi")))

    @property
    def geodesic_equations(self) -> tuple[sp.Equality, ...]:
        """Equations ``d²x^a/dτ² + Γ^a_bc dx^b/dτ dx^c/dτ = 0``, one per coordinate.

        Each coordinate x^a becomes a function ``x^a(τ)`` of the affine parameter
        :attr:`affine_parameter` (a sympy ``Function`` named like the coordinate);
        the left sides are sympy ``Eq(lhs, 0)`` objects left unevaluated for printing.
        """
        def build():
            gam = self.christoffel
            tau = self.affine_parameter
            n = self.dimension
            xs = [sp.Function(str(x))(tau) for x in self.coordinates]
            sub = dict(zip(self.coordinates, xs))
            vel = [sp.Derivative(x, tau) for x in xs]
            out = []
            for a in range(n):
                terms = [sp.Derivative(xs[a], (tau, 2))]
                for b in range(n):
                    for c in range(b, n):
                        gm = gam[a, b, c]
                        if gm != 0:
                            k = 1 if b == c else 2
                            terms.append(k * gm.xreplace(sub) * vel[b] * vel[c])
                out.append(sp.Eq(sp.Add(*terms), 0, evaluate=False))
            return tuple(out)

        return self._S("geodesic_equations", build)

    # ------------------------------------------------------------------ listings and forms
    def nonzero_christoffel(self) -> list[tuple[tuple[int, int, int], sp.Expr]]:
        """Non-zero Γ^a_bc with b <= c, in index order."""
        gam = self.christoffel
        table = self._E("christoffel")
        n = self.dimension
        return [((a, b, c), gam[a, b, c]) for a in range(n) for b in range(n) for c in range(b, n)
                if not self._vanishes(table[a][b][c], gam[a, b, c])]

    def independent_riemann(self) -> list[tuple[tuple[int, int, int, int], sp.Expr]]:
        """Non-zero R_abcd with a<b, c<d, (a,b) <= (c,d), in index order."""
        self.riemann_down
        table = self._E("riemann_down")
        out = []
        for key in sorted(table):
            expr = self._sym(table[key])
            if not self._vanishes(table[key], expr):
                out.append((key, expr))
        return out

    def _vanishes(self, elem: Any, expr: sp.Expr) -> bool:
        """Zero test of a computed component (structural, numeric where not canonical)."""
        A = self.algebra
        if A.is_zero_fast(elem):
            return True
        if A.exact:
            return False
        return alg.numeric_zero(expr, self.coordinates + tuple(self.spacetime.parameter_symbols))

    def _prepare_user(self, expr: Any) -> sp.Expr:
        try:
            e = sp.sympify(expr)
        except (sp.SympifyError, TypeError) as exc:
            raise DerivationError(f"Expected a sympy expression but received: {expr!r}") from exc
        subs = self.spacetime.definition_substitutions()
        return e.xreplace(subs) if subs else e

    def _elem(self, expr: sp.Expr):
        """The expression in the engine's arithmetic, or None if it does not fit."""
        A = self.algebra
        try:
            return A.from_sympy(expr)
        except alg.Unmappable:
            return None

    def _user(self, expr: Any):
        """(arithmetic, element) for a user expression, or (None, normalised expression).

        Atoms the spacetime's field lacks (a new symbol, Abs, a root of a rational
        function) get a field of their own, built with the metric's atoms so that
        shared parts print alike; only what no field can hold goes to ``cancel``.
        """
        e = self._prepare_user(expr)
        A = self.algebra
        try:
            return A, A.from_sympy(e)
        except alg.Unmappable:
            pass
        if isinstance(A, alg.FieldAlgebra):
            exprs = [e, *self.spacetime.metric, self.spacetime.cosmological_constant]
            try:
                F = alg.FieldAlgebra(self.coordinates, exprs, backend=A.backend, depth=0)
                return F, F.from_sympy(e)
            except alg.Unmappable:
                pass
        return None, alg.ExprAlgebra(self.coordinates).normal(e)

    def canonical(self, expr: Any) -> sp.Expr:
        """The engine's normal form of ``expr`` (definitions expanded)."""
        F, x = self._user(expr)
        return x if F is None else F.to_sympy(x)

    def is_zero(self, expr: Any) -> bool:
        """Whether ``expr`` vanishes identically.

        Structural in the exact field; where the form is not canonical (opaque
        atoms, the expression fallback) a non-zero form is tested numerically at
        random points with 50 digits.
        """
        F, x = self._user(expr)
        if F is None:
            if x == 0:
                return True
            e = x
        else:
            if F.is_zero_fast(x):
                return True
            if F.exact:
                return False
            e = F.to_sympy(x)
        symbols = self.coordinates + tuple(self.spacetime.parameter_symbols)
        return alg.numeric_zero(e, symbols)

    def display(self, expr: Any) -> sp.Expr:
        """A short form for reports: definitions' symbols and factors where they shorten."""
        canon = self.canonical(expr)
        A = self.algebra
        if not isinstance(A, alg.FieldAlgebra):
            return canon
        x = self._elem(self._prepare_user(expr))
        if x is None or A.is_zero_fast(x):
            return canon
        names: dict[int, sp.Expr] = {}
        for d in self.spacetime.definitions:
            p = self._elem(d.expanded)
            if p is None or p.den or A.P.nterms(p.num) < 2:
                continue
            const, fs = A.P.factor(p.num)
            if len(fs) != 1 or fs[0][1] != 1:
                continue
            idx, unit = A._factor_id(fs[0][0])
            names.setdefault(idx, d.symbol / (const * unit))
        den, unit = A._den_to_sympy(x.den, names)
        num = A.poly_to_sympy(A._pretty(x.num) if A.square_of else x.num)
        candidates = [canon, num * unit / den]
        if A.P.nterms(x.num) <= 400:
            # factored numerator: the same printing as denominators (definitions, sin^2)
            const, fs = A.P.factor(x.num)
            exps: dict[int, int] = {}
            for f, e in fs:
                idx, u = A._factor_id(f)
                exps[idx] = exps.get(idx, 0) + e
                const *= u ** e
            num_f, unit_n = A._den_to_sympy(tuple(sorted(exps.items())), names)
            candidates.append(const / unit_n * unit * num_f / den)
        best = canon
        for c in candidates[1:]:
            if sp.count_ops(c) < sp.count_ops(best):
                best = c
        return best


def compute_all(spacetime: Spacetime, quantities: Iterable[str] | None = None, **kw: Any) -> Curvature:
    """A :class:`Curvature` with ``quantities`` (default: all that apply) computed now.

    Parameters
    ----------
    spacetime:
        The model to work on.
    quantities:
        Names from :data:`QUANTITIES`; ``None`` computes all of them (the Weyl
        quantities only for n >= 3).
    **kw:
        Passed to :class:`Curvature` (``budget``, ``progress``, ``backend``).
    """
    cv = Curvature(spacetime, **kw)
    if quantities is None:
        names = [q for q in QUANTITIES if cv.dimension >= 3 or q not in _NEEDS_THREE]
    else:
        names = list(quantities)
        for q in names:
            if q not in QUANTITIES:
                raise DerivationError(
                    "Expected one of: " + ", ".join(QUANTITIES) + f" but received: {q!r}")
    for q in names:
        getattr(cv, q)
    return cv
