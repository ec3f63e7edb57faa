"""Stress-energy tensors of declared matter sources, and the author's imposed relations.

Pure computation on sympy expressions: the claim checker (:mod:`texgen.physics.claims`)
parses the ``source`` and ``impose`` sections and calls these builders, then
decides whether ``s G_ab + σ Λ g_ab − κ T_ab`` vanishes.

Every tensor is written for the mostly-plus signature and multiplied by the
metric sign σ where g_ab enters an odd number of times, so that the covariant
T_ab of one physical field is the same in every signature (the engine's field
tensor is arranged the same way, see :mod:`texgen.engine.curvature`).
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

SOURCE_TYPES = ("vacuum", "electromagnetic", "perfect_fluid", "null_dust", "scalar_field")
SOURCE_KEYS = {
    "vacuum": (),
    "electromagnetic": ("potential",),
    "perfect_fluid": ("density", "pressure", "velocity"),
    "null_dust": ("density", "null_vector"),
    "scalar_field": ("field", "potential"),
}
"""Keys each source type needs (besides ``type``); ``scalar_field.potential`` may be left out (V = 0)."""


@dataclass(frozen=True)
class Source:
    """A declared matter source, parsed."""

    type: str
    """One of :data:`SOURCE_TYPES`."""
    vector: tuple[sp.Expr, ...] = ()
    """A_a (electromagnetic, lower), u^a (perfect fluid, upper) or k_a (null dust, lower)."""
    density: sp.Expr = sp.S.Zero
    pressure: sp.Expr = sp.S.Zero
    field: sp.Expr = sp.S.Zero
    """The scalar field φ (scalar_field)."""
    potential: sp.Expr = sp.S.Zero
    """V(φ) with φ already substituted (scalar_field)."""


@dataclass(frozen=True)
class Extra:
    """A further equation the source must satisfy besides the field equations."""

    name: str
    """``maxwell`` (∂_a(√|g| F^{ab}) = 0, per b) or ``normalisation`` (u·u = −1, k·k = 0)."""
    key: tuple[int, ...]
    expr: sp.Expr
    """Must vanish."""


def _grad(f: sp.Expr, xs) -> list[sp.Expr]:
    return [sp.diff(f, x) for x in xs]


def stress_energy(source: Source, g: sp.MatrixBase, ginv: sp.MatrixBase, xs, sigma: int) -> sp.Matrix:
    """Covariant T_ab of ``source`` on the metric ``g`` (inverse ``ginv``) in coordinates ``xs``.

    Parameters
    ----------
    sigma:
        +1 for mostly-plus (and Riemannian), −1 for mostly-minus signatures.
    """
    n = len(xs)
    T = sp.zeros(n, n)
    if source.type == "vacuum":
        return T
    if source.type == "electromagnetic":
        # Gaussian units: T_ab = (1/4π)(F_ac F_b^c − ¼ g_ab F_cd F^cd), mostly plus
        # (Misner, Thorne & Wheeler 1973, eq. (5.7)).
        A = source.vector
        F = sp.Matrix(n, n, lambda a, b: sp.diff(A[b], xs[a]) - sp.diff(A[a], xs[b]))
        Fup = ginv * F * ginv
        FF = sum(F[c, d] * Fup[c, d] for c in range(n) for d in range(n))
        Fmix = F * ginv  # F_a^c
        for a in range(n):
            for b in range(a, n):
                v = sum(F[a, c] * Fmix[b, c] for c in range(n)) - g[a, b] * FF / 4
                T[a, b] = T[b, a] = sigma * v / (4 * sp.pi)
        return T
    if source.type == "perfect_fluid":
        # T_ab = (ρ + p) u_a u_b + p g_ab (mostly plus; Wald 1984, eq. (4.2.95)).
        u_low = list(g * sp.Matrix(source.vector))
        rho, p = source.density, source.pressure
        for a in range(n):
            for b in range(a, n):
                T[a, b] = T[b, a] = (rho + p) * u_low[a] * u_low[b] + sigma * p * g[a, b]
        return T
    if source.type == "null_dust":
        # T_ab = ρ k_a k_b (Vaidya 1951; Stephani et al. 2003, §5.2).
        k = source.vector
        for a in range(n):
            for b in range(a, n):
                T[a, b] = T[b, a] = source.density * k[a] * k[b]
        return T
    if source.type == "scalar_field":
        # T_ab = ∂_aφ ∂_bφ − g_ab(½ ∂φ·∂φ + V) (mostly plus; Carroll 2004, eq. (4.55) with V).
        d = _grad(source.field, xs)
        X = sum(ginv[a, b] * d[a] * d[b] for a in range(n) for b in range(n))
        for a in range(n):
            for b in range(a, n):
                T[a, b] = T[b, a] = d[a] * d[b] - g[a, b] * (X / 2 + sigma * source.potential)
        return T
    raise ValueError(source.type)  # pragma: no cover - the parser admits only SOURCE_TYPES


def extra_equations(source: Source, g: sp.MatrixBase, ginv: sp.MatrixBase, det: sp.Expr, xs,
                    sigma: int) -> tuple[Extra, ...]:
    """Equations besides G = κT that the declared matter must obey."""
    n = len(xs)
    out: list[Extra] = []
    if source.type == "electromagnetic":
        # Source-free Maxwell: ∂_a(√|g| F^{ab}) = √|g| (∂_a F^{ab} + F^{ab} ∂_a det / (2 det)),
        # written without the square root so the exact arithmetic can decide it.
        A = source.vector
        F = sp.Matrix(n, n, lambda a, b: sp.diff(A[b], xs[a]) - sp.diff(A[a], xs[b]))
        Fup = ginv * F * ginv
        for b in range(n):
            e = sum(sp.diff(Fup[a, b], xs[a]) + Fup[a, b] * sp.diff(det, xs[a]) / (2 * det) for a in range(n))
            out.append(Extra("maxwell", (b,), e))
    elif source.type == "perfect_fluid":
        u = sp.Matrix(source.vector)
        out.append(Extra("normalisation", (), (u.T * g * u)[0, 0] + sigma))
    elif source.type == "null_dust":
        k = sp.Matrix(source.vector)
        out.append(Extra("normalisation", (), (k.T * ginv * k)[0, 0]))
    return tuple(out)


def _derivative_order(e: sp.Basic) -> int:
    return sum(c for _, c in e.variable_count) if isinstance(e, sp.Derivative) else 0


def solve_relation(eq: sp.Expr, metric_functions: set) -> tuple[sp.Basic, sp.Expr] | None:
    """A substitution ``target -> value`` that makes ``eq = 0`` hold, or ``None``.

    Preference: a free function the metric does not contain (a density or pressure
    such as ρ(t)), then the highest derivative, solved where ``eq`` is linear in it;
    else a power of a derivative (``a'(t)^2`` in the first Friedmann equation).
    """
    undef = sorted(eq.atoms(sp.core.function.AppliedUndef), key=sp.default_sort_key)
    derivs = sorted(eq.atoms(sp.Derivative), key=lambda d: (-_derivative_order(d), sp.default_sort_key(d)))
    outside = [f for f in undef if f.func not in metric_functions]
    outside_derivs = [d for d in derivs if isinstance(d.expr, sp.core.function.AppliedUndef)
                      and d.expr.func not in metric_functions]
    for target in outside + outside_derivs + derivs:
        if target in outside and any(d.expr == target for d in derivs):
            continue  # ρ(t) and ρ'(t) together: substituting ρ alone would leave ρ' behind
        x = sp.Dummy("x")
        lin = eq.subs(target, x)
        c = sp.cancel(sp.diff(lin, x))
        if c != 0 and not c.has(x):
            return target, sp.cancel(-lin.subs(x, 0) / c)
    for d in derivs:
        x = sp.Dummy("x")
        pows = {p.exp for p in eq.atoms(sp.Pow) if p.base == d and p.exp.is_Integer and p.exp > 1}
        if len(pows) == 1:
            k = pows.pop()
            lin = eq.subs(d**k, x)
            if lin.has(d):
                continue
            c = sp.cancel(sp.diff(lin, x))
            if c != 0 and not c.has(x):
                return d**k, sp.cancel(-lin.subs(x, 0) / c)
    return None


def apply_substitution(expr: sp.Expr, target: sp.Basic, value: sp.Expr) -> sp.Expr:
    """``expr`` with ``target`` replaced; a function is replaced everywhere, derivatives included."""
    if isinstance(target, sp.core.function.AppliedUndef) and all(isinstance(a, sp.Symbol) for a in target.args):
        return expr.replace(target.func, sp.Lambda(target.args, value)).doit()
    if isinstance(target, sp.exp):
        # exp(u) = value also fixes exp(k u) for every integer k.
        u0 = target.args[0]

        def power(e):
            k = sp.cancel(e.args[0] / u0)
            return value**int(k) if k.is_Integer else e
        return expr.replace(lambda e: isinstance(e, sp.exp), power)
    if isinstance(target, sp.Pow):
        d, k = target.base, int(target.exp)
        # Reduce every power d^m (m >= k) modulo d^k = value.
        def red(p):
            q, r = divmod(int(p.exp), k)
            return value**q * d**r
        return expr.replace(lambda e: isinstance(e, sp.Pow) and e.base == d and e.exp.is_Integer and e.exp >= k, red)
    return expr.xreplace({target: value})


def implicit_rules(eq: sp.Expr, metric_functions: set, max_order: int = 2) -> list[tuple[sp.Basic, sp.Expr]] | None:
    """Substitutions from a relation ``F(f, x) = 0`` that fixes a metric function ``f`` implicitly.

    Implicit differentiation gives every derivative of ``f`` up to ``max_order``
    (the curvature needs two) in terms of ``f`` itself; the relation then removes
    one transcendental atom (``exp(f/(2M))`` for Kruskal–Szekeres) or a power of a
    coordinate. ``None`` when the relation has no such form.
    """
    funcs = [a for a in eq.atoms(sp.core.function.AppliedUndef) if a.func in metric_functions]
    if len(funcs) != 1 or eq.atoms(sp.Derivative):
        return None
    f = funcs[0]
    args = [a for a in f.args if isinstance(a, sp.Symbol)]
    F = sp.Dummy("F")
    rel = eq.xreplace({f: F})
    dF = sp.diff(rel, F)
    if dF == 0:
        return None
    first = {x: sp.cancel(-sp.diff(rel, x) / dF) for x in args}

    def total(e, x):
        return sp.diff(e, x) + sp.diff(e, F) * first[x]

    rules: list[tuple[sp.Basic, sp.Expr]] = []
    values = {(x,): first[x] for x in args}
    frontier = dict(values)
    for _ in range(max_order - 1):
        nxt = {}
        for key, v in frontier.items():
            for x in args:
                k2 = tuple(sorted(key + (x,), key=args.index))
                if k2 not in values and k2 not in nxt:
                    nxt[k2] = sp.cancel(total(v, x))
        values.update(nxt)
        frontier = nxt
    for key, v in sorted(values.items(), key=lambda kv: -len(kv[0])):
        rules.append((sp.Derivative(f, *key), v.xreplace({F: f})))
    # Remove one atom with the relation itself: an exponential it is linear in, else a power of a coordinate.
    x = sp.Dummy("x")
    for atom in sorted(rel.atoms(sp.exp), key=sp.default_sort_key):
        lin = rel.subs(atom, x)
        c = sp.cancel(sp.diff(lin, x))
        if c != 0 and not c.has(x) and not lin.subs(x, 0).has(atom):
            rules.append((atom.xreplace({F: f}), sp.cancel(-lin.subs(x, 0) / c).xreplace({F: f})))
            return rules
    for s in args:
        pows = {p.exp for p in rel.atoms(sp.Pow) if p.base == s and p.exp.is_Integer and p.exp > 1}
        if len(pows) == 1:
            kpow = pows.pop()
            lin = rel.subs(s**kpow, x)
            if not lin.has(s):
                c = sp.cancel(sp.diff(lin, x))
                if c != 0 and not c.has(x):
                    rules.append((s**kpow, sp.cancel(-lin.subs(x, 0) / c).xreplace({F: f})))
                    return rules
    return rules
