"""Tests for texgen.output.layout: the width model of LaTeX and line breaking of long expressions."""
from __future__ import annotations

import re

import pytest
import sympy as sp

from texgen.errors import RenderError
from texgen.output.layout import estimate_width, to_latex_lines
from texgen.output.latex import to_latex

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




# -- width model ------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("tex", "width"),
    [
        ("x", 1.1),
        ("M", 2.0),
        ("7", 1.0),
        (r"\theta", 1.1),
        (r"\Omega", 1.5),
        ("a + b", 4.7),
        ("a = b", 5.2),
        (r"\frac{a}{b}", 1.6),
        (r"\frac{1}{r^{2} + a^{2}}", 6.6),
        ("r^{2}", 1.8),
        ("x_{1}^{2}", 1.8),
        (r"\cos{\left(\theta \right)}", 5.7),
        (r"\left(\frac{1}{x}\right)", 4.4),
        (r"\left. x \right|_{0}", 2.6),
        (r"\sqrt{x}", 2.6),
        (r"\mathrm{d}t", 2.2),
        (r"\Gamma^{t}{}_{t r}", 3.81),
        ("f'", 1.6),
        (r"\, \quad", 2.3),
        ("", 0.0),
        ("x } y {", 2.2),  # malformed text is measured, not rejected
    ],
)
def test_estimate_width(tex, width):
    assert estimate_width(tex) == width


def test_estimate_width_of_expression_prints_it_first():
    expr = r**2 * f(r).diff(r) + 1
    assert estimate_width(expr) == estimate_width(to_latex(expr))
    assert estimate_width(expr, function_arguments=True) == estimate_width(
        to_latex(expr, function_arguments=True))


# -- line breaking ----------------------------------------------------------------------

def braces_balanced(tex: str) -> bool:
    depth = 0
    for tok in re.findall(r"\\.|[{}]", tex):
        if tok == "{":
            depth += 1
        elif tok == "}":
            depth -= 1
            if depth < 0:
                return False
    return depth == 0


def delimiters_balanced(tex: str) -> bool:
    depth = 0
    for tok in re.findall(r"\\left|\\right", tex):
        depth += 1 if tok == r"\left" else -1
        if depth < 0:
            return False
    return depth == 0


def without_line_markers(lines: list[str]) -> str:
    """The lines joined, with the \\right. / \\left. added at line ends removed."""
    out = []
    for line in lines:
        while line.startswith(r"\left."):
            line = line[len(r"\left."):]
        while line.endswith(r"\right."):
            line = line[: -len(r"\right.")]
        out.append(line)
    return " ".join(out)


def test_short_expression_is_one_line():
    expr = 1 - 2 * M / r
    assert to_latex_lines(expr) == [r"- \frac{2 M}{r} + 1"]


@pytest.mark.parametrize("max_width", [40, 60, 80])
def test_long_sum_breaks_at_top_level_signs(max_width):
    expr = sp.expand(kerr_newman_kretschmann_numerator())
    lines = to_latex_lines(expr, max_width)
    assert len(lines) > 1
    assert all(estimate_width(line) <= max_width for line in lines)
    assert all(line[:2] in ("+ ", "- ") for line in lines[1:])
    # Joined with spaces, the lines are exactly the one-line LaTeX: same terms, same signs.
    assert " ".join(lines) == to_latex(expr)
    assert all(braces_balanced(line) and delimiters_balanced(line) for line in lines)


def test_expanded_numerator_has_all_its_terms():
    expr = sp.expand(kerr_newman_kretschmann_numerator())
    lines = to_latex_lines(expr, 40)
    signs = sum(len(re.findall(r"(?:^| )[+-] ", line)) for line in lines)
    assert len(expr.args) == 10
    # The first term carries its own "-"; every other term has one sign.
    assert signs == 10


def test_fraction_with_long_numerator_becomes_bracket():
    numerator = sp.expand(kerr_newman_kretschmann_numerator())
    expr = numerator / kerr_newman_sigma() ** 6
    lines = to_latex_lines(expr, 60)
    prefix = r"\frac{1}{\left(a^{2} \cos^{2}{\left(\theta \right)} + r^{2}\right)^{6}} \left("
    assert lines[0].startswith(prefix)
    assert lines[0].endswith(r"\right.")
    assert all(line.startswith(r"\left.") for line in lines[1:])
    assert lines[-1].endswith(r"\right)")
    assert all(estimate_width(line) <= 60 for line in lines)
    assert all(braces_balanced(line) and delimiters_balanced(line) for line in lines)
    assert without_line_markers(lines) == prefix + to_latex(numerator) + r"\right)"


def test_nested_brackets_close_and_reopen_per_line():
    expr = 8 * kerr_newman_kretschmann_numerator() / kerr_newman_sigma() ** 6
    lines = to_latex_lines(expr, 30)
    assert lines[0] == (r"\frac{1}{\left(a^{2} \cos^{2}{\left(\theta \right)} + r^{2}\right)^{6}} "
                        r"\left(48 M^{2} \left(- a^{6} \cos^{6}{\left(\theta \right)}\right.\right.")
    assert lines[1].startswith(r"\left.\left.+ 15 a^{4} r^{2}")
    assert all(braces_balanced(line) and delimiters_balanced(line) for line in lines)
    # Every line but the first fits; the first holds the unbreakable 1/Sigma^6 prefix.
    assert estimate_width(lines[0]) == 32.3
    assert all(estimate_width(line) <= 30 for line in lines[1:])


def test_coefficient_is_not_distributed_when_breaking():
    expr = sp.Mul(2, x + y, evaluate=False)
    assert to_latex_lines(expr, 3) == [r"2 \left(x\right.", r"\left.+ y\right)"]


def test_negative_product_keeps_its_sign_in_front():
    expr = -2 * x * (x + y) * (x**9 + y**9 + x**5 * y**4 + x * y**8)
    assert to_latex_lines(expr, 20) == [
        r"- 2 x \left(x + y\right) \left(x^{9} + x^{5} y^{4}\right.",
        r"\left.+ x y^{8} + y^{9}\right)",
    ]


def test_term_without_sum_stays_whole():
    expr = sp.Mul(*[sp.Symbol(f"x_{i}") ** i for i in range(1, 30)])
    lines = to_latex_lines(expr, 20)
    assert lines == [to_latex(expr)]


def test_lines_use_printer_settings():
    expr = sum(sp.Symbol(f"c_{i}") * f(r).diff(r, i % 3 + 1) for i in range(12))
    lines = to_latex_lines(expr, 30, function_arguments=True)
    assert " ".join(lines) == to_latex(expr, function_arguments=True)
    assert all(r"{\left(r \right)}" in line for line in lines)


@pytest.mark.parametrize("max_width", [0, -5, "wide"])
def test_bad_max_width(max_width):
    with pytest.raises(RenderError) as info:
        to_latex_lines(x, max_width)
    assert str(info.value) == f"max_width: Expected a positive number but received: {max_width!r}"
