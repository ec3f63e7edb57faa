"""Point-wise energy conditions (null, weak, strong, dominant) of the matter the metric demands.

Exact first: every inequality proved non-negative under the declared assumptions
and ranges gives *holds*; else a witness point where one fails (checked at two
precisions) gives *violated*; else *holds at the samples*, never called proved.
When T is not diagonal in the frame, necessary conditions and the eigenvalues of
T^a_b at sample points decide, and the Hawking–Ellis type is read from them.
"""
from __future__ import annotations

from dataclasses import dataclass

import mpmath
import sympy as sp

from . import _tools as tools
from .chart import SAMPLES, SEED, lower_bound, region_text, signs, time_index
from .matter import FrameMatter, StressEnergy

CONDITIONS = ("null", "weak", "strong", "dominant")


@dataclass(frozen=True)
class Verdict:
    """The verdict on one point-wise energy condition."""

    status: str
    """``holds`` (proved), ``violated`` (witness found), ``holds_at_samples`` (not proved), ``undecided``."""
    inequalities: tuple[sp.Expr, ...]
    """Each expression is required to be ``>= 0``."""
    witness: dict | None = None
    """A point (symbol -> number, free-function values included) where one inequality fails."""
    samples: int = 0
    """Number of points evaluated."""
    region: str | None = None
    """Where it fails, when that could be said (``r < 2 M``)."""
    failing: int | None = None
    """Index of the inequality the witness violates."""


def decide_conditions(st, cv, se: StressEnergy, fm: FrameMatter, radial, special, stand_ins, ppoint,
                      ti, notes: list) -> tuple[dict, str]:
    """``(condition name -> Verdict, Hawking–Ellis type)``; what is only sampled is noted in ``notes``."""
    ec: dict = {}
    he_type = fm.hawking_ellis_type
    if not se.vacuum and ti is not None:
        rho, ps, comps, kind = fm.density, fm.pressures, fm.components, fm.kind
        if rho is not None and ps:
            ineqs = _inequalities(rho, ps)
            base = list(ineqs["dominant"]) + [ineqs["strong"][0]]
            points = _valid_points(tools.sample_set(st, SAMPLES, SEED, radial, special, base),
                                   _frame_valid(st, cv, kind))
            for name in CONDITIONS:
                ec[name] = _verdict(st, cv, ineqs[name], points, radial, stand_ins, ppoint)
        elif comps is not None:
            ec, he_type = _nondiagonal_conditions(st, cv, comps, radial, special, stand_ins, ppoint,
                                                  valid=_frame_valid(st, cv, kind))
            notes.append("T_(i)(j) is not diagonal in the frame: principal pressures from its eigenvalues "
                         "at sample points only")
        else:
            ec, he_type = _nondiagonal_conditions(st, cv, None, radial, special, stand_ins, ppoint, se.Twmix)
            notes.append("no orthonormal frame could be built: energy conditions from the eigenvalues of "
                         "T^a_b at sample points only")
    return ec, he_type


def _frame_valid(st, cv, kind):
    """Expressions that must be positive where the built frame exists (t = const spacelike, e_(i) real)."""
    if kind in (None, "tetrad"):
        return []
    ti = time_index(st)
    sg = signs(st)
    out = [cv.canonical(sg[ti] * cv.inverse[ti, ti])]
    out += [cv.canonical(sg[i] * st.metric[i, i]) for i in range(st.dimension) if i != ti]
    return [x for x in out if not x.is_number]


def _valid_points(points, valid):
    return [p for p in points if all((tools.value_at(v, p) or 0) > 0 for v in valid)]


def _inequalities(rho, ps):
    sec_sum = rho + sp.Add(*ps)
    return {
        "null": tuple(rho + p for p in ps),
        "weak": (rho,) + tuple(rho + p for p in ps),
        "strong": (sec_sum,) + tuple(rho + p for p in ps),
        "dominant": (rho,) + tuple(x for p in ps for x in (rho - p, rho + p)),
    }


def _verdict(st, cv, ineqs, points, radial, stand_ins, param_point, extra_note=None, provable=True):
    canon = tuple(cv.canonical(x) for x in ineqs)
    if provable and all(cv.is_zero(x) or tools.proved_nonnegative(x, stand_ins) for x in canon):
        return Verdict("holds", canon, None, 0, None)
    pending = [k for k, x in enumerate(canon) if not (cv.is_zero(x) or tools.proved_nonnegative(x, stand_ins))]
    for pt in points:
        for k in pending:
            if tools.confirmed_negative(canon[k], pt):
                return Verdict("violated", canon, dict(pt), len(points),
                               _region(st, canon[k], radial, pt), k)
    if not points:
        return Verdict("undecided", canon, None, 0, None)
    return Verdict("holds_at_samples", canon, None, len(points), None)


def _region(st, expr, radial, point) -> str | None:
    if radial is None or expr.atoms(sp.core.function.AppliedUndef):
        return None
    others = {s for s in expr.free_symbols if s in set(st.coordinate_symbols)} - {radial}
    if others:
        return None
    lower = lower_bound(st, radial)
    intervals = tools.negative_region(expr, radial, point, lower)
    if intervals:
        return region_text(intervals, radial, lower is not None)
    vals = [float(point[radial])] if radial in point else []
    return f"violated at sampled points with {radial} = {vals[0]:.6g}" if vals else None


def _nondiagonal_conditions(st, cv, comps, radial, special, stand_ins, ppoint, Tmix=None, valid=()):
    """Energy conditions when T is not diagonal in a frame: numerical, at sample points.

    Necessary conditions in the frame (ρ ≥ 0, and T_ab k^a k^b ≥ 0 for the null
    vectors e_(0) ± e_(i)) give witnesses of violation; the eigenvalues of T^a_b give
    the Hawking–Ellis type and ρ, p_i at each point.
    """
    n = st.dimension
    nec, wec = [], []
    if comps is not None:
        rho = comps[0, 0]
        for i in range(1, n):
            for s in (1, -1):
                nec.append(comps[0, 0] + 2 * s * comps[0, i] + comps[i, i])
        wec = [rho] + nec
    exprs = nec + wec
    Tm = Tmix if Tmix is not None else None
    points = tools.sample_set(st, SAMPLES // 2, SEED, radial, special, exprs or [sp.S.One])
    points = _valid_points(points, valid)
    out = {}
    ineq_by = {"null": tuple(nec), "weak": tuple(wec), "strong": tuple(nec), "dominant": tuple(wec)}
    for name in CONDITIONS:
        ineqs = ineq_by[name]
        verdict = None
        for pt in points:
            for k, x in enumerate(ineqs):
                if tools.confirmed_negative(x, pt):
                    verdict = Verdict("violated", ineqs, dict(pt), len(points), _region(st, x, radial, pt), k)
                    break
            if verdict:
                break
        out[name] = verdict
    he = "unknown"
    if Tm is not None or comps is not None:
        types = set()
        eigen_fail = {name: None for name in CONDITIONS}
        evaluate = tools.evaluator(list(comps if comps is not None else Tm))
        for pt in points[:8]:
            res = _eigen_at(st, cv, comps, Tm, pt, evaluate)
            if res is None:
                types.add("?")
                continue
            typ, rho_v, ps_v = res
            types.add(typ)
            if typ == "I":
                checks = {
                    "null": [rho_v + p for p in ps_v],
                    "weak": [rho_v] + [rho_v + p for p in ps_v],
                    "strong": [rho_v + sum(ps_v)] + [rho_v + p for p in ps_v],
                    "dominant": [rho_v] + [rho_v - abs(p) for p in ps_v],
                }
                for name, vals in checks.items():
                    if eigen_fail[name] is None and any(v < -1e-20 for v in vals):
                        eigen_fail[name] = pt
        he = "I (at samples)" if types == {"I"} else "not I at samples" if types - {"I", "?"} else "unknown"
        for name in CONDITIONS:
            if out[name] is None and eigen_fail[name] is not None:
                out[name] = Verdict("violated", ineq_by[name], dict(eigen_fail[name]), len(points), None)
    for name in CONDITIONS:
        if out[name] is None:
            status = "holds_at_samples" if he == "I (at samples)" else "undecided"
            out[name] = Verdict(status, ineq_by[name], None, len(points), None)
    return out, he


def _eigen_at(st, cv, comps, Tm, pt, evaluate):
    """Hawking–Ellis type, ρ and p_i at one point from T^(a)_(b) (mpmath, 30 digits)."""
    n = st.dimension
    mpmath.mp.dps = 30
    source = comps if comps is not None else Tm
    vals = evaluate(pt)
    if vals is None:
        return None
    eta = [-1] + [1] * (n - 1) if comps is not None else None
    M = mpmath.matrix(n, n)
    for a in range(n):
        for b in range(n):
            M[a, b] = vals[a * n + b] * (eta[a] if eta else 1)
    vals, vecs = mpmath.eig(M)
    if any(abs(mpmath.im(v)) > 1e-15 * (1 + abs(v)) for v in vals):
        return "not I", None, None
    if eta is None:
        return "I?", None, None
    norms = []
    for k in range(n):
        v = [mpmath.re(vecs[i, k]) for i in range(n)]
        norms.append(sum(eta[i] * v[i] ** 2 for i in range(n)))
    tl = [k for k in range(n) if norms[k] < 0]
    if len(tl) != 1:
        return "not I", None, None
    k0 = tl[0]
    rho = -float(mpmath.re(vals[k0]))
    ps = [float(mpmath.re(vals[k])) for k in range(n) if k != k0]
    return "I", rho, ps
