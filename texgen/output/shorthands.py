"""Shorthands: short names for the sub-expressions that recur across a report's results (display only).

The file's own definitions are applied first (a sum equal to one prints as its
symbol); then, one at a time, the sum or root that shortens the document most gets
a name ``\\mathcal{A}_{1}``, ``\\mathcal{A}_{2}``, ...  The JSON results never use them.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import sympy as sp

from ..spec.model import Spacetime
from .latex import to_latex
from .layout import MAX_WIDTH, estimate_width


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
