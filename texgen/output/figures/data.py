"""The data of each figure (plain lists and floats): what is plotted, and what the tests read.

One builder per figure name; each returns ``None`` when the figure does not apply
to the spacetime (no radial coordinate, no matter, no periodic coordinate ...).
"""
from __future__ import annotations

import math

import sympy as sp

from ...errors import TexgenError
from .evaluate import _Ctx, _np, _plain

_PLANE = 121


def _profiles(c: _Ctx) -> dict | None:
    if c.ti is None:
        return None
    st, num = c.st, c.num
    sign_t = -1 if st.conventions.signature[c.ti] == "-" else 1
    fg = num.function(sign_t * st.metric[c.ti, c.ti])  # -g_tt for -+++, g_tt for +---
    fr = num.function(st.metric[c.ri, c.ri])
    finv = num.function(c.cv.inverse[c.ri, c.ri])
    if fg is None or fr is None or finv is None:
        return None
    r = c.rgrid
    with _np().errstate(all="ignore"):
        inv = 1 / finv(r)
    ergos = []
    if c.an is not None:
        ergos = [x for x in (num.radius(e) for e in c.an.ergosurfaces) if x is not None]
    photon = num.radius(c.an.photon_sphere) if c.an is not None and c.an.photon_sphere is not None else None
    gtt_name = "-g_{tt}" if sign_t == -1 else "g_{tt}"
    rname = st.coordinates[c.ri].latex
    return {"r": r, "minus_g_tt": _plain(fg(r)), "g_rr": _plain(fr(r)), "one_over_g_inv_rr": _plain(inv),
            "horizons": c.horizons, "horizon_names": c.horizon_names, "throats": c.throats,
            "ergosurfaces": ergos, "photon_sphere": photon,
            "labels": {"minus_g_tt": f"${gtt_name}$", "g_rr": f"$g_{{{rname}{rname}}}$",
                       "one_over_g_inv_rr": f"$1/g^{{{rname}{rname}}}$"}}


def _invariants(c: _Ctx) -> dict | None:
    try:
        K = c.cv.kretschmann
    except TexgenError:
        return None
    if c.radial not in sp.sympify(K).free_symbols:
        return None
    f = c.num.function(K)
    if f is None:
        return None
    r = c.rgrid
    k = _np().abs(f(r))
    sing = []
    if c.an is not None:
        for eq in c.an.curvature_singularities:
            if isinstance(eq, sp.Eq) and eq.lhs == c.radial:
                v = c.num.radius(eq.rhs)
                if v is not None:
                    sing.append(v)
    at_special = [float(f([x])[0]) for x in c.specials]
    # The exact limit at the lower end of the radial range (analysis) decides when K does not depend on the
    # angle; otherwise (the ring of Kerr diverges on the equator only) the plotted samples do.
    limits = list(c.an.curvature_limits.values()) if c.an is not None else []
    finite = False
    if limits and (c.theta is None or c.theta not in sp.sympify(K).free_symbols):
        near = c.lower is not None and abs(r[0] - c.lower) <= 1e-2 * (abs(r[-1] - r[0]))
        infinite = any(sp.sympify(v).has(sp.oo, -sp.oo, sp.zoo) for v in limits)
        diverges = infinite and near
        finite = near and not infinite
    else:
        finite = [x for x in at_special if math.isfinite(x)]
        diverges = bool(len(k) and math.isfinite(k[0]) and finite and k[0] > 1e3 * max(finite))
    return {"r": r, "kretschmann_abs": _plain(k), "curvature_singularities": sing,
            "horizons": c.horizons, "throats": c.throats, "kretschmann_at_special": _plain(at_special),
            "diverges_at_inner_edge": bool(diverges), "finite_at_inner_edge": bool(finite)}


def _energy_conditions(c: _Ctx) -> dict | None:
    an = c.an
    if an is None or an.energy_density is None or not an.pressures or an.hawking_ellis_type == "vacuum":
        return None
    np = _np()
    fr = c.num.function(an.energy_density)
    fps = [c.num.function(p) for p in an.pressures]
    if fr is None or any(f is None for f in fps):
        return None
    r = np.asarray(c.rgrid)
    st = c.st
    # The static frame exists where -g_tt > 0 and g_rr > 0 (outside horizons, where b < r).
    valid = np.ones_like(r, dtype=bool)
    for i, f in ((c.ti, c.num.function(st.metric[c.ti, c.ti])), (c.ri, c.num.function(st.metric[c.ri, c.ri]))):
        if f is not None:
            sign = 1 if st.conventions.signature[i] == "+" else -1
            with np.errstate(invalid="ignore"):
                valid &= ~(sign * f(r) <= 0)
    rho = fr(r)
    ps = [f(r) for f in fps]
    rho = np.where(valid, rho, np.nan)
    ps = [np.where(valid, p, np.nan) for p in ps]
    plus = [rho + p for p in ps]
    total = rho + sum(ps)
    minus = [rho - np.abs(p) for p in ps]
    with np.errstate(invalid="ignore"):
        bad = np.zeros_like(r, dtype=bool)
        for x in plus:
            bad |= x < -1e-12 * (1 + np.abs(rho))
    intervals = []
    start = None
    for i, b in enumerate(bad):
        if b and start is None:
            start = i
        if (not b or i == len(bad) - 1) and start is not None:
            end = i if b else i - 1
            intervals.append([float(r[start]), float(r[end])])
            start = None
    names = [st.coordinates[j].name for j in range(st.dimension) if j != c.ti]
    names_tex = [st.coordinates[j].latex for j in range(st.dimension) if j != c.ti]
    return {"r": list(map(float, r)), "rho": _plain(rho), "rho_plus_p": [_plain(x) for x in plus],
            "rho_plus_sum_p": _plain(total), "rho_minus_abs_p": [_plain(x) for x in minus],
            "pressure_names": names[:len(ps)], "pressure_tex": names_tex[:len(ps)], "null_violated": intervals}


def _plane(c: _Ctx) -> dict | None:
    np = _np()
    an = c.an
    h = getattr(an, "horizon_function", None)
    if h is None or c.radial not in h.free_symbols:
        return None
    h = sp.sympify(h)
    if c.theta is not None:
        h = h.xreplace({c.theta: sp.pi / 2})
    params = [p.symbol for p in c.st.parameters if p.symbol in h.free_symbols]
    spec = c.fs.plane
    if spec is None:
        if len(params) < 3:
            return None
        pos = [p for p in params if p.is_positive]
        scale = pos[0] if pos else params[0]
        rest = [p for p in params if p != scale]
        spec = {"x": rest[0], "y": rest[1], "scale": scale, "x_range": None, "y_range": None}
    x, y, scale = spec["x"], spec["y"], spec["scale"]
    others = {p: sp.Float(v, 17) for p, v in c.fs.values.items() if p not in (x, y, scale)}
    try:
        poly = sp.Poly(h.xreplace(others | ({scale: 1} if scale is not None else {})), c.radial)
    except sp.PolynomialError:
        return None
    if poly.free_symbols - {x, y, c.radial} or poly.degree() < 1:
        return None

    def extent(sym, given):
        if given is not None:
            return given
        return (0.0, 1.5) if sym.is_nonnegative or _declared_nonneg(c.st, sym) else (-1.5, 1.5)
    xr, yr = extent(x, spec["x_range"]), extent(y, spec["y_range"])
    xs = np.linspace(xr[0], xr[1], _PLANE)
    ys = np.linspace(yr[0], yr[1], _PLANE)
    coeffs = [sp.lambdify((x, y), co, modules="numpy") for co in poly.all_coeffs()]
    counts = np.zeros((len(ys), len(xs)), dtype=int)
    for j, yv in enumerate(ys):
        with np.errstate(all="ignore"):
            cs = [np.broadcast_to(np.asarray(f(xs, yv), dtype=float), xs.shape) for f in coeffs]
        for i in range(len(xs)):
            co = [cc[i] for cc in cs]
            if not all(map(math.isfinite, co)):
                counts[j, i] = -1  # the horizon function is undefined there: left blank
                continue
            roots = np.roots(co)
            real = roots[np.abs(roots.imag) < 1e-9].real
            if c.lower is not None:
                real = real[real > c.lower]
            counts[j, i] = len(real)
    labels = {2: "two horizons", 1: "one horizon", 0: "no horizon (naked singularity)"}
    present = sorted({int(k) for k in counts.flat if k >= 0}, reverse=True)
    disc = sp.discriminant(poly.as_expr(), c.radial) if poly.degree() == 2 else None
    extremal = _extremal_condition(h.xreplace(others), c.radial) if disc is not None else None
    point = None
    if scale is not None:
        sv = c.fs.values.get(scale)
        if sv:
            point = [c.fs.values.get(x, 0.0) / sv, c.fs.values.get(y, 0.0) / sv]
    return {"x": list(map(float, xs)), "y": list(map(float, ys)), "counts": counts.tolist(),
            "x_name": x.name, "y_name": y.name, "scale_name": scale.name if scale is not None else None,
            "x_tex": _latex_of(c.st, x), "y_tex": _latex_of(c.st, y),
            "scale_tex": _latex_of(c.st, scale) if scale is not None else None,
            "regions": [labels.get(k, f"{k} horizons") for k in present],
            "extremal_text": f"{extremal[0]} = {extremal[1]}" if extremal else None,
            "extremal_tex": (f"{sp.latex(extremal[0], symbol_names=c.st.latex_names())} = "
                             f"{sp.latex(extremal[1], symbol_names=c.st.latex_names())}") if extremal else None,
            "_disc": disc, "point": point}


def _extremal_condition(h: sp.Expr, r: sp.Symbol) -> tuple[sp.Expr, sp.Expr] | None:
    """The double-zero condition of the quadratic horizon function ``h`` as ``lhs = rhs``, each side a
    sum of positive terms (Kerr–Newman: a^2 + Q^2 = M^2), with the parameters kept, not scaled."""
    disc = sp.discriminant(sp.expand(h), r)
    _, prim = sp.factor_terms(sp.expand(disc)).as_content_primitive()
    prim = sp.expand(prim)
    terms = sp.Add.make_args(prim)
    pos = [t for t in terms if not t.could_extract_minus_sign()]
    neg = [-t for t in terms if t.could_extract_minus_sign()]
    if not pos or not neg:
        return (prim, sp.Integer(0)) if prim != 0 else None
    # the side with fewer terms (the scale, M^2) on the right, as the condition is usually written
    lhs, rhs = (neg, pos) if len(neg) >= len(pos) else (pos, neg)
    return sp.Add(*lhs), sp.Add(*rhs)


def _declared_nonneg(st, sym) -> bool:
    for p in st.parameters:
        if p.symbol == sym and p.range is not None and p.range.lower is not None:
            lo = sp.sympify(p.range.lower)
            return bool(lo.is_number and lo >= 0)
    return False


def _latex_of(st, sym) -> str:
    return st.latex_names().get(sym, sp.latex(sym))


def _ctc(c: _Ctx) -> dict | None:
    np = _np()
    if c.ti is None:
        return None
    st = c.st
    sign_space = 1 if st.conventions.signature[c.ti] == "-" else -1
    for i, co in enumerate(st.coordinates):
        if co.period is None:
            continue
        f = c.num.function(sign_space * st.metric[i, i])
        if f is None:
            continue
        rpos = np.asarray([x for x in c.rgrid if x > 0] or c.rgrid)
        ths = np.linspace(0.0, math.pi, 91) if c.theta is not None else np.asarray([math.pi / 2])
        with np.errstate(invalid="ignore"):
            neg = f(*np.meshgrid(rpos, ths)) < 0
        if not neg.any():
            continue
        # Zoom on the region (near the ring of Kerr–Newman it is tiny) and sample it again finely.
        top = float(np.meshgrid(rpos, ths)[0][neg].max())
        stop = min(float(rpos[-1]), max(1.6 * top, float(rpos[0]) + 1e-9))
        start = c.lower + stop / 1000 if c.lower is not None else float(rpos[0])
        rs = np.linspace(start, stop, 201)
        ths = np.linspace(0.0, math.pi, 181) if c.theta is not None else ths
        R, T = np.meshgrid(rs, ths)
        with np.errstate(invalid="ignore"):
            neg = f(R, T) < 0
        rr = R[neg] if neg.any() else np.asarray([top])
        return {"coordinate": co.name, "coordinate_tex": co.latex, "r": list(map(float, rs)),
                "theta": list(map(float, ths)), "timelike": neg.astype(int).tolist(),
                "r_extent": [float(rr.min()), float(rr.max())],
                "horizons": [x for x in c.horizons if x <= stop]}
    return None


def _light_cones(c: _Ctx) -> dict | None:
    np = _np()
    if c.ti is None:
        return None
    st = c.st
    # The t-r plane holds radial null rays only when t and r do not mix with the other coordinates
    # (no frame dragging); otherwise radial cones would be meaningless.
    rest = [i for i in range(st.dimension) if i not in (c.ti, c.ri)]
    if any(not c.cv.is_zero(st.metric[a, b]) for a in (c.ti, c.ri) for b in rest):
        return None
    g = [[c.num.function(st.metric[a, b]) for b in (c.ti, c.ri)] for a in (c.ti, c.ri)]
    if any(f is None for row in g for f in row):
        return None
    rs = [x for x in c.rgrid if (c.lower is None or x > c.lower)]
    lo, hi = rs[0], rs[-1]
    hi = min(hi, 3 * max(c.specials)) if c.specials and max(c.specials) > 0 else hi
    pos = list(np.linspace(lo + (hi - lo) / 14, hi, 12))
    pos = sorted(set(pos + [x for x in c.specials if lo < x < hi]))
    cones = []
    for r0 in pos:
        gtt, gtr, grr = (float(g[0][0]([r0])[0]), float(g[0][1]([r0])[0]), float(g[1][1]([r0])[0]))
        if not all(map(math.isfinite, (gtt, gtr, grr))):
            continue
        # Null vectors (dr, dt): g_tt dt^2 + 2 g_tr dt dr + g_rr dr^2 = 0, solved in the better-conditioned ratio.
        disc = gtr * gtr - gtt * grr
        if disc < 0:
            continue
        root = math.sqrt(disc)
        if grr == 0 and gtt == 0:
            ks = [(1.0, 0.0), (0.0, 1.0)]
        elif abs(grr) >= abs(gtt):
            ks = [((-gtr + sgn * root) / grr, 1.0) for sgn in (1, -1)]
        else:
            ks = [(1.0, (-gtr + sgn * root) / gtt) for sgn in (1, -1)]
        ks = [np.asarray(k, dtype=float) / np.hypot(*k) for k in ks]
        time_sign = -1 if st.conventions.signature[c.ti] == "-" else 1

        def timelike(v):
            q = gtt * v[1] ** 2 + 2 * gtr * v[0] * v[1] + grr * v[0] ** 2
            return time_sign * q > 1e-12

        k1, k2 = ks
        if timelike(k1 + k2):
            u, pair = k1 + k2, (k1, k2)
        elif timelike(k1 - k2):
            u, pair = k1 - k2, (k1, -k2)
        else:
            continue
        scale_u = np.hypot(*u)
        # Future: the timelike wedge with dt > 0 where t is a time (u_t != 0); elsewhere decided below.
        timed = abs(u[1]) > 1e-9 * scale_u
        if timed and u[1] < 0:
            pair = tuple(-k for k in pair)
        cones.append({"r": float(r0), "pair": pair, "timed": timed})
    # Where t is not a time (the wedge's axis lies along r) the orientation follows the neighbouring
    # static region: inside a black hole (static region further out) the future points to smaller r,
    # beyond a cosmological horizon (static region only further in) to larger r (common practice,
    # e.g. Griffiths and Podolsky 2009, Exact Space-Times, §3.1 and §9.1, recalled).
    timed_r = [x["r"] for x in cones if x["timed"]]
    for x in cones:
        pair = x.pop("pair")
        timed = x.pop("timed")
        if not timed:
            inwards = any(r > x["r"] for r in timed_r) or not timed_r
            axis = pair[0] + pair[1]
            if (axis[0] > 0) == inwards:
                pair = tuple(-k for k in pair)
        x["directions"] = [[float(k[0]), float(k[1])] for k in pair]
        both = pair[0][0] * pair[1][0] > 1e-12
        x["tipped"] = bool(both)
        x["towards"] = ("smaller" if pair[0][0] < 0 else "larger") if both else None
    if not cones:
        return None
    return {"cones": cones, "t_name": st.coordinates[c.ti].name, "t_tex": st.coordinates[c.ti].latex,
            "horizons": c.horizons, "throats": c.throats}


_BUILDERS = {"profiles": _profiles, "invariants": _invariants, "energy_conditions": _energy_conditions,
             "parameter_plane": _plane, "ctc": _ctc, "light_cones": _light_cones}
