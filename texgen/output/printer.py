"""The report's expression printer: one spacetime's names and notation, display lines, equations.

:class:`ExpressionPrinter` wraps :func:`~texgen.output.latex.to_latex` with the
file's symbol names and its shorthands; :func:`equation` is the plain data of one
displayed equation (lines already broken, or the note that it is too long to
typeset), the unit every report section is made of.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import sympy as sp

from ..spec.expressions import expression_to_text
from ..spec.model import Spacetime
from .latex import component_symbol, to_latex
from .layout import MAX_WIDTH, estimate_width, to_latex_lines
from .shorthands import Shorthands

__all__ = ["MAX_LINES", "MAX_WIDTH", "ExpressionPrinter", "ReportOptions", "equation", "label", "tidy_trig"]


@dataclass(frozen=True)
class ReportOptions:
    """Choices that change how a report looks, never what it says."""

    max_width: float = MAX_WIDTH
    section_level: int = 1
    """1: \\section, 0: \\chapter, 2: \\subsection (fragments for an existing paper)."""
    shorthands: bool = True
    """Name repeated sub-expressions (``\\mathcal{A}_{1}``, ...) once and print the names in the results."""


def label(spacetime: Spacetime, name: str) -> str:
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
