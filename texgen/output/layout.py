r"""Layout of displayed mathematics: a width model of LaTeX, and line breaking of long expressions.

Width model
-----------
:func:`estimate_width` measures LaTeX in *units*; one unit is about the width
of a digit in display math (0.5 em; 5 pt at 10 pt type).
The model walks the LaTeX source:

* a digit is 1 unit, a lowercase letter or lowercase Greek letter
  (``\theta``) 1.1, an uppercase letter 2 and an uppercase Greek letter 1.5;
* a binary operator (``+ - \pm \cdot \times``) is 2.5 with its spacing, a
  relation (``= < \leq``) 3;
* ``( ) [ ] |``, commas and primes are 0.8, 0.6 and 0.5;
* a superscript or subscript counts 0.7 of its contents, and a superscript and
  subscript on the same base count the wider of the two only;
* ``\frac{a}{b}`` is ``max(a, b) + 0.5``; ``\sqrt{a}`` is ``a + 1.5``;
* named operators (``\cos``, ``\log``) count their letters at 1 each; font,
  text and accent commands (``\mathrm``, ``\operatorname``, ``\dot``) count
  their argument; spacing commands count their width (``\,`` 0.3, ``\quad`` 2);
* ``\left.`` and ``\right.`` count 0, other delimiters 0.8, or 1.4 when they
  enclose a fraction;
* any other command counts 1.

The constants were fitted to box widths that pdflatex measures (Computer
Modern, 10 pt, display style): on long lines of curvature expressions the
estimate is within about 6 % of the measured width, either way. So 60 units
fit the 345 pt text width of a default 10 pt ``article`` page with room for
``multline``'s indentation.
"""
from __future__ import annotations

import re
from typing import Any

import sympy as sp

from ..errors import RenderError
from .latex import TexgenLatexPrinter, to_latex

__all__ = ["MAX_WIDTH", "estimate_width", "to_latex_lines"]

MAX_WIDTH = 62
"""Width (in the width model of :func:`estimate_width`) of one display line on the standalone page."""


# -- width model -------------------------------------------------------------

_TOKEN = re.compile(r"\\[A-Za-z]+\*?|\\.|\s+|.", re.DOTALL)

_GREEK_LOWER = {
    "alpha", "beta", "gamma", "delta", "epsilon", "varepsilon", "zeta", "eta", "theta",
    "vartheta", "iota", "kappa", "lambda", "mu", "nu", "xi", "pi", "varpi", "rho", "varrho",
    "sigma", "varsigma", "tau", "upsilon", "phi", "varphi", "chi", "psi", "omega", "ell",
    "partial", "hbar", "imath", "jmath",
}
_GREEK_UPPER = {"Gamma", "Delta", "Theta", "Lambda", "Xi", "Pi", "Sigma", "Upsilon", "Phi",
                "Psi", "Omega", "nabla", "infty"}
_BINARY = {"pm", "mp", "cdot", "times", "circ", "wedge", "otimes", "oplus", "ast", "star"}
_RELATION = {"leq", "geq", "le", "ge", "neq", "ne", "approx", "equiv", "sim", "simeq",
             "to", "rightarrow", "leftarrow", "mapsto", "propto", "ll", "gg"}
_ONE_ARGUMENT = {
    "mathrm", "mathit", "mathbf", "mathsf", "mathtt", "mathcal", "mathbb", "mathfrak",
    "boldsymbol", "operatorname", "text", "textrm", "textit", "textbf", "mbox",
    "dot", "ddot", "dddot", "ddddot", "hat", "bar", "tilde", "vec", "check", "breve",
    "widetilde", "widehat", "overline", "underline", "mathring", "substack",
    "ensuremath",
}
_SPACES = {",": 0.3, ":": 0.4, ";": 0.5, "!": -0.3, " ": 0.6, "quad": 2.0, "qquad": 4.0}
_NO_WIDTH = {"displaystyle", "textstyle", "limits", "nolimits", "nonumber", "notag"}
_DELIMITER_WIDTH = 0.8
_TALL_DELIMITER_WIDTH = 1.4
_SIGN_WIDTH = 2.5


class _Measure:
    """Recursive walk over LaTeX tokens implementing the width model above."""

    def __init__(self, text: str):
        self.tokens = _TOKEN.findall(text)
        self.pos = 0
        self._tall: list[bool] = []  # one entry per open \left: whether it is tall

    def _next(self) -> str | None:
        if self.pos >= len(self.tokens):
            return None
        tok = self.tokens[self.pos]
        self.pos += 1
        return tok

    def _peek(self) -> str | None:
        return self.tokens[self.pos] if self.pos < len(self.tokens) else None

    def _skip_space(self) -> None:
        while (tok := self._peek()) is not None and tok.isspace():
            self.pos += 1

    def argument(self) -> float:
        """Width of the next group ``{...}`` or single token."""
        self._skip_space()
        tok = self._next()
        if tok is None or tok == "}":
            return 0.0
        if tok == "{":
            return self.sequence()
        return self.atom(tok)

    def optional(self) -> float:
        """Width of an optional ``[...]`` argument, 0 if there is none."""
        self._skip_space()
        if self._peek() != "[":
            return 0.0
        self.pos += 1
        width = 0.0
        while (tok := self._next()) is not None and tok != "]":
            width += self.atom(tok)
        return width

    def sequence(self) -> float:
        """Width up to the closing ``}`` (or the end)."""
        total = 0.0
        last_script = None  # (kind, width) of a script directly before, for ^ and _ stacking
        while (tok := self._next()) is not None:
            if tok == "}":
                break
            if tok in ("^", "_"):
                w = 0.7 * self.argument()
                if last_script is not None and last_script[0] != tok:
                    total += max(0.0, w - last_script[1])
                    last_script = (tok, max(w, last_script[1]))
                else:
                    total += w
                    last_script = (tok, w)
                continue
            if tok.isspace():
                continue
            last_script = None
            total += self.atom(tok)
        return total

    def total(self) -> float:
        """Width of the whole text; a stray ``}`` does not end the measurement."""
        width = 0.0
        while self.pos < len(self.tokens):
            width += self.sequence()
        return width

    def _encloses_fraction(self) -> bool:
        """Whether the ``\\left`` just read encloses a fraction (a taller, wider delimiter)."""
        depth = 1
        for tok in self.tokens[self.pos:]:
            if tok == r"\left":
                depth += 1
            elif tok == r"\right":
                depth -= 1
                if depth == 0:
                    return False
            elif tok in (r"\frac", r"\dfrac"):
                return True
        return False

    def _delimiter(self, tall: bool) -> float:
        self._skip_space()
        delim = self._next() or "."
        if delim == ".":
            return 0.0
        return _TALL_DELIMITER_WIDTH if tall else _DELIMITER_WIDTH

    def atom(self, tok: str) -> float:
        if tok == "{":
            return self.sequence()
        if tok in ("+", "-", "*"):
            return 2.5
        if tok in ("=", "<", ">"):
            return 3.0
        if tok in ("(", ")", "[", "]", "|", "/"):
            return _DELIMITER_WIDTH
        if tok in (",", ";", ".", ":"):
            return 0.6
        if tok == "'":
            return 0.5
        if tok == "~":
            return 0.6
        if tok == "&" or tok.isspace():
            return 0.0
        if not tok.startswith("\\"):
            if tok.isdigit():
                return 1.0
            return 2.0 if tok.isupper() else 1.1
        name = tok[1:]
        if name in _SPACES:
            return _SPACES[name]
        if name == "\\":
            return 0.0
        if name in ("{", "}", "|"):
            return _DELIMITER_WIDTH
        if name == "left":
            tall = self._encloses_fraction()
            self._tall.append(tall)
            return self._delimiter(tall)
        if name == "right":
            return self._delimiter(self._tall.pop() if self._tall else False)
        if name in ("bigl", "bigr", "Bigl", "Bigr", "biggl", "biggr", "big", "Big"):
            return self._delimiter(False)
        if name in ("frac", "dfrac", "tfrac"):
            return max(self.argument(), self.argument()) + 0.5
        if name == "sqrt":
            index = self.optional()
            return self.argument() + 1.5 + 0.5 * index
        if name in _NO_WIDTH:
            return 0.0
        if name in _ONE_ARGUMENT:
            return self.argument()
        if name in _GREEK_LOWER:
            return 1.1
        if name in _GREEK_UPPER:
            return 1.5
        if name in _BINARY:
            return 2.5
        if name in _RELATION:
            return 3.0
        if name == "prime":
            return 0.5
        if name in _OPERATOR_NAMES:
            return float(len(name))
        return 1.0


_OPERATOR_NAMES = {
    "sin", "cos", "tan", "cot", "sec", "csc", "sinh", "cosh", "tanh", "coth", "arcsin",
    "arccos", "arctan", "log", "ln", "exp", "det", "min", "max", "lim", "sup", "inf", "arg",
    "deg", "dim", "ker", "gcd", "Pr",
}


def estimate_width(latex_or_expr: Any, **settings: Any) -> float:
    r"""Estimated visible width of LaTeX (or of an expression's LaTeX), in units.

    One unit is a lowercase italic letter; the model is described in the module
    docstring. The report compares it with a line length to decide whether an
    equation needs breaking.

    :param latex_or_expr: a LaTeX string, or a sympy expression printed with ``settings``.
    """
    text = latex_or_expr if isinstance(latex_or_expr, str) else to_latex(latex_or_expr, **settings)
    return round(_Measure(text).total(), 2)


# -- line breaking -----------------------------------------------------------

# Segments of a breakable expression: ("atom", tex) is printed as is;
# ("sep", "+" | "-") is a place where a line may break; ("open",) and
# ("close",) are a \left( ... \right) pair around a sum that may be broken.
_Segment = tuple


class _LineBreaker:
    """Cuts an expression into segments and packs them into lines."""

    def __init__(self, printer: TexgenLatexPrinter, max_width: float):
        self.printer = printer
        self.max_width = max_width

    def segments(self, expr: sp.Basic, lead: float = 0.0, trail: float = 0.0) -> list[_Segment]:
        """Segments of ``expr``; ``lead`` and ``trail`` are widths that share its first and last line."""
        if not isinstance(expr, sp.Add):
            return self.term(expr, lead, trail)
        out: list[_Segment] = []
        # The same term order and sign rule as sympy's _print_Add.
        terms = self.printer._as_ordered_terms(expr, order=None)
        for i, term in enumerate(terms):
            if i > 0:
                if term.could_extract_minus_sign():
                    out.append(("sep", "-"))
                    term = -term
                else:
                    out.append(("sep", "+"))
            # A later term may start a line of its own, after its sign only.
            term_lead = lead if i == 0 else _SIGN_WIDTH
            out += self.term(term, term_lead, trail if i == len(terms) - 1 else 0.0)
        return out

    def term(self, term: sp.Basic, lead: float, trail: float) -> list[_Segment]:
        tex = self.printer._print(term)
        if isinstance(term, sp.Basic) and self.printer._needs_add_brackets(term):
            tex = r"\left(%s\right)" % tex
        if lead + estimate_width(tex) + trail <= self.max_width or not isinstance(term, sp.Expr):
            return [("atom", tex)]
        sign = ""
        if isinstance(term, sp.Mul) and term.could_extract_minus_sign():
            sign, term = "- ", -term
        numer, denom = sp.fraction(term, exact=True)
        factors = list(sp.Mul.make_args(numer))
        sums = [f for f in factors if isinstance(f, sp.Add)]
        if not sums:
            return [("atom", tex)]
        widest = max(sums, key=lambda f: estimate_width(self.printer._print(f)))
        factors.remove(widest)
        # Built unevaluated: an evaluated 2*(x + y) would distribute the 2.
        rest = sp.Mul(*factors, evaluate=False) if len(factors) > 1 else (
            factors[0] if factors else sp.S.One)
        if denom != 1:
            rest = 1 / denom if rest == 1 else sp.Mul(rest, 1 / denom)
        prefix = sign + ("" if rest == 1 else self.printer._print(rest))
        out: list[_Segment] = [("atom", prefix)] if prefix else []
        inner_lead = lead + estimate_width(prefix) + _TALL_DELIMITER_WIDTH
        inner = self.segments(widest, inner_lead, trail + _TALL_DELIMITER_WIDTH)
        return out + [("open",)] + inner + [("close",)]

    def lines(self, segments: list[_Segment]) -> list[str]:
        # Chunks run from one break point to the next; a line takes whole chunks.
        chunks: list[list[_Segment]] = [[]]
        for seg in segments:
            if seg[0] == "sep":
                chunks.append([])
            chunks[-1].append(seg)
        lines: list[str] = []
        line, depth = "", 0
        for chunk in chunks:
            trial, trial_depth = self._render(line, depth, chunk)
            closed = trial + r"\right." * trial_depth
            if line.strip() and not line.endswith(r"\left.") and estimate_width(closed) > self.max_width:
                lines.append(line + r"\right." * depth)
                line = r"\left." * depth
                trial, trial_depth = self._render(line, depth, chunk)
            line, depth = trial, trial_depth
        lines.append(line + r"\right." * depth)
        return lines

    @staticmethod
    def _render(line: str, depth: int, chunk: list[_Segment]) -> tuple[str, int]:
        for seg in chunk:
            kind = seg[0]
            at_start = line == "" or line.endswith(r"\left.")
            if kind == "sep":
                line += ("%s " if at_start else " %s ") % seg[1]
            elif kind == "open":
                line += (r"\left(" if at_start or line.endswith(" ") else r" \left(")
                depth += 1
            elif kind == "close":
                line += r"\right)"
                depth -= 1
            else:
                line += seg[1]
        return line, depth


def to_latex_lines(expr: Any, max_width: float = 70, **settings: Any) -> list[str]:
    r"""``expr`` as LaTeX lines for a ``multline``/``align*``-like environment.

    Long sums break before a top-level ``+`` or ``-``; each continuation line
    starts with its sign. A term too long on its own is written as its other
    factors times ``\left( ... \right)`` around its widest sum, which then breaks
    inside; such lines close with ``\right.`` and reopen with ``\left.`` so every
    line is valid LaTeX on its own. Joined with ``\\`` the lines give the
    expression. A single unbreakable piece wider than ``max_width`` stays whole.

    :param expr: a sympy expression.
    :param max_width: line length in width-model units (see :func:`estimate_width`).
    :param settings: printer settings, as for :func:`to_latex`.
    """
    if not isinstance(max_width, (int, float)) or max_width <= 0:
        raise RenderError(f"max_width: Expected a positive number but received: {max_width!r}")
    printer = TexgenLatexPrinter(settings)
    whole = printer.doprint(expr)
    if estimate_width(whole) <= max_width or not isinstance(expr, sp.Expr):
        return [whole]
    breaker = _LineBreaker(printer, max_width)
    return breaker.lines(breaker.segments(sp.sympify(expr)))
