r"""LaTeX output: a printer extending sympy's with texgen's notation, tensor index symbols, prose escaping.

Everything the report shows as mathematics goes through :func:`to_latex`, so the
notation (compact derivatives, declared symbol names) is decided here only.

The width model and line breaking of displayed equations are in :mod:`texgen.output.layout`.
"""
from __future__ import annotations

from typing import Any, Iterable

import sympy as sp
from pylatexenc.latexencode import UnicodeToLatexEncoder
from sympy.core.function import AppliedUndef
from sympy.printing.latex import LatexPrinter

from ..errors import RenderError

__all__ = ["TexgenLatexPrinter", "component_symbol", "escape_text", "to_latex"]

DERIVATIVE_STYLES = ("auto", "prime", "dot", "partial")

_DOTS = {1: r"\dot", 2: r"\ddot", 3: r"\dddot"}


class TexgenLatexPrinter(LatexPrinter):
    r"""sympy's LaTeX printer with texgen's notation for functions and their derivatives.

    Extra settings (besides all of sympy's ``latex()`` settings):

    :param symbol_names: LaTeX for symbols, and for undefined function classes
        (``{Function('f'): r"\mathcal{F}"}``), overriding the default names.
    :param derivative_style: ``"auto"`` (primes, or dots for ``time_symbol``),
        ``"prime"``, ``"dot"`` or ``"partial"``; functions of several variables
        always get partial derivatives, since a prime would not say which variable.
    :param time_symbol: the coordinate whose derivatives ``"auto"`` shows with dots.
    :param function_arguments: ``False`` prints ``f(r)`` as ``f`` when applied to
        its declared arguments; ``True`` always prints the arguments.
    :param function_signatures: declared arguments per function, as a mapping
        from the function class (or its name) to a tuple of symbols; a function
        applied to anything else shows its arguments. Without an entry, a
        function applied to distinct symbols counts as declared.
    """

    printmethod = "_latex"

    _default_settings: dict[str, Any] = {
        **LatexPrinter._default_settings,
        "derivative_style": "auto",
        "time_symbol": None,
        "function_arguments": False,
        "function_signatures": {},
    }

    def __init__(self, settings: dict[str, Any] | None = None):
        super().__init__(settings)
        style = self._settings["derivative_style"]
        if style not in DERIVATIVE_STYLES:
            choices = ", ".join(repr(s) for s in DERIVATIVE_STYLES)
            raise RenderError(f"derivative_style: Expected one of: {choices} but received: {style!r}")
        time = self._settings["time_symbol"]
        if time is not None and not isinstance(time, sp.Symbol):
            raise RenderError(f"time_symbol: Expected a sympy Symbol but received: {time!r}")
        if not isinstance(self._settings["function_arguments"], bool):
            raise RenderError("function_arguments: Expected True or False but received: "
                              f"{self._settings['function_arguments']!r}")

    # -- functions -----------------------------------------------------------

    def _function_name(self, func: Any) -> str:
        """LaTeX name of an undefined function class, honouring ``symbol_names``."""
        name = self._settings["symbol_names"].get(func)
        if name is not None:
            return name
        return self._hprint_Function(func.__name__)

    def _hides_arguments(self, applied: sp.Expr) -> bool:
        """Whether ``f(r)`` may print as ``f``: its arguments are the declared ones."""
        if self._settings["function_arguments"]:
            return False
        signatures = self._settings["function_signatures"]
        declared = signatures.get(applied.func, signatures.get(applied.func.__name__))
        if declared is not None:
            return tuple(applied.args) == tuple(declared)
        args = applied.args
        return all(isinstance(a, sp.Symbol) for a in args) and len(set(args)) == len(args)

    def _arguments(self, args: Iterable[sp.Basic]) -> str:
        # The same bracket form sympy uses for applied functions.
        return r"{\left(%s \right)}" % ",".join(self._print(a) for a in args)

    def _print_AppliedUndef(self, expr: sp.Expr, exp: str | None = None) -> str:
        name = self._function_name(expr.func)
        if exp is not None:
            name = r"%s^{%s}" % (self.parenthesize_super(name), exp)
        if self._hides_arguments(expr):
            return name
        return name + self._arguments(expr.args)

    # -- derivatives ---------------------------------------------------------

    @staticmethod
    def _compact_parts(expr: sp.Basic) -> tuple[sp.Expr, tuple, tuple | None] | None:
        """(function, variable counts, shown arguments) if ``expr`` gets compact notation.

        ``Derivative(f(r), r)`` qualifies, and ``Subs(Derivative(f(x), x), x, v)``
        (the derivative evaluated at a point) for a function of one variable.
        """
        if isinstance(expr, sp.Derivative):
            func = expr.expr
            if (isinstance(func, AppliedUndef)
                    and all(v in func.args for v, _ in expr.variable_count)
                    and all(isinstance(a, sp.Symbol) for a in func.args)):
                return func, tuple(expr.variable_count), None
            return None
        if isinstance(expr, sp.Subs):
            inner, old, new = expr.args
            if (isinstance(inner, sp.Derivative) and isinstance(inner.expr, AppliedUndef)
                    and len(inner.expr.args) == 1 and tuple(old) == tuple(inner.expr.args)
                    and len(inner.variable_count) == 1):
                return inner.expr, tuple(inner.variable_count), tuple(new)
        return None

    def _compact_derivative(self, func: sp.Expr, counts: tuple, shown: tuple | None,
                            exp: str | None = None) -> str:
        """Primes, dots or partial derivatives of ``func``, raised to ``exp`` if given."""
        name = self._function_name(func.func)
        if "^" in name:
            name = "{%s}" % name  # keeps primes and orders off the name's own superscript
        style = self._settings["derivative_style"]
        single = len(func.args) == 1
        if shown is not None:
            args_tex = self._arguments(shown)
        elif self._hides_arguments(func):
            args_tex = ""
        else:
            args_tex = self._arguments(func.args)
        if single and style != "partial":
            order = counts[0][1]
            variable = func.args[0]
            dots = style == "dot" or (style == "auto" and variable == self._settings["time_symbol"])
            simple = order <= 3
            if simple and dots:
                core = r"%s{%s}" % (_DOTS[order], name)
            elif simple:
                core = name + "'" * order
            else:
                core = r"%s^{(%d)}" % (name, order)
            tex = core + args_tex
            if exp is None:
                return tex
            if simple and not args_tex:
                # f'^{2} is TeX's own (f')^2; \dot{a}^{2} is unambiguous.
                return r"%s^{%s}" % (tex, exp)
            return r"\left(%s\right)^{%s}" % (tex, exp)
        parts = []
        for variable, count in counts:
            v = self._print(variable)
            parts.append(r"\partial_{%s}" % v if count == 1 else r"\partial_{%s}^{%d}" % (v, count))
        tex = "%s %s%s" % ("".join(parts), name, args_tex)
        if exp is None:
            return tex
        return r"\left(%s\right)^{%s}" % (tex, exp)

    def _print_Derivative(self, expr: sp.Derivative) -> str:
        parts = self._compact_parts(expr)
        if parts is None:
            return super()._print_Derivative(expr)
        return self._compact_derivative(*parts)

    def _print_Subs(self, expr: sp.Subs) -> str:
        parts = self._compact_parts(expr)
        if parts is None or (self._settings["derivative_style"] == "partial"
                             and any(isinstance(v, sp.Dummy) for v in expr.args[1])):
            # \partial_{x} needs a real variable name, not sympy's dummy.
            return super()._print_Subs(expr)
        return self._compact_derivative(*parts)

    def _is_partial(self, expr: sp.Basic) -> bool:
        """Whether ``expr`` prints as ``\\partial_{x} f`` (an operator in front of f)."""
        parts = self._compact_parts(expr)
        if parts is None:
            return False
        return len(parts[0].args) > 1 or self._settings["derivative_style"] == "partial"

    def _needs_mul_brackets(self, expr: sp.Basic, first: bool = False, last: bool = False) -> bool:
        # \partial_{r} f g would read as the derivative of f g.
        if not last and self._is_partial(expr):
            return True
        return super()._needs_mul_brackets(expr, first=first, last=last)

    def _print_Pow(self, expr: sp.Pow) -> str:
        parts = self._compact_parts(expr.base)
        e = expr.exp
        plain_power = not (e.is_Rational and (e.is_negative or (abs(e.p) == 1 and e.q != 1)))
        if parts is not None and plain_power and not self._settings["fold_frac_powers"]:
            return self._compact_derivative(*parts, exp=self._print(e))
        return super()._print_Pow(expr)


def to_latex(expr: Any, **settings: Any) -> str:
    r"""LaTeX for ``expr`` in texgen's notation, as sympy's ``latex()`` does.

    :param expr: a sympy expression (or anything sympy's printer accepts).
    :param settings: any setting of :class:`TexgenLatexPrinter`; unknown names
        raise ``TypeError`` as in sympy.
    """
    return TexgenLatexPrinter(settings).doprint(expr)



# -- index symbols -----------------------------------------------------------

def component_symbol(kernel: str, indices: list[tuple[str, str]] | tuple[tuple[str, str], ...]) -> str:
    r"""A tensor component with staggered indices, ``\Gamma^{t}{}_{t r}``.

    :param kernel: LaTeX of the kernel letter (``R``, ``\Gamma``).
    :param indices: ``(position, latex)`` pairs in order, position ``"up"`` or ``"down"``.
    """
    groups: list[tuple[str, list[str]]] = []
    for i, item in enumerate(indices):
        if not (isinstance(item, (tuple, list)) and len(item) == 2):
            raise RenderError(f"indices[{i}]: Expected a (position, name) pair but received: {item!r}")
        position, name = item
        if position not in ("up", "down"):
            raise RenderError(f"indices[{i}]: Expected one of: 'up', 'down' but received: {position!r}")
        if groups and groups[-1][0] == position:
            groups[-1][1].append(name)
        else:
            groups.append((position, [name]))
    # The empty group {} keeps a lower index from sitting under an upper one.
    return kernel + "{}".join(("^{%s}" if pos == "up" else "_{%s}") % " ".join(names)
                              for pos, names in groups)


# -- prose -------------------------------------------------------------------

_TEXT_ENCODER = UnicodeToLatexEncoder(
    non_ascii_only=False,
    # Characters without a LaTeX form show as their code point instead of
    # breaking the run; no log noise for them.
    unknown_char_policy="unihex",
    unknown_char_warning=False,
)


def escape_text(text: str) -> str:
    r"""Prose (titles, descriptions, references) made safe for LaTeX text mode.

    Special characters become their LaTeX forms and backslashes become
    ``\textbackslash``, so commands written in the text are printed, not run.

    :param text: plain Unicode text.
    """
    if not isinstance(text, str):
        raise RenderError(f"Expected text but received: {text!r}")
    return _TEXT_ENCODER.unicode_to_latex(text)
