"""The report context: every derived result turned into plain data for the templates.

:func:`build_context` is the only place where sympy objects become strings;
templates receive only str/number/bool/list/dict (LaTeX already printed), and
the JSON report is the same data with expressions as texgen-parsable text.
"""
from __future__ import annotations

import itertools
import re
from dataclasses import dataclass
from typing import Any, Callable

import sympy as sp

from . import __version__
from .errors import BudgetExceeded, DerivationError
from .expressions import expression_to_text
from .latex import component_symbol, escape_text, estimate_width, to_latex, to_latex_lines
from .model import Spacetime

MAX_WIDTH = 62
"""Width (in the printer's width model) of one display line on the standalone page."""


@dataclass(frozen=True)
class ReportOptions:
    """Choices that change how a report looks, never what it says."""

    max_width: float = MAX_WIDTH
    section_level: int = 1
    """1: \\section, 0: \\chapter, 2: \\subsection (fragments for an existing paper)."""
    shorthands: bool = True
    """Name repeated sub-expressions (``\\mathcal{A}_{1}``, ...) once and print the names in the results."""


def _label(spacetime: Spacetime, name: str) -> str:
    """Equation labels namespaced by the spacetime id, so two appendices never clash."""
    ident = re.sub(r"[^A-Za-z0-9\-.]", "-", spacetime.id)
    return f"texgen:{ident}:{name}"


class ExpressionPrinter:
    """LaTeX and text for expressions of one spacetime, with its names and notation.

    Section builders of later stages (matter, claims) use it so that every
    section of a report prints symbols, derivatives and long lines the same way.
    """

    def __init__(self, spacetime: Spacetime, options: ReportOptions):
        self.st = spacetime
        self.options = options
        names: dict[Any, str] = {}
        names.update(spacetime.latex_names())
        for f in spacetime.functions:
            names[f.function] = f.latex
        time = next((c.symbol for c in spacetime.coordinates if c.name in ("t", "tau", "eta")), None)
        self.settings = {
            "symbol_names": names,
            "time_symbol": time,
            "function_signatures": {f.function: f.arguments for f in spacetime.functions},
        }
        self.index = {c.symbol: c.latex for c in spacetime.coordinates}
        self.coord_latex = [c.latex for c in spacetime.coordinates]
        self.coord_names = [c.name for c in spacetime.coordinates]
        self.shorthands = Shorthands()
        """Names :func:`equation` prints for repeated sub-expressions (none until :meth:`use_shorthands`)."""

    def use_shorthands(self, shorthands: "Shorthands") -> None:
        """Print ``shorthands``' names from now on (their LaTeX joins the symbol names)."""
        self.shorthands = shorthands
        self.settings["symbol_names"] = dict(self.settings["symbol_names"]) | shorthands.latex_names()

    def tex(self, expr: sp.Expr) -> str:
        return to_latex(expr, **self.settings)

    def lines(self, expr: sp.Expr, lead: str = "") -> list[str]:
        """Display lines; the first line has room for the left-hand side ``lead``.

        When a factor is too wide to break (a power of a long sum, a long
        prefactor), the numerator is expanded so that the lines break at its terms.
        """
        width = max(self.options.max_width - (estimate_width(lead) + 2 if lead else 0), 30)
        lines = to_latex_lines(expr, max_width=width, **self.settings)
        if max(estimate_width(line) for line in lines) <= width or not isinstance(expr, sp.Expr):
            return lines
        num, den = sp.fraction(sp.factor_terms(expr))
        expanded = sp.expand(num)
        if not isinstance(expanded, sp.Add):
            return lines
        alt = sp.Mul(sp.Pow(den, -1), expanded, evaluate=False) if den != 1 else expanded
        other = to_latex_lines(alt, max_width=width, **self.settings)
        if max(estimate_width(x) for x in other) < max(estimate_width(x) for x in lines):
            return other
        return lines

    def symbol(self, kernel: str, positions: str, idx: tuple[int, ...]) -> str:
        pairs = [("up" if p == "u" else "down", self.coord_latex[i]) for p, i in zip(positions, idx)]
        return component_symbol(kernel, pairs)

    def key(self, idx: tuple[int, ...]) -> str:
        return ",".join(self.coord_names[i] for i in idx)


def tidy_trig(expr: sp.Expr) -> sp.Expr:
    """Write (cos x − 1)(cos x + 1) as −sin²x and cos²x − 1 as −sin²x: how people write them."""
    if not isinstance(expr, sp.Basic) or not expr.has(sp.cos):
        return expr

    def fix_mul(e: sp.Mul) -> sp.Expr:
        factors = dict(e.as_powers_dict())
        for base in list(factors):
            if not (isinstance(base, sp.Add) and len(base.args) == 2 and sp.S.One in base.args or
                    isinstance(base, sp.Add) and len(base.args) == 2 and -sp.S.One in base.args):
                continue
            other = base - 1 if sp.S.One in base.args else base + 1
            if not isinstance(other, sp.cos):
                continue
            partner = other - 1 if sp.S.One in base.args else other + 1
            if partner in factors and factors.get(base) == factors[partner]:
                k = factors.pop(base)
                factors.pop(partner)
                factors[sp.sin(other.args[0])] = factors.get(sp.sin(other.args[0]), 0) + 2 * k
                factors[sp.S.NegativeOne] = factors.get(sp.S.NegativeOne, 0) + k
        return sp.Mul(*[b**k for b, k in factors.items()])

    def fix_add(e: sp.Add) -> sp.Expr:
        for c in e.atoms(sp.cos):
            x = c.args[0]
            for sign in (1, -1):
                if sp.expand(e - sign * (c**2 - 1)) == 0:
                    return -sign * sp.sin(x) ** 2
        return e

    out = expr.replace(lambda e: isinstance(e, sp.Mul), fix_mul)
    out = out.replace(lambda e: isinstance(e, sp.Add) and len(e.args) == 2, fix_add)
    if isinstance(out, sp.Add) and len(out.args) <= 4:
        fac = sp.factor_terms(out)
        if fac != out:
            fac2 = fac.replace(lambda e: isinstance(e, sp.Add) and len(e.args) == 2, fix_add)
            if sp.count_ops(fac2) < sp.count_ops(out):
                out = fac2
    return out


SHORTHAND_KERNELS = ("A", "B", "D", "E", "F", "H", "K", "L", "N", "P", "S", "U", "V", "W", "X", "Y", "Z")
"""Letters for shorthand names (``\\mathcal{A}_{1}``), in order of preference; C, G, R and T are left
out because the report's own tensors use them."""

MAX_SHORTHANDS = 40
"""Most names one report introduces; past that a list of names is no easier to read than the sums."""

_MAX_SUM_TERMS = 12
"""Largest sum (in terms) considered for a name: a longer one would not read as one thing."""

_MIN_WIDTH = 12.0
"""A sum of fewer than three terms is named only if it is at least this wide (the printer's units)."""


def shorthand_kernel(spacetime: Spacetime) -> str:
    r"""``\mathcal{X}`` for the first letter X that no declared name or LaTeX uses, so names never clash.

    A letter is taken when it stands alone in a declared name's LaTeX (``A``, ``\mathcal{A}``,
    ``A_{0}``), since a reader could not tell ``\mathcal{A}_{1}`` from ``A_{1}`` at a glance.
    """
    texts = [x.latex for group in (spacetime.coordinates, spacetime.parameters, spacetime.functions,
                                   spacetime.definitions) for x in group]
    texts += [x.name for group in (spacetime.coordinates, spacetime.parameters, spacetime.functions,
                                   spacetime.definitions) for x in group]
    for letter in SHORTHAND_KERNELS:
        alone = re.compile(r"(?<![A-Za-z\\])" + letter + r"(?![A-Za-z])")
        if not any(alone.search(t) for t in texts):
            return r"\mathcal{%s}" % letter
    return r"\mathfrak{s}"


@dataclass(frozen=True)
class Shorthand:
    """One name the report introduces: ``latex`` stands for ``definition``."""

    symbol: sp.Symbol
    latex: str
    definition: sp.Expr
    """The named expression, written with earlier shorthands' symbols where they occur in it."""
    uses: int
    """Occurrences in the results (and in later definitions) when it was chosen."""


class Shorthands:
    """Short names for sub-expressions that recur in a report's results; display only.

    :meth:`apply` rewrites an expression with the names (only the exact forms seen
    when the names were chosen are replaced), :meth:`expand` puts the definitions back.
    """

    def __init__(self, items: tuple[Shorthand, ...] = (), steps: tuple[dict, ...] = ()):
        self.items = items
        self._steps = steps

    def __bool__(self) -> bool:
        return bool(self.items)

    def apply(self, expr: Any) -> Any:
        if not self._steps or not isinstance(expr, sp.Basic):
            return expr
        for step in self._steps:
            expr = expr.xreplace(step)
        return expr

    def expand(self, expr: Any) -> Any:
        """``expr`` with every shorthand replaced by its definition (user definitions stay)."""
        for s in reversed(self.items):
            expr = expr.xreplace({s.symbol: s.definition})
        return expr

    def latex_names(self) -> dict[sp.Symbol, str]:
        return {s.symbol: s.latex for s in self.items}


def _sum_key(node: sp.Basic) -> tuple | None:
    """(key, factor) of a sum: equal keys are sums equal up to a rational factor, whatever their printed forms.

    ``node`` is ``factor`` times the primitive expanded sum in the key.
    """
    k = sp.expand(node)
    if not isinstance(k, sp.Add):
        return None
    content, prim = k.as_content_primitive()
    if prim.could_extract_minus_sign():
        content, prim = -content, -prim
    if not isinstance(prim, sp.Add):
        return None
    return ("sum", prim), content


def _node_info(node: sp.Basic) -> tuple | None:
    """(key, replace) for a node that may be named: a sum, or a power of a root of a sum.

    ``replace(name)`` is what the node becomes when its key gets ``name``; the
    third item is the expression the name stands for.
    """
    if isinstance(node, sp.Add):
        if len(node.args) > _MAX_SUM_TERMS:
            return None
        found = _sum_key(node)
        if found is None:
            return None
        key, factor = found
        return key, (lambda s, factor=factor: factor * s), node if factor == 1 else key[1]
    if (isinstance(node, sp.Pow) and isinstance(node.base, sp.Add) and node.exp.is_Rational
            and not node.exp.is_Integer and len(node.base.args) <= _MAX_SUM_TERMS):
        p, q = node.exp.p, node.exp.q
        key = ("root", sp.expand(node.base), q)
        return key, (lambda s, p=p: s ** p), sp.Pow(node.base, sp.Rational(1, q))
    return None


def _representative(variants: dict) -> sp.Expr:
    """The form a name is defined as: the first one printed as it stands (factor 1), else the expanded sum."""
    for node, got in variants.items():
        if got[2] is node:
            return node
    return next(iter(variants.values()))[2]


def _reading_order(expr: sp.Basic, wanted: set) -> list:
    """Symbols of ``wanted`` in ``expr`` in about the order a reader meets them on the page."""
    out: list = []

    def walk(e):
        if e in wanted:
            if e not in out:
                out.append(e)
            return
        if not e.free_symbols & wanted:
            return
        if isinstance(e, sp.Add):
            parts = e.as_ordered_terms()
        elif isinstance(e, sp.Mul):
            num, den = sp.fraction(e)
            parts = [*sp.Mul.make_args(num), *sp.Mul.make_args(den)]
        else:
            parts = e.args
        for a in parts:
            walk(a)

    if isinstance(expr, sp.Basic):
        walk(expr)
    return out


def find_shorthands(exprs: list, spacetime: Spacetime, settings: dict, *, max_width: float = MAX_WIDTH,
                    kernel: str | None = None) -> Shorthands:
    r"""Names for sub-expressions repeated across ``exprs`` (display forms, in document order).

    User definitions come first: a sum or root equal to one up to a rational factor
    prints as its symbol (and the numerator of ``f = 1 - 2M/r`` as ``r^2 f``). Then,
    one at a time, the candidate that shortens the document most is named: a sum (a
    factor, a base of a power, an argument) or a root of a sum, of at least three
    terms or :data:`_MIN_WIDTH` units, found in two results or three times, whose
    name saves a quarter line more width than its definition line costs. Sums are
    compared expanded, so two printed forms of one sum get one name. Names are
    numbered in order of first appearance, a name's parts before it.

    Parameters
    ----------
    exprs:
        The expressions the report displays.
    spacetime:
        Their spacetime (its definitions and names).
    settings:
        Printer settings (for widths).
    max_width:
        Line width; a definition wider than three lines is not named.
    kernel:
        LaTeX of the name's letter; by default :func:`shorthand_kernel`.
    """
    kernel = kernel or shorthand_kernel(spacetime)
    exprs = [e for e in exprs if isinstance(e, sp.Basic)]
    info: dict[sp.Basic, tuple | None] = {}

    def node_info(node):
        if node not in info:
            info[node] = _node_info(node)
        return info[node]

    # user definitions first: the same sum printed as the user's symbol
    seed: dict[tuple, Any] = {}
    for d in spacetime.definitions:
        e = d.expanded
        if isinstance(e, sp.Add):
            found = _sum_key(e)
            if found is not None:
                seed.setdefault(found[0], d.symbol / found[1])
            num, den = sp.fraction(sp.together(e))
            if den != 1 and isinstance(num, sp.Add) and den.is_polynomial() and len(sp.Add.make_args(den)) == 1:
                # f = 1 - 2M/r: the sum r^2 - 2Mr is r^2 f
                found = _sum_key(num)
                if found is not None:
                    seed.setdefault(found[0], d.symbol * den / found[1])
        elif isinstance(e, sp.Pow) and isinstance(e.base, sp.Add) and e.exp.is_Rational and e.exp.p == 1 \
                and e.exp.q > 1:
            seed.setdefault(("root", sp.expand(e.base), e.exp.q), d.symbol)
            found = _sum_key(e.base)  # the sum under the root: a power of the user's symbol
            if found is not None:
                seed.setdefault(found[0], d.symbol ** e.exp.q / found[1])
    steps: list[dict] = []
    if seed:
        step = {}
        for e in exprs:
            for node in sp.preorder_traversal(e):
                got = node_info(node)
                if got is not None and got[0] in seed:
                    step[node] = got[1](seed[got[0]])
        if step:
            steps.append(step)
            exprs = [e.xreplace(step) for e in exprs]

    names = dict(settings.get("symbol_names", {}))
    widths: dict[sp.Basic, float] = {}

    def width(node):
        if node not in widths:
            widths[node] = estimate_width(to_latex(node, **dict(settings, symbol_names=names)))
        return widths[node]

    chosen: list[tuple[sp.Symbol, int, int]] = []  # (symbol, index of its definition in exprs, uses)
    count_results = len(exprs)
    while len(chosen) < MAX_SHORTHANDS:
        occ: dict[tuple, int] = {}
        where: dict[tuple, set] = {}
        variants: dict[tuple, dict] = {}
        for i, e in enumerate(exprs):
            for node in sp.preorder_traversal(e):
                got = node_info(node)
                if got is None:
                    continue
                key = got[0]
                occ[key] = occ.get(key, 0) + 1
                where.setdefault(key, set()).add(i)
                variants.setdefault(key, {}).setdefault(node, got)
        name_tex = r"%s_{%d}" % (kernel, len(chosen) + 1)
        name_w = estimate_width(name_tex)
        best, best_saving = None, 0.0
        for key, k in occ.items():  # dict order: first appearance, so ties go to the earlier
            if k < 3 and len(where[key]) < 2:
                continue
            rep = _representative(variants[key])
            base = rep.base if isinstance(rep, sp.Pow) else rep
            w = width(rep)
            if (len(base.args) < 3 and w < _MIN_WIDTH) or w > 3 * max_width:
                continue
            if w > max_width / 2 and any(width(t) > max_width - 12 for t in sp.Add.make_args(base)):
                continue  # its definition could not be broken into lines
            saving = k * (w - name_w) - (name_w + 3 + w)
            if saving >= max_width / 4 and saving > best_saving:
                best, best_saving = key, saving
        if best is None:
            break
        sym = sp.Symbol("~%d" % (len(chosen) + 1))
        names[sym] = name_tex
        step = {node: got[1](sym) for node, got in variants[best].items()}
        rep = _representative(variants[best])
        exprs = [e.xreplace(step) for e in exprs]
        exprs.append(rep)
        steps.append(step)
        chosen.append((sym, len(exprs) - 1, occ[best]))
    if not chosen:
        return Shorthands((), tuple(steps))

    # numbering: first appearance in the results; a definition's own names before it
    definition = {sym: exprs[i] for sym, i, _ in chosen}
    uses = {sym: k for sym, _, k in chosen}
    syms = set(definition)
    order: list[sp.Symbol] = []

    def visit(sym, path=()):
        if sym in order or sym in path:
            return
        for dep in _reading_order(definition[sym], syms):
            visit(dep, path + (sym,))
        order.append(sym)

    for e in exprs[:count_results]:
        for sym in _reading_order(e, syms):
            visit(sym)
    for sym, _, _ in chosen:
        visit(sym)
    final = {old: sp.Symbol("~%03d" % (i + 1)) for i, old in enumerate(order)}
    steps.append(final)
    items = tuple(Shorthand(final[old], r"%s_{%d}" % (kernel, i + 1), definition[old].xreplace(final), uses[old])
                  for i, old in enumerate(order))
    return Shorthands(items, tuple(steps))


MAX_LINES = 24
"""Longest display printed in a report; longer results are in the JSON report only."""


def equation(p: ExpressionPrinter, lhs: str, expr: sp.Expr, *, text: bool = True, label: str | None = None,
             as_shown: bool = False) -> dict:
    """Plain data for one displayed equation ``lhs = expr`` (lines already broken).

    A result too long to be read on paper (more than :data:`MAX_LINES` lines, or a
    factor wider than the page that no break can split) is not typeset: the entry
    says so (``omitted``) and the JSON report carries the expression. The printer's
    shorthands replace the sub-expressions they name, unless ``as_shown`` (``expr``
    is printed exactly as given, e.g. a shorthand's own definition).
    """
    if not as_shown:
        expr = tidy_trig(expr)
    lines = p.lines(expr if as_shown else p.shorthands.apply(expr), lead=lhs)
    widest = max(estimate_width(line) for line in lines)
    out = {"lhs": lhs, "lines": lines, "latex": " ".join(lines), "multiline": len(lines) > 1, "omitted": ""}
    if len(lines) > MAX_LINES or widest > p.options.max_width * 1.1:
        terms = len(sp.Add.make_args(sp.expand(sp.fraction(sp.factor_terms(expr))[0]))) \
            if isinstance(expr, sp.Expr) else 0
        out.update(lines=[], latex="", multiline=False,
                   omitted=f"too long to typeset ({terms} terms in its numerator); it is in the JSON report")
    if label:
        out["label"] = label
    if text:
        out["text"] = expression_to_text(expr)
    return out


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
        A :class:`texgen.derive.Curvature` for it; stages not yet computed are computed here.
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


def _texts(items) -> dict[str, str]:
    return {key: expression_to_text(v) for key, v in items}


def build_results(spacetime: Spacetime, curvature, extra: dict | None = None) -> dict:
    """Machine-readable results: every derived quantity, keyed by coordinate names.

    Expressions are canonical (definitions expanded) and written as text that
    :func:`texgen.expressions.parse_expression` reads back exactly.
    """
    st, cv = spacetime, curvature
    n = st.dimension
    names = [c.name for c in st.coordinates]

    def key(idx):
        return ",".join(names[i] for i in idx)

    is_zero = cv.is_zero
    out: dict[str, Any] = {
        "generator": "texgen",
        "texgen_version": __version__,
        "format": 1,
        "spacetime": {
            "id": st.id, "title": st.title, "version": st.version, "source": st.source.rsplit("/", 1)[-1],
            "sha256": st.sha256,
            "coordinates": names,
            "parameters": {q.name: list(q.assumptions) for q in st.parameters},
            "functions": {f.name: [str(a) for a in f.arguments] for f in st.functions},
            "definitions": {d.name: expression_to_text(d.expression) for d in st.definitions},
        },
        "conventions": dict(cv.conventions),
        "metric": _texts((key((i, j)), st.metric[i, j]) for i in range(n) for j in range(i, n)
                         if st.metric[i, j] != 0),
    }
    wanted = set(st.derive) if st.derive else None
    missing = []

    def put(name: str, fn: Callable[[], Any]) -> None:
        if wanted is not None and name not in wanted and name not in ("ricci", "inverse"):
            return
        try:
            out.update(fn())
        except DerivationError as exc:
            missing.append({"stage": name, "reason": exc.message})

    put("inverse", lambda: {
        "inverse": _texts((key((i, j)), cv.inverse[i, j]) for i in range(n) for j in range(i, n)
                          if not is_zero(cv.inverse[i, j])),
        "determinant": expression_to_text(cv.determinant)})
    put("christoffel", lambda: {"christoffel": _texts((key(i), v) for i, v in cv.nonzero_christoffel())})
    put("riemann", lambda: {"riemann_down": _texts((key(i), v) for i, v in cv.independent_riemann())})
    put("ricci", lambda: {
        "ricci": _texts((key((i, j)), cv.ricci[i, j]) for i in range(n) for j in range(i, n)
                        if not is_zero(cv.ricci[i, j])),
        "ricci_scalar": expression_to_text(cv.ricci_scalar)})
    put("einstein", lambda: {
        "einstein": _texts((key((i, j)), cv.einstein[i, j]) for i in range(n) for j in range(i, n)
                           if not is_zero(cv.einstein[i, j])),
        "einstein_mixed": _texts((key((i, j)), cv.einstein_mixed[i, j]) for i in range(n) for j in range(n)
                                 if not is_zero(cv.einstein_mixed[i, j]))})
    if n >= 4:
        put("weyl", lambda: {"weyl": _texts(
            (key((a, b, c, d)), cv.weyl[a, b, c, d])
            for a, b in itertools.combinations(range(n), 2) for c, d in itertools.combinations(range(n), 2)
            if (a, b) <= (c, d) and not is_zero(cv.weyl[a, b, c, d]))})

    def invariants():
        inv = {"kretschmann": expression_to_text(cv.kretschmann),
               "ricci_squared": expression_to_text(cv.ricci_squared)}
        checks = {}
        if n >= 4:
            inv["weyl_squared"] = expression_to_text(cv.weyl_squared)
            checks["invariant_identity"] = bool(is_zero(cv.invariant_identity))
        return {"invariants": inv, "checks": checks}

    put("invariants", invariants)
    put("bianchi", lambda: {"checks": dict(out.get("checks", {}), bianchi=all(is_zero(x) for x in cv.bianchi))})
    if extra:
        out.update(extra)
    out["missing"] = missing
    return out
