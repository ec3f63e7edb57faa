"""The naive baseline: plain sympy loops with ``simplify`` on every component.

This is the straightforward notebook approach the engine is measured against: the
same quantities as ``texgen.engine.compute_all`` (inverse, Christoffel symbols, Riemann,
Ricci, Einstein, Weyl, the three invariants, the identity check, Bianchi, geodesics),
each component simplified as soon as it is formed.  Run by hand:

    python bench/baseline_naive.py kerr_newman

It prints one ``STAGE <name> <wall seconds> <cpu seconds>`` line per finished stage
(flushed, so a caller that stops it at a time cap still sees how far it got) and
``DONE <total wall>`` at the end.
"""
from __future__ import annotations

import sys
import time

import sympy as sp

t, r, th, ph = sp.symbols("t r theta phi", real=True)
M, a, Q = sp.symbols("M a Q", positive=True)


def schwarzschild():
    f = 1 - 2 * M / r
    return (t, r, th, ph), sp.diag(-f, 1 / f, r**2, r**2 * sp.sin(th)**2), (M,)


def kerr_newman():
    """Boyer-Lindquist coordinates (Misner, Thorne & Wheeler 1973, eq. 33.2)."""
    s, c = sp.sin(th), sp.cos(th)
    sig = r**2 + a**2 * c**2
    dlt = r**2 - 2 * M * r + a**2 + Q**2
    g = sp.zeros(4)
    g[0, 0] = -(dlt - a**2 * s**2) / sig
    g[0, 3] = g[3, 0] = -a * s**2 * (r**2 + a**2 - dlt) / sig
    g[1, 1] = sig / dlt
    g[2, 2] = sig
    g[3, 3] = ((r**2 + a**2)**2 - dlt * a**2 * s**2) * s**2 / sig
    return (t, r, th, ph), g, (M, a, Q)


METRICS = {"schwarzschild": schwarzschild, "kerr_newman": kerr_newman}


def naive_all(coords, g, report=None):
    """Every quantity, naively; ``report(stage, wall, cpu)`` after each stage."""
    n = len(coords)
    S = sp.simplify
    clock = [time.perf_counter(), time.process_time()]

    def done(stage):
        now = (time.perf_counter(), time.process_time())
        if report is not None:
            report(stage, now[0] - clock[0], now[1] - clock[1])
        clock[:] = now

    ginv = g.inv().applyfunc(S)
    det = S(g.det())
    done("inverse")
    gam1 = [[[S((sp.diff(g[a_, b], coords[c]) + sp.diff(g[a_, c], coords[b])
                 - sp.diff(g[b, c], coords[a_])) / 2) for c in range(n)] for b in range(n)] for a_ in range(n)]
    done("christoffel_first")
    gam = [[[S(sum(ginv[a_, d] * gam1[d][b][c] for d in range(n))) for c in range(n)] for b in range(n)]
           for a_ in range(n)]
    done("christoffel")
    riem = [[[[S(sp.diff(gam[a_][d][b], coords[c]) - sp.diff(gam[a_][c][b], coords[d])
                 + sum(gam[a_][c][e] * gam[e][d][b] - gam[a_][d][e] * gam[e][c][b] for e in range(n)))
               for d in range(n)] for c in range(n)] for b in range(n)] for a_ in range(n)]
    done("riemann")
    rdown = [[[[S(sum(g[a_, e] * riem[e][b][c][d] for e in range(n))) for d in range(n)] for c in range(n)]
              for b in range(n)] for a_ in range(n)]
    done("riemann_down")
    ric = sp.Matrix(n, n, lambda b, d: S(sum(riem[a_][b][a_][d] for a_ in range(n))))
    done("ricci")
    R = S(sum(ginv[a_, b] * ric[a_, b] for a_ in range(n) for b in range(n)))
    done("ricci_scalar")
    G = (ric - R * g / 2).applyfunc(S)
    Gmix = (ginv * G).applyfunc(S)
    done("einstein")
    weyl = [[[[S(rdown[a_][b][c][d]
                 - (g[a_, c] * ric[b, d] - g[a_, d] * ric[b, c] - g[b, c] * ric[a_, d] + g[b, d] * ric[a_, c])
                 / (n - 2) + R * (g[a_, c] * g[b, d] - g[a_, d] * g[b, c]) / ((n - 1) * (n - 2)))
               for d in range(n)] for c in range(n)] for b in range(n)] for a_ in range(n)]
    done("weyl")

    def raise_all(T):
        up = [[[[S(sum(ginv[a_, e] * ginv[b, f] * ginv[c, h] * ginv[d, k] * T[e][f][h][k]
                       for e in range(n) for f in range(n) for h in range(n) for k in range(n)
                       if ginv[a_, e] != 0 and ginv[b, f] != 0 and ginv[c, h] != 0 and ginv[d, k] != 0))
                  for d in range(n)] for c in range(n)] for b in range(n)] for a_ in range(n)]
        return S(sum(T[i][j][k][m] * up[i][j][k][m]
                     for i in range(n) for j in range(n) for k in range(n) for m in range(n)))

    K = raise_all(rdown)
    done("kretschmann")
    ricup = (ginv * ric * ginv).applyfunc(S)
    ric2 = S(sum(ric[i, j] * ricup[i, j] for i in range(n) for j in range(n)))
    done("ricci_squared")
    C2 = raise_all(weyl)
    done("weyl_squared")
    ident = S(C2 - (K - sp.Rational(4, n - 2) * ric2 + sp.Rational(2, (n - 1) * (n - 2)) * R**2))
    done("invariant_identity")
    Gup = (Gmix * ginv).applyfunc(S)
    bianchi = [S(sum(sp.diff(Gup[a_, b], coords[a_]) for a_ in range(n))
                 + sum(gam[a_][a_][e] * Gup[e, b] + gam[b][a_][e] * Gup[a_, e] for a_ in range(n) for e in range(n)))
               for b in range(n)]
    done("bianchi")
    tau = sp.Symbol("tau")
    xs = [sp.Function(str(x))(tau) for x in coords]
    sub = dict(zip(coords, xs))
    geo = [sp.Derivative(xs[a_], (tau, 2)) + sum(gam[a_][b][c].subs(sub) * sp.Derivative(xs[b], tau)
                                                 * sp.Derivative(xs[c], tau) for b in range(n) for c in range(n))
           for a_ in range(n)]
    done("geodesic_equations")
    return {"det": det, "K": K, "R": R, "identity": ident, "bianchi": bianchi, "geodesics": geo}


def main(argv: list[str]) -> int:
    name = argv[0] if argv else "schwarzschild"
    coords, g, _ = METRICS[name]()
    start = time.perf_counter()

    def report(stage, wall, cpu):
        print(f"STAGE {stage} {wall:.6f} {cpu:.6f}", flush=True)

    out = naive_all(coords, g, report)
    print(f"DONE {time.perf_counter() - start:.6f}", flush=True)
    print(f"RESULT K = {out['K']}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
