r"""Tests for texgen.output.latex: notation, component symbols, escaping, and compiled output.

Where an expected string is plain sympy output (``\cos{\left(\theta \right)}``)
it is what sympy 1.14's own ``latex()`` prints for the same expression, and is
checked against ``sympy.latex`` directly where that matters.
"""
from __future__ import annotations

import os
import re
import shutil
import subprocess

import pytest
import sympy as sp

from texgen.errors import RenderError
from texgen.output.latex import TexgenLatexPrinter, component_symbol, escape_text, to_latex
from texgen.output.layout import estimate_width, to_latex_lines

t, r, theta, phi, x, y = sp.symbols("t r theta phi x y", real=True)
M, a, Q = sp.symbols("M a Q", positive=True)
r_0, r_s = sp.symbols("r_0 r_s", positive=True)
f = sp.Function("f")
h = sp.Function("h")
A = sp.Function("A")


def kerr_newman_kretschmann_numerator() -> sp.Expr:
    """Bracket of the Kerr-Newman Kretschmann scalar, K = 8 [...] / Sigma^6.

    Henry, R. C. (2000), "Kretschmann scalar for a Kerr-Newman black hole",
    ApJ 535, 350 (written from memory; its a = 0 limit is the Reissner-Nordstrom
    value 48 M^2/r^6 - 96 M Q^2/r^7 + 56 Q^4/r^8). Used here only as a long
    expression to typeset.
    """
    c = sp.cos(theta)
    return (6 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6)
            - 12 * M * Q**2 * r * (r**4 - 10 * a**2 * r**2 * c**2 + 5 * a**4 * c**4)
            + Q**4 * (7 * r**4 - 34 * a**2 * r**2 * c**2 + 7 * a**4 * c**4))


def kerr_newman_sigma() -> sp.Expr:
    return r**2 + a**2 * sp.cos(theta) ** 2


# -- plain printing ------------------------------------------------------------

@pytest.mark.parametrize(
    ("expr", "expected"),
    [
        (x**2, "x^{2}"),
        (theta, r"\theta"),
        (r_0, "r_{0}"),
        (sp.sin(theta) ** 2, r"\sin^{2}{\left(\theta \right)}"),
        (1 - 2 * M / r, r"- \frac{2 M}{r} + 1"),
        (sp.sqrt(r**2 + a**2), r"\sqrt{a^{2} + r^{2}}"),
    ],
)
def test_plain_expressions(expr, expected):
    assert to_latex(expr) == expected


@pytest.mark.parametrize("expr", [x**2, 1 - 2 * M / r, sp.sin(theta) ** 2 * r**2, sp.exp(-x) / (1 + y)])
def test_agrees_with_sympy_without_functions(expr):
    """Without undefined functions the notation is sympy's own."""
    assert to_latex(expr) == sp.latex(expr)


def test_functions_with_arguments_agree_with_sympy():
    expr = f(r) * h(r, theta) ** 2 + sp.sin(f(r))
    assert to_latex(expr, function_arguments=True) == sp.latex(expr)


def test_symbol_names_override():
    assert to_latex(1 - r_s / r, symbol_names={r_s: r"r_{\mathrm{s}}"}) == r"1 - \frac{r_{\mathrm{s}}}{r}"


def test_symbol_names_for_function():
    assert to_latex(f(r) ** 2, symbol_names={f: r"\mathcal{F}"}) == r"\mathcal{F}^{2}"


def test_unknown_setting_is_type_error():
    with pytest.raises(TypeError, match=r"^Unknown setting 'colour'\.$"):
        to_latex(x, colour="red")


@pytest.mark.parametrize(
    ("settings", "message"),
    [
        ({"derivative_style": "fluxion"},
         "derivative_style: Expected one of: 'auto', 'prime', 'dot', 'partial' but received: 'fluxion'"),
        ({"time_symbol": "t"}, "time_symbol: Expected a sympy Symbol but received: 't'"),
        ({"function_arguments": "yes"}, "function_arguments: Expected True or False but received: 'yes'"),
    ],
)
def test_bad_setting_values(settings, message):
    with pytest.raises(RenderError) as info:
        to_latex(x, **settings)
    assert str(info.value) == message


def test_printer_is_a_sympy_latex_printer():
    from sympy.printing.latex import LatexPrinter

    assert issubclass(TexgenLatexPrinter, LatexPrinter)
    assert TexgenLatexPrinter({"derivative_style": "prime"}).doprint(f(r).diff(r)) == "f'"


# -- functions and derivatives ------------------------------------------------------

@pytest.mark.parametrize(
    ("expr", "auto", "with_arguments"),
    [
        (f(r), "f", r"f{\left(r \right)}"),
        (f(r).diff(r), "f'", r"f'{\left(r \right)}"),
        (f(r).diff(r, 2), "f''", r"f''{\left(r \right)}"),
        (f(r).diff(r, 3), "f'''", r"f'''{\left(r \right)}"),
        (f(r).diff(r, 4), "f^{(4)}", r"f^{(4)}{\left(r \right)}"),
        (A(t).diff(t), r"\dot{A}", r"\dot{A}{\left(t \right)}"),
        (A(t).diff(t, 2), r"\ddot{A}", r"\ddot{A}{\left(t \right)}"),
        (A(t).diff(t, 3), r"\dddot{A}", r"\dddot{A}{\left(t \right)}"),
        (A(t).diff(t, 5), "A^{(5)}", r"A^{(5)}{\left(t \right)}"),
        (h(r, theta).diff(r), r"\partial_{r} h", r"\partial_{r} h{\left(r,\theta \right)}"),
        (h(r, theta).diff(r, theta), r"\partial_{r}\partial_{\theta} h",
         r"\partial_{r}\partial_{\theta} h{\left(r,\theta \right)}"),
        (h(r, theta).diff(r, 2), r"\partial_{r}^{2} h", r"\partial_{r}^{2} h{\left(r,\theta \right)}"),
        (f(r).diff(r) ** 2, "f'^{2}", r"\left(f'{\left(r \right)}\right)^{2}"),
        (f(r).diff(r, 4) ** 2, r"\left(f^{(4)}\right)^{2}", r"\left(f^{(4)}{\left(r \right)}\right)^{2}"),
        (A(t).diff(t) ** 2, r"\dot{A}^{2}", r"\left(\dot{A}{\left(t \right)}\right)^{2}"),
        (f(r) ** 2, "f^{2}", r"f^{2}{\left(r \right)}"),
        (1 / f(r).diff(r) ** 2, r"\frac{1}{f'^{2}}", r"\frac{1}{\left(f'{\left(r \right)}\right)^{2}}"),
        (sp.sqrt(f(r).diff(r)), r"\sqrt{f'}", r"\sqrt{f'{\left(r \right)}}"),
        (r**2 * A(t).diff(t) * f(r).diff(r), r"r^{2} \dot{A} f'",
         r"r^{2} \dot{A}{\left(t \right)} f'{\left(r \right)}"),
        (sp.exp(2 * f(r)) * f(r).diff(r, 2), r"e^{2 f} f''",
         r"e^{2 f{\left(r \right)}} f''{\left(r \right)}"),
    ],
)
def test_derivatives_auto(expr, auto, with_arguments):
    assert to_latex(expr, time_symbol=t) == auto
    assert to_latex(expr, time_symbol=t, function_arguments=True) == with_arguments


@pytest.mark.parametrize(
    ("style", "expected"),
    [
        ("auto", r"\dot{A} f'' + \frac{f'}{r}"),
        ("prime", r"A' f'' + \frac{f'}{r}"),
        ("dot", r"\dot{A} \ddot{f} + \frac{\dot{f}}{r}"),
        ("partial", r"\left(\partial_{t} A\right) \partial_{r}^{2} f + \frac{\partial_{r} f}{r}"),
    ],
)
def test_derivative_styles(style, expected):
    expr = A(t).diff(t) * f(r).diff(r, 2) + f(r).diff(r) / r
    assert to_latex(expr, derivative_style=style, time_symbol=t) == expected


def test_auto_without_time_symbol_uses_primes():
    assert to_latex(A(t).diff(t)) == "A'"


def test_partial_factor_in_product_is_bracketed():
    """\\partial_{r} h \\sin\\theta would read as the derivative of the product."""
    expr = h(r, theta).diff(r) * h(r, theta).diff(theta) * sp.sin(theta)
    assert to_latex(expr) == r"\sin{\left(\theta \right)} \left(\partial_{r} h\right) \partial_{\theta} h"


def test_derivative_at_a_point_shows_the_point():
    assert to_latex(f(r).diff(r).subs(r, 2 * M)) == r"f'{\left(2 M \right)}"
    # At a symbol, only a declared signature tells the point from the variable.
    assert to_latex(f(r).diff(r).subs(r, r_0)) == "f'"
    assert to_latex(f(r).diff(r).subs(r, r_0), function_signatures={f: (r,)}) == r"f'{\left(r_{0} \right)}"
    assert to_latex(f(2 * r).diff(r)) == r"2 f'{\left(2 r \right)}"


def test_function_at_other_arguments_shows_them():
    assert to_latex(f(r_0) + f(r)) == r"f + f"
    assert to_latex(f(2 * r)) == r"f{\left(2 r \right)}"
    signatures = {f: (r,)}
    assert to_latex(f(r_0) + f(r), function_signatures=signatures) == r"f + f{\left(r_{0} \right)}"
    assert to_latex(f(r_0).diff(r_0), function_signatures=signatures) == r"f'{\left(r_{0} \right)}"


def test_derivative_of_a_product_falls_back_to_sympy():
    expr = sp.Derivative(r**2 * f(r), r)
    assert to_latex(expr) == r"\frac{d}{d r} r^{2} f"
    assert to_latex(expr, function_arguments=True) == sp.latex(expr)


def test_name_with_superscript_keeps_primes_apart():
    assert to_latex(f(r).diff(r), symbol_names={f: "f^{*}"}) == "{f^{*}}'"


# -- component symbols ----------------------------------------------------------------

@pytest.mark.parametrize(
    ("kernel", "indices", "expected"),
    [
        (r"\Gamma", [("up", "t"), ("down", "t"), ("down", "r")], r"\Gamma^{t}{}_{t r}"),
        ("R", [("up", "t"), ("down", "r"), ("down", "t"), ("down", "r")], r"R^{t}{}_{r t r}"),
        ("R", [("down", "t"), ("down", "r"), ("down", "t"), ("down", "r")], r"R_{t r t r}"),
        ("G", [("up", "t"), ("down", "t")], r"G^{t}{}_{t}"),
        ("T", [("down", r"\theta"), ("up", r"\phi")], r"T_{\theta}{}^{\phi}"),
        ("g", [("up", "r"), ("up", r"\theta")], r"g^{r \theta}"),
        ("R", [], "R"),
    ],
)
def test_component_symbol(kernel, indices, expected):
    assert component_symbol(kernel, indices) == expected


@pytest.mark.parametrize(
    ("indices", "message"),
    [
        ([("over", "t")], "indices[0]: Expected one of: 'up', 'down' but received: 'over'"),
        ([("up", "t"), "r"], "indices[1]: Expected a (position, name) pair but received: 'r'"),
    ],
)
def test_component_symbol_errors(indices, message):
    with pytest.raises(RenderError) as info:
        component_symbol("R", indices)
    assert str(info.value) == message


# -- prose --------------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("a & b % c $ d # e _ f { g } h ~ i ^ j \\ k",
         r"a \& b \% c \$ d \# e \_ f \{ g \} h {\textasciitilde} i {\textasciicircum} j {\textbackslash} k"),
        (r"\input{x}", r"{\textbackslash}input\{x\}"),
        (r"\write18{rm}", r"{\textbackslash}write18\{rm\}"),
        (r"\catcode", r"{\textbackslash}catcode"),
        ("Müller, Léon, Łukasiewicz", r"M\"uller, L\'eon, {\L}ukasiewicz"),
        ("Kerr–Newman — charged", r"Kerr{\textendash}Newman {\textemdash} charged"),
        ("α β Ω", r"\ensuremath{\alpha} \ensuremath{\beta} \ensuremath{\Omega}"),
        ("<M>", r"\ensuremath{<}M\ensuremath{>}"),
        ("日", r"\ensuremath{\langle}\texttt{U+65E5}\ensuremath{\rangle}"),
        ("", ""),
    ],
)
def test_escape_text(text, expected):
    assert escape_text(text) == expected


def test_escape_text_rejects_non_text():
    with pytest.raises(RenderError) as info:
        escape_text(None)
    assert str(info.value) == "Expected text but received: None"


# -- compiled with pdflatex ------------------------------------------------------------------

def pdflatex_or_skip() -> str:
    exe = shutil.which("pdflatex")
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("pdflatex is required in CI (CI is set) but was not found on PATH")
        pytest.skip("pdflatex not found on PATH; install TeX Live to run the typesetting checks")
    return exe


PROSE = ["a & b % c $ d # e _ f { g } h ~ i ^ j \\ k", r"\input{x}", r"\write18{rm -rf x}",
         r"\catcode`\^^M=13", "Müller, Léon, Łukasiewicz, Kerr–Newman", "α β Ω <M> 日"]


@pytest.fixture(scope="module")
def typeset(tmp_path_factory):
    """Compile one document: broken equations, measured line widths, escaped prose."""
    exe = pdflatex_or_skip()
    numerator = sp.expand(kerr_newman_kretschmann_numerator())
    equations = [
        to_latex_lines(numerator, 60),
        to_latex_lines(numerator / kerr_newman_sigma() ** 6, 60),
        to_latex_lines(8 * kerr_newman_kretschmann_numerator() / kerr_newman_sigma() ** 6, 60),
    ]
    measured = [line for lines in equations for line in lines]
    body = []
    for lines in equations:
        body.append("\\begin{multline*}\n" + " \\\\\n".join(lines) + "\n\\end{multline*}")
    for i, line in enumerate(measured):
        body.append("\\setbox0\\hbox{$\\displaystyle %s$}\\typeout{WIDTH %d \\the\\wd0}" % (line, i))
    body += [escape_text(text) + "\\par" for text in PROSE]
    document = ("\\documentclass{article}\n\\usepackage[T1]{fontenc}\n\\usepackage{amsmath}\n"
                "\\begin{document}\n" + "\n".join(body) + "\n\\end{document}\n")
    work = tmp_path_factory.mktemp("pdflatex")
    (work / "doc.tex").write_text(document, encoding="utf-8")
    run = subprocess.run([exe, "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape", "doc.tex"],
                         cwd=work, capture_output=True, text=True, timeout=120)
    log = (work / "doc.log").read_text(encoding="latin-1")
    widths = {int(i): float(w) for i, w in re.findall(r"WIDTH (\d+) ([\d.]+)pt", log)}
    return {"run": run, "log": log, "dir": work, "lines": measured, "widths": widths}


def test_broken_lines_compile_without_overfull_boxes(typeset):
    assert typeset["run"].returncode == 0, typeset["log"][-2000:]
    assert "Overfull \\hbox" not in typeset["log"]
    assert "\n! " not in typeset["log"]


def test_width_model_tracks_pdflatex(typeset):
    """Estimated units times 5 pt against the box widths pdflatex measured."""
    widths = typeset["widths"]
    assert len(widths) == len(typeset["lines"])
    for i, line in enumerate(typeset["lines"]):
        measured_units = widths[i] / 5.0
        if measured_units < 20:  # short tails: the relative error of a few units is large
            continue
        assert 0.9 <= estimate_width(line) / measured_units <= 1.1, (line, measured_units)


def test_escaped_prose_is_printed_not_run(typeset):
    assert typeset["run"].returncode == 0
    # \input{x} would have stopped with "File `x.tex' not found"; \write18 is never reached.
    assert "x.tex" not in typeset["log"]
    assert "runsystem" not in typeset["log"]
    assert sorted(p.name for p in typeset["dir"].iterdir() if p.suffix not in (".aux", ".log")) == [
        "doc.pdf", "doc.tex"]
