"""The report context: every derived curvature result turned into plain data for the templates.

:func:`build_context` is the place where the curvature's sympy objects become
strings; templates receive only str/number/bool/list/dict (LaTeX already printed).
Later stages add their own sections (:mod:`texgen.output.stages`); the JSON report
is built in :mod:`texgen.output.results`.
"""
from __future__ import annotations

import itertools
from typing import Any, Callable

import sympy as sp

from .._version import __version__
from ..errors import BudgetExceeded, DerivationError
from ..spec.expressions import expression_to_text
from ..spec.model import Spacetime
from .latex import escape_text, to_latex
from .layout import estimate_width, to_latex_lines
from .printer import MAX_LINES, ExpressionPrinter, ReportOptions, equation, label as _label, tidy_trig
from .shorthands import find_shorthands


def _line_element(p: ExpressionPrinter, st: Spacetime) -> dict:
    """ds² written term by term in coordinate order, as a relativist writes it."""
    g = st.metric_display
    n = st.dimension
    d = [sp.Symbol("d" + c.name) for c in st.coordinates]
    names = dict(p.settings["symbol_names"])
    for c, s in zip(st.coordinates, d):
        names[s] = r"\mathrm{d}" + (c.latex if len(c.latex) == 1 or c.latex.startswith("\\") else "{" + c.latex + "}")
    expr = sp.S.Zero
    terms = []
    for i in range(n):
        for j in range(i, n):
            if g[i, j] != 0:
                coeff = g[i, j] if i == j else 2 * g[i, j]
                terms.append(sp.Mul(coeff, d[i] * d[j], evaluate=False))
    expr = sp.Add(*terms, evaluate=False) if terms else sp.S.Zero
    settings = dict(p.settings, symbol_names=names, order="none")
    lines = to_latex_lines(expr, max_width=p.options.max_width - 4, **settings)
    return {"lhs": r"\mathrm{d}s^{2}", "lines": lines, "latex": " ".join(lines), "multiline": len(lines) > 1,
            "label": _label(st, "line-element")}


def _components(p: ExpressionPrinter, items, kernel: str, positions: str, *, text=True) -> list[dict]:
    out = []
    for idx, value in items:
        lhs = p.symbol(kernel, positions, idx)
        eq = equation(p, lhs, value, text=text)
        eq["key"] = p.key(idx)
        eq["short"] = not eq["multiline"] and not eq["omitted"] and estimate_width(eq["latex"]) < 40
        out.append(eq)
    return out


def _matrix(p: ExpressionPrinter, m: sp.MatrixBase) -> dict:
    entries = [[p.tex(m[i, j]) for j in range(m.cols)] for i in range(m.rows)]
    widest = max((estimate_width(e) for row in entries for e in row), default=0)
    fits = m.cols <= 5 and (widest + 2) * m.cols < p.options.max_width
    return {"rows": entries, "fits": fits}


def _nonzero_symmetric(m: sp.MatrixBase, is_zero: Callable[[sp.Expr], bool]) -> list:
    return [((i, j), m[i, j]) for i in range(m.rows) for j in range(i, m.cols) if not is_zero(m[i, j])]


_RIEMANN_TEX = (r"R^{a}{}_{bcd} = \partial_{c}\Gamma^{a}{}_{db} - \partial_{d}\Gamma^{a}{}_{cb}"
                r" + \Gamma^{a}{}_{ce}\Gamma^{e}{}_{db} - \Gamma^{a}{}_{de}\Gamma^{e}{}_{cb}")


def _conventions(st: Spacetime, cv) -> dict:
    """The conventions as the engine records them, plus LaTeX forms for the report."""
    conv = dict(cv.conventions)
    c = st.conventions
    conv["signature_latex"] = "(" + ", ".join(c.signature) + ")"
    conv["riemann_latex"] = _RIEMANN_TEX if c.riemann_sign > 0 else _RIEMANN_TEX.replace(
        "= ", r"= -\bigl(", 1) + r"\bigr)"
    conv["ricci_latex"] = r"R_{bd} = R^{a}{}_{bad}"
    lhs = ("G_{ab}" if c.riemann_sign > 0 else "-G_{ab}") + (" + " if c.metric_sign > 0 else " - ")
    kappa = r"8\pi" if c.units != "explicit" else r"\frac{8\pi G}{c^{4}}"
    conv["field_equations_latex"] = lhs + r"\Lambda g_{ab} = " + kappa + " T_{ab}"
    conv["units_text"] = ("geometrized units, $G = c = 1$" if c.units != "explicit"
                          else "explicit units, with Newton's constant $G$ and the speed of light $c$")
    return conv


def _range_tex(p: "ExpressionPrinter", rng, sym) -> str:
    r"""A declared range as a chain, ``0 < \theta < \pi``."""
    if rng is None:
        return ""
    out = ""
    if rng.lower is not None:
        out += p.tex(rng.lower) + (" < " if rng.lower_strict else r" \le ")
    out += p.tex(sym)
    if rng.upper is not None:
        out += (" < " if rng.upper_strict else r" \le ") + p.tex(rng.upper)
    return out


def build_context(spacetime: Spacetime, curvature, options: ReportOptions | None = None,
                  extra_sections: list[dict] | None = None, printer: ExpressionPrinter | None = None) -> dict:
    """Plain data for the report templates (and, with ``text`` fields, for JSON).

    Parameters
    ----------
    spacetime:
        The frozen model.
    curvature:
        A :class:`texgen.engine.Curvature` for it; stages not yet computed are computed here.
    options:
        Presentation choices.
    extra_sections:
        Sections later stages add (matter, energy conditions, structure, checks), already plain data.
    printer:
        The printer to use (a new one by default); it gets the report's shorthands
        (``printer.shorthands``), so a caller can see what the names stand for.
    """
    options = options or ReportOptions()
    st = spacetime
    p = printer or ExpressionPrinter(st, options)
    cv = curvature
    n = st.dimension
    wanted = set(st.derive) if st.derive else None
    missing: list[dict] = []

    def want(name: str) -> bool:
        return wanted is None or name in wanted

    def stage(name: str, fn: Callable[[], Any]) -> Any:
        try:
            return fn()
        except BudgetExceeded as exc:
            missing.append({"stage": name, "reason": exc.message})
        except DerivationError as exc:
            missing.append({"stage": name, "reason": exc.message})
        return None

    ctx: dict[str, Any] = {
        "texgen_version": __version__,
        "id": st.id,
        "title": st.title,
        "title_tex": escape_text(st.title),
        "version": st.version,
        "description": st.description,
        "description_tex": escape_text(st.description),
        "notes_tex": escape_text(st.notes) if st.notes else "",
        "notes": st.notes,
        "references": list(st.references),
        "references_tex": [escape_text(r) for r in st.references],
        "source_name": st.source.rsplit("/", 1)[-1],
        "sha256": st.sha256,
        "dimension": n,
        "label_prefix": _label(st, ""),
        "section_level": options.section_level,
        "conventions": _conventions(st, cv),
        "coordinates": [{"name": c.name, "latex": c.latex,
                         "range": c.range.text if c.range else "",
                         "range_tex": _range_tex(p, c.range, c.symbol),
                         "period_tex": p.tex(c.period) if c.period is not None else ""}
                        for c in st.coordinates],
        "parameters": [{"name": q.name, "latex": q.latex, "assumptions": list(q.assumptions),
                        "range_tex": _range_tex(p, q.range, q.symbol)}
                       for q in st.parameters],
        "functions": [{"name": f.name,
                       "latex": f.latex + "(" + ", ".join(p.index[a] for a in f.arguments) + ")"}
                      for f in st.functions],
        "definitions": [equation(p, d.latex, d.expression) | {"name": d.name} for d in st.definitions],
        "cosmological_constant_tex": p.tex(st.cosmological_constant) if st.cosmological_constant != 0 else "",
        "line_element": _line_element(p, st),
        "missing": missing,
        "sections": extra_sections or [],
    }

    is_zero = cv.is_zero
    # Results are gathered first and typeset after: the shorthands depend on all of them.
    shown: list[sp.Expr] = []
    later: list[Callable[[], None]] = []

    def components(key: str, items, kernel: str, positions: str) -> None:
        items = [(i, tidy_trig(v)) for i, v in items]
        shown.extend(v for _, v in items)
        later.append(lambda: ctx.__setitem__(key, _components(p, items, kernel, positions)))

    def single(key: str, lhs: str, expr: sp.Expr, extra: dict | None = None, into: list | None = None) -> None:
        expr = tidy_trig(expr)
        shown.append(expr)

        def put():
            eq = equation(p, lhs, expr) | (extra or {})
            if into is None:
                ctx[key] = eq
            else:
                into.append(eq)
        later.append(put)

    ctx["metric"] = _matrix(p, st.metric_display)
    components("metric_components", _nonzero_symmetric(st.metric_display, lambda e: e == 0), "g", "dd")
    if want("inverse"):
        inv = stage("inverse", lambda: cv.inverse)
        if inv is not None:
            disp = sp.ImmutableMatrix(inv.rows, inv.cols, [cv.display(e) for e in inv])
            ctx["inverse"] = _matrix(p, disp)
            components("inverse_components", _nonzero_symmetric(disp, is_zero), "g", "uu")
            single("determinant", r"\det g", cv.display(cv.determinant))
    if want("christoffel"):
        items = stage("christoffel", cv.nonzero_christoffel)
        if items is not None:
            components("christoffel", [(i, cv.display(v)) for i, v in items], r"\Gamma", "udd")
    if want("riemann"):
        items = stage("riemann", cv.independent_riemann)
        if items is not None:
            components("riemann", [(i, cv.display(v)) for i, v in items], "R", "dddd")
    if want("ricci") or want("einstein"):
        ric = stage("ricci", lambda: cv.ricci)
        if ric is not None:
            components("ricci", [(i, cv.display(v)) for i, v in _nonzero_symmetric(ric, is_zero)], "R", "dd")
            single("ricci_scalar", "R", cv.display(cv.ricci_scalar))
    if want("einstein"):
        ein = stage("einstein", lambda: cv.einstein)
        if ein is not None:
            components("einstein", [(i, cv.display(v)) for i, v in _nonzero_symmetric(ein, is_zero)], "G", "dd")
            mixed = cv.einstein_mixed
            components("einstein_mixed", [((i, j), cv.display(mixed[i, j])) for i in range(n) for j in range(n)
                                          if not is_zero(mixed[i, j])], "G", "ud")
    if want("weyl") and n >= 3:
        if n == 3:
            ctx["weyl_note"] = "In three dimensions the Weyl tensor vanishes identically."
            ctx["weyl"] = []
        else:
            weyl = stage("weyl", lambda: cv.weyl)
            if weyl is not None:
                items = [((a, b, c, d), weyl[a, b, c, d])
                         for a, b in itertools.combinations(range(n), 2)
                         for c, d in itertools.combinations(range(n), 2)
                         if (a, b) <= (c, d) and not is_zero(weyl[a, b, c, d])]
                components("weyl", [(i, cv.display(v)) for i, v in items], "C", "dddd")
    if want("invariants"):
        inv: list[dict] = []
        k = stage("invariants", lambda: cv.kretschmann)
        if k is not None:
            single("", r"R_{abcd}R^{abcd}", cv.display(k), {"name": "kretschmann", "title": "Kretschmann scalar"}, inv)
            single("", r"R_{ab}R^{ab}", cv.display(cv.ricci_squared),
                   {"name": "ricci_squared", "title": "Ricci square"}, inv)
            if n >= 4:
                single("", r"C_{abcd}C^{abcd}", cv.display(cv.weyl_squared),
                       {"name": "weyl_squared", "title": "Weyl square"}, inv)
                ident = cv.invariant_identity
                ctx["identity_holds"] = bool(is_zero(ident))
        ctx["invariants"] = inv
    if want("bianchi"):
        b = stage("bianchi", lambda: cv.bianchi)
        if b is not None:
            ctx["bianchi_holds"] = all(is_zero(x) for x in b)
    ctx["shorthands"] = []
    if options.shorthands:
        p.use_shorthands(find_shorthands(shown, st, p.settings, max_width=options.max_width))
        ctx["shorthands"] = [
            equation(p, s.latex, s.definition, text=False, label=_label(st, f"shorthand-{i}"), as_shown=True)
            | {"name": s.latex, "uses": s.uses, "text": expression_to_text(p.shorthands.expand(s.symbol))}
            for i, s in enumerate(p.shorthands.items, 1)]
    for put in later:
        put()
    if want("geodesics"):
        geo = stage("geodesics", lambda: cv.geodesic_equations)
        if geo is not None:
            # Velocities along the affine parameter are printed with dots.
            gs = dict(p.settings, time_symbol=getattr(cv, "affine_parameter", None))
            ctx["geodesics"] = []
            for eq in geo:
                # The acceleration first, as the equations are written on paper.
                acc = [t for t in sp.Add.make_args(eq.lhs) if isinstance(t, sp.Derivative)]
                rest = eq.lhs - acc[0] if acc else eq.lhs
                lines = to_latex_lines(p.shorthands.apply(rest), max_width=options.max_width - 8, **gs)
                if acc and rest != 0:
                    first = lines[0].lstrip()
                    sign = "" if first.startswith("-") else "+ "
                    lines[0] = to_latex(acc[0], **gs) + " " + sign + first
                elif acc:
                    lines = [to_latex(acc[0], **gs)]
                lines[-1] += " = 0"
                too_big = len(lines) > MAX_LINES or max(map(estimate_width, lines)) > options.max_width * 1.1
                ctx["geodesics"].append({
                    "latex": "" if too_big else " ".join(lines), "lines": [] if too_big else lines,
                    "omitted": too_big, "coordinate": p.coord_latex[len(ctx["geodesics"])]})
    return ctx
