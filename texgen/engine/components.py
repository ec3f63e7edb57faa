"""The curvature stages on field elements: g, g^ab, Γ, Riemann, Ricci, Einstein, Weyl, invariants, Bianchi.

Each ``_compute_NAME`` is one memoised stage of :class:`~texgen.engine.curvature.Curvature`
(``self._E(NAME)``) working on elements of its arithmetic, never on sympy
expressions; ``self._tick`` after every component checks the budget and reports progress.
"""
from __future__ import annotations

from itertools import combinations
from typing import Any

import sympy as sp

from ..errors import DerivationError


class ComponentStages:
    """Mixin of :class:`~texgen.engine.curvature.Curvature`: the stages on field elements."""
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
