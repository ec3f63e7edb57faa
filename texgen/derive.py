"""The curvature engine: exact tensors and invariants of one spacetime.

Pure computation: :class:`Curvature` takes a :class:`texgen.model.Spacetime` and
returns frozen sympy objects; it prints nothing and touches no files.  Every
quantity is computed on first use and memoised, so asking for the Ricci scalar
never builds the Weyl tensor.  The arithmetic runs in an exact field of rational
functions (:mod:`texgen._fields`), where the normal form is canonical, instead of
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
from dataclasses import dataclass
from itertools import combinations
from typing import Any, Callable, Iterable

import sympy as sp

from . import _fields
from .errors import BudgetExceeded, DerivationError
from .model import Spacetime

__all__ = ["Budget", "Curvature", "QUANTITIES", "derive"]

#: Quantities :func:`derive` can compute eagerly, in dependency order.
QUANTITIES = (
    "metric", "determinant", "inverse", "christoffel_first", "christoffel",
    "riemann_down", "riemann", "ricci", "ricci_scalar", "einstein", "einstein_mixed",
    "field_tensor", "weyl", "kretschmann", "ricci_squared", "weyl_squared",
    "invariant_identity", "bianchi", "geodesic_equations",
)
_NEEDS_THREE = ("weyl", "weyl_squared", "invariant_identity")

_RIEMANN_PLUS = "R^a_{bcd} = ∂_c Γ^a_{db} − ∂_d Γ^a_{cb} + Γ^a_{ce}Γ^e_{db} − Γ^a_{de}Γ^e_{cb}"
_RIEMANN_MINUS = "R^a_{bcd} = ∂_d Γ^a_{cb} − ∂_c Γ^a_{db} + Γ^a_{de}Γ^e_{cb} − Γ^a_{ce}Γ^e_{db}"


@dataclass(frozen=True)
class Budget:
    """Limits for one derivation, checked after every component."""

    seconds: float | None = None
    """Wall-clock seconds allowed to each stage (its own work, not its inputs)."""
    max_terms: int | None = None
    """Largest number of terms allowed in one component's numerator."""


def _budget(value: Any) -> Budget | None:
    if value is None or isinstance(value, Budget):
        return value
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value > 0:
        return Budget(seconds=float(value))
    raise DerivationError(f"Expected a positive number of seconds or a Budget but received: {value!r}")


class Curvature:
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
        used (see :func:`texgen._fields.make_algebra`; ``flint`` means ``polys`` when
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
        except _fields.Unmappable as exc:
            if not outer:
                raise  # the outermost stage decides
            if self.backend != "auto" or not isinstance(self._alg, _fields.FieldAlgebra):
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
            self._alg = _fields.ExprAlgebra(self.coordinates)
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
            self._alg = _fields.make_algebra(self.coordinates, exprs, self.backend)
        except _fields.Unmappable as exc:
            raise DerivationError(f"the {self.backend} arithmetic cannot represent the metric: {exc}") from None

    # ------------------------------------------------------------------ elements
    def _E(self, name: str):
        return self._stage("_" + name, getattr(self, "_compute_" + name))

    def _compute_g(self):
        A = self.algebra
        n = self.dimension
        g = [[A.from_sympy(self.spacetime.metric[a, b]) for b in range(n)] for a in range(n)]
        for a in range(n):
            for b in range(a + 1, n):
                if not A.is_zero_fast(A.sum_products([(1, (g[a][b],)), (-1, (g[b][a],))])):
                    raise DerivationError(
                        f"the metric is not symmetric: g[{a},{b}] differs from g[{b},{a}]")
        return g

    def _compute_lam(self):
        return self.algebra.from_sympy(self.spacetime.cosmological_constant)

    def _compute_inverse(self):
        """(g^ab, det g), inverting each block of coupled coordinates separately."""
        A = self.algebra
        g = self._E("g")
        n = self.dimension
        parent = list(range(n))

        def find(i):
            while parent[i] != i:
                i = parent[i]
            return i

        for a in range(n):
            for b in range(a + 1, n):
                if not A.is_zero_fast(g[a][b]):
                    parent[find(b)] = find(a)
        blocks: dict[int, list[int]] = {}
        for a in range(n):
            blocks.setdefault(find(a), []).append(a)
        inv = [[A.zero] * n for _ in range(n)]
        det = A.one
        done = 0
        for idx in blocks.values():
            sub = [[g[a][b] for b in idx] for a in idx]
            binv, bdet = _invert(A, sub)
            if A.is_zero_fast(bdet):
                raise DerivationError("the metric is degenerate: its determinant is 0")
            det = A.mul(det, bdet)
            for i, a in enumerate(idx):
                for j, b in enumerate(idx):
                    inv[a][b] = binv[i][j]
            done += len(idx)
            self._tick(f"g^{idx}", None, done, n)
        return inv, det

    def _compute_dg(self):
        """dg[c][a][b] = ∂_c g_ab."""
        A = self.algebra
        g = self._E("g")
        n = self.dimension
        out = [[[A.zero] * n for _ in range(n)] for _ in range(n)]
        for c in range(n):
            for a in range(n):
                for b in range(a, n):
                    out[c][a][b] = out[c][b][a] = A.diff(g[a][b], c)
        return out

    def _ddg(self, c: int, d: int, a: int, b: int):
        """∂_c ∂_d g_ab, memoised with its symmetries."""
        key = (min(c, d), max(c, d), min(a, b), max(a, b))
        cache = self._cache.setdefault("_ddg_cache", {})
        got = cache.get(key)
        if got is None:
            dg = self._E("dg")
            got = self.algebra.diff(dg[key[1]][key[2]][key[3]], key[0])
            cache[key] = got
        return got

    def _compute_christoffel_first(self):
        A = self.algebra
        dg = self._E("dg")
        n = self.dimension
        out = [[[A.zero] * n for _ in range(n)] for _ in range(n)]
        total = n * n * (n + 1) // 2
        done = 0
        half = sp.Rational(1, 2)
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = A.sum_products([(half, (dg[c][a][b],)), (half, (dg[b][a][c],)),
                                        (-half, (dg[a][b][c],))])
                    out[a][b][c] = out[a][c][b] = v
                    done += 1
                    self._tick(f"Gamma_{a}{b}{c}", v, done, total)
        return out

    def _compute_christoffel(self):
        A = self.algebra
        G1 = self._E("christoffel_first")
        inv, _ = self._E("inverse")
        n = self.dimension
        out = [[[A.zero] * n for _ in range(n)] for _ in range(n)]
        total = n * n * (n + 1) // 2
        done = 0
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = A.sum_products([(1, (inv[a][d], G1[d][b][c])) for d in range(n)
                                        if not A.is_zero_fast(inv[a][d]) and not A.is_zero_fast(G1[d][b][c])])
                    out[a][b][c] = out[a][c][b] = v
                    done += 1
                    self._tick(f"Gamma^{a}_{b}{c}", v, done, total)
        return out

    def _pairs(self):
        return list(combinations(range(self.dimension), 2))

    def _compute_riemann_down(self):
        """Independent R_abcd (a<b, c<d, (a,b) <= (c,d)); the rest follow by symmetry.

        R_abcd = ½(g_ad,bc + g_bc,ad − g_ac,bd − g_bd,ac) + Γ_ead Γ^e_cb − Γ_eac Γ^e_db
        (the MTW form with only second derivatives of g), times riemann_sign.
        """
        A = self.algebra
        G1 = self._E("christoffel_first")
        G2 = self._E("christoffel")
        n = self.dimension
        pairs = self._pairs()
        out: dict[tuple[int, int, int, int], Any] = {}
        total = len(pairs) * (len(pairs) + 1) // 2
        done = 0
        half = sp.Rational(self._sign_r, 2)
        s = self._sign_r
        nz = A.is_zero_fast
        for i, (a, b) in enumerate(pairs):
            for (c, d) in pairs[i:]:
                terms = [(half, (self._ddg(b, c, a, d),)), (half, (self._ddg(a, d, b, c),)),
                         (-half, (self._ddg(b, d, a, c),)), (-half, (self._ddg(a, c, b, d),))]
                for e in range(n):
                    if not nz(G1[e][a][d]) and not nz(G2[e][c][b]):
                        terms.append((s, (G1[e][a][d], G2[e][c][b])))
                    if not nz(G1[e][a][c]) and not nz(G2[e][d][b]):
                        terms.append((-s, (G1[e][a][c], G2[e][d][b])))
                v = A.sum_products(terms)
                out[(a, b, c, d)] = v
                done += 1
                self._tick(f"R_{a}{b}{c}{d}", v, done, total)
        return out

    def _R(self, a: int, b: int, c: int, d: int):
        return _antisym(self._E("riemann_down"), self.algebra, a, b, c, d)

    def _compute_riemann(self):
        """R^a_bcd = g^ae R_ebcd, for all a, b and c < d."""
        A = self.algebra
        inv, _ = self._E("inverse")
        n = self.dimension
        out = [[[[A.zero] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        pairs = self._pairs()
        total = n * n * len(pairs)
        done = 0
        for a in range(n):
            for b in range(n):
                for (c, d) in pairs:
                    v = A.sum_products([(1, (inv[a][e], self._R(e, b, c, d))) for e in range(n)
                                        if not A.is_zero_fast(inv[a][e])])
                    out[a][b][c][d] = v
                    out[a][b][d][c] = -v if not A.is_zero_fast(v) else v
                    done += 1
                    self._tick(f"R^{a}_{b}{c}{d}", v, done, total)
        return out

    def _compute_ricci(self):
        """R_bd = R^a_bad = g^ac R_abcd."""
        A = self.algebra
        inv, _ = self._E("inverse")
        n = self.dimension
        out = [[A.zero] * n for _ in range(n)]
        total = n * (n + 1) // 2
        done = 0
        for b in range(n):
            for d in range(b, n):
                terms = []
                for a in range(n):
                    for c in range(n):
                        if A.is_zero_fast(inv[a][c]):
                            continue
                        r = self._R(a, b, c, d)
                        if not A.is_zero_fast(r):
                            terms.append((1, (inv[a][c], r)))
                v = A.sum_products(terms)
                out[b][d] = out[d][b] = v
                done += 1
                self._tick(f"R_{b}{d}", v, done, total)
        return out

    def _compute_ricci_scalar(self):
        A = self.algebra
        inv, _ = self._E("inverse")
        ric = self._E("ricci")
        n = self.dimension
        v = A.sum_products([(1, (inv[a][b], ric[a][b])) for a in range(n) for b in range(n)
                            if not A.is_zero_fast(inv[a][b])])
        self._tick("R", v, 1, 1)
        return v

    def _compute_ricci_mixed(self):
        A = self.algebra
        inv, _ = self._E("inverse")
        ric = self._E("ricci")
        return _raise_first(A, inv, ric, self.dimension)

    def _compute_einstein(self):
        A = self.algebra
        g = self._E("g")
        ric = self._E("ricci")
        R = self._E("ricci_scalar")
        n = self.dimension
        half = sp.Rational(-1, 2)
        out = [[A.zero] * n for _ in range(n)]
        for a in range(n):
            for b in range(a, n):
                v = A.sum_products([(1, (ric[a][b],)), (half, (R, g[a][b]))])
                out[a][b] = out[b][a] = v
                self._tick(f"G_{a}{b}", v, _upper_index(a, b, n), n * (n + 1) // 2)
        return out

    def _compute_einstein_mixed(self):
        A = self.algebra
        inv, _ = self._E("inverse")
        return _raise_first(A, inv, self._E("einstein"), self.dimension)

    def _compute_field_tensor(self):
        A = self.algebra
        g = self._E("g")
        G = self._E("einstein")
        lam = self._E("lam")
        n = self.dimension
        out = [[A.zero] * n for _ in range(n)]
        for a in range(n):
            for b in range(a, n):
                v = A.sum_products([(self._sign_r, (G[a][b],)), (self._sign_g, (lam, g[a][b]))])
                out[a][b] = out[b][a] = v
                self._tick(f"T_{a}{b}", v, _upper_index(a, b, n), n * (n + 1) // 2)
        return out

    def _compute_weyl(self):
        """Independent C_abcd, on the same index set as the Riemann tensor."""
        n = self.dimension
        if n < 3:
            raise DerivationError("the Weyl tensor is defined for n >= 3")
        A = self.algebra
        g = self._E("g")
        ric = self._E("ricci")
        R = self._E("ricci_scalar")
        rdown = self._E("riemann_down")
        k1 = sp.Rational(-1, n - 2)
        k2 = sp.Rational(1, (n - 1) * (n - 2))
        out = {}
        total = len(rdown)
        for done, (a, b, c, d) in enumerate(rdown, 1):
            terms = [(1, (rdown[(a, b, c, d)],)),
                     (k1, (g[a][c], ric[b][d])), (-k1, (g[a][d], ric[b][c])),
                     (-k1, (g[b][c], ric[a][d])), (k1, (g[b][d], ric[a][c])),
                     (k2, (R, g[a][c], g[b][d])), (-k2, (R, g[a][d], g[b][c]))]
            v = A.sum_products(terms)
            out[(a, b, c, d)] = v
            self._tick(f"C_{a}{b}{c}{d}", v, done, total)
        return out

    def _compute_pair_inverse(self):
        """g^{PS} = g^ac g^bd − g^ad g^bc on index pairs P = (a,b), S = (c,d)."""
        A = self.algebra
        inv, _ = self._E("inverse")
        pairs = self._pairs()
        return [[A.sum_products([(1, (inv[a][c], inv[b][d])), (-1, (inv[a][d], inv[b][c]))])
                 for (c, d) in pairs] for (a, b) in pairs]

    def _square(self, table: dict, name: str):
        """X_abcd X^abcd = 4 Σ_{P,Q} X^P_Q X^Q_P for a tensor with Riemann symmetries."""
        A = self.algebra
        gp = self._E("pair_inverse")
        pairs = self._pairs()
        m = len(pairs)

        def low(i, j):
            (a, b), (c, d) = pairs[i], pairs[j]
            return _antisym(table, A, a, b, c, d)

        mixed = [[A.sum_products([(1, (gp[i][k], low(k, j))) for k in range(m)
                                  if not A.is_zero_fast(gp[i][k]) and not A.is_zero_fast(low(k, j))])
                  for j in range(m)] for i in range(m)]
        v = A.sum_products([(4, (mixed[i][j], mixed[j][i])) for i in range(m) for j in range(m)
                            if not A.is_zero_fast(mixed[i][j]) and not A.is_zero_fast(mixed[j][i])])
        self._tick(name, v, 1, 1)
        return v

    def _compute_kretschmann(self):
        return self._square(self._E("riemann_down"), "K")

    def _compute_weyl_squared(self):
        return self._square(self._E("weyl"), "C2")

    def _compute_ricci_squared(self):
        A = self.algebra
        mix = self._E("ricci_mixed")
        n = self.dimension
        v = A.sum_products([(1, (mix[a][b], mix[b][a])) for a in range(n) for b in range(n)
                            if not A.is_zero_fast(mix[a][b]) and not A.is_zero_fast(mix[b][a])])
        self._tick("Ric2", v, 1, 1)
        return v

    def _compute_invariant_identity(self):
        n = self.dimension
        if n < 3:
            raise DerivationError("the Weyl tensor is defined for n >= 3")
        A = self.algebra
        C2 = self._E("weyl_squared")
        K = self._E("kretschmann")
        ric2 = self._E("ricci_squared")
        R = self._E("ricci_scalar")
        return A.sum_products([(1, (C2,)), (-1, (K,)), (sp.Rational(4, n - 2), (ric2,)),
                               (sp.Rational(-2, (n - 1) * (n - 2)), (R, R))])

    def _compute_bianchi(self):
        """∇_a G^ab = ∂_a G^ab + Γ^a_ae G^eb + Γ^b_ae G^ae."""
        A = self.algebra
        inv, _ = self._E("inverse")
        Gm = self._E("einstein_mixed")
        G2 = self._E("christoffel")
        n = self.dimension
        up = [[A.sum_products([(1, (Gm[a][d], inv[d][b])) for d in range(n)
                               if not A.is_zero_fast(inv[d][b])]) for b in range(n)] for a in range(n)]
        trace = [A.sum_products([(1, (G2[a][a][e],)) for a in range(n)]) for e in range(n)]
        out = []
        for b in range(n):
            terms = [(1, (A.diff(up[a][b], a),)) for a in range(n)]
            terms += [(1, (trace[e], up[e][b])) for e in range(n)]
            terms += [(1, (G2[b][a][e], up[a][e])) for a in range(n) for e in range(n)
                      if not A.is_zero_fast(G2[b][a][e])]
            v = A.sum_products(terms)
            out.append(v)
            self._tick(f"div G^{b}", v, b + 1, n)
        return out

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
        return _fields.numeric_zero(expr, self.coordinates + tuple(self.spacetime.parameter_symbols))

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
        except _fields.Unmappable:
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
        except _fields.Unmappable:
            pass
        if isinstance(A, _fields.FieldAlgebra):
            exprs = [e, *self.spacetime.metric, self.spacetime.cosmological_constant]
            try:
                F = _fields.FieldAlgebra(self.coordinates, exprs, backend=A.backend, depth=0)
                return F, F.from_sympy(e)
            except _fields.Unmappable:
                pass
        return None, _fields.ExprAlgebra(self.coordinates).normal(e)

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
        return _fields.numeric_zero(e, symbols)

    def display(self, expr: Any) -> sp.Expr:
        """A short form for reports: definitions' symbols and factors where they shorten."""
        canon = self.canonical(expr)
        A = self.algebra
        if not isinstance(A, _fields.FieldAlgebra):
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


def _invert(A, m):
    """(inverse, determinant) of a small matrix of field elements (Gauss–Jordan)."""
    k = len(m)
    if k == 1:
        if A.is_zero_fast(m[0][0]):
            return None, m[0][0]
        return [[A.inv(m[0][0])]], m[0][0]
    if k == 2:
        (a, b), (c, d) = m
        det = A.sum_products([(1, (a, d)), (-1, (b, c))])
        if A.is_zero_fast(det):
            return None, det
        idet = A.inv(det)
        return [[A.mul(d, idet), A.mul(-b, idet)], [A.mul(-c, idet), A.mul(a, idet)]], det
    rows = [list(r) + [A.one if i == j else A.zero for j in range(k)] for i, r in enumerate(m)]
    det = A.one
    for col in range(k):
        piv = next((r for r in range(col, k) if not A.is_zero_fast(rows[r][col])), None)
        if piv is None:
            return None, A.zero
        if piv != col:
            rows[col], rows[piv] = rows[piv], rows[col]
            det = -det
        p = rows[col][col]
        det = A.mul(det, p)
        ip = A.inv(p)
        rows[col] = [A.mul(x, ip) for x in rows[col]]
        for r in range(k):
            if r != col and not A.is_zero_fast(rows[r][col]):
                f = rows[r][col]
                rows[r] = [A.sum_products([(1, (x,)), (-1, (f, y))]) for x, y in zip(rows[r], rows[col])]
    return [row[k:] for row in rows], det


def _antisym(table: dict, A, a: int, b: int, c: int, d: int):
    """Look up X_abcd from its independent components (antisymmetric pairs, pair swap)."""
    if a == b or c == d:
        return A.zero if A is not None else sp.S.Zero
    sign = 1
    if a > b:
        a, b, sign = b, a, -sign
    if c > d:
        c, d, sign = d, c, -sign
    key = (a, b, c, d) if (a, b) <= (c, d) else (c, d, a, b)
    v = table[key]
    return v if sign > 0 else -v


def _upper_index(a: int, b: int, n: int) -> int:
    """1-based position of (a, b), a <= b, in row-major order of the upper triangle."""
    return a * n - a * (a - 1) // 2 + (b - a) + 1


def _raise_first(A, inv, low, n):
    return [[A.sum_products([(1, (inv[a][c], low[c][b])) for c in range(n)
                             if not A.is_zero_fast(inv[a][c])]) for b in range(n)] for a in range(n)]


def derive(spacetime: Spacetime, quantities: Iterable[str] | None = None, **kw: Any) -> Curvature:
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
