"""The frozen model of one spacetime: the only thing later stages receive.

The loader (:mod:`texgen.spec.loader`) and checks (:mod:`texgen.spec.schema`) build it;
:mod:`texgen.engine.curvature`, :mod:`texgen.physics` and :mod:`texgen.output` only read it.
Every field is immutable (tuples, ``ImmutableMatrix``, sympy expressions).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import sympy as sp


@dataclass(frozen=True)
class Range:
    """An interval ``lower (<|<=) symbol (<|<=) upper``; bounds may involve parameters."""

    lower: sp.Expr | None = None
    """Lower bound, or ``None`` for unbounded below."""
    lower_strict: bool = True
    """``True`` for ``<``, ``False`` for ``<=``."""
    upper: sp.Expr | None = None
    """Upper bound, or ``None`` for unbounded above."""
    upper_strict: bool = True
    """``True`` for ``<``, ``False`` for ``<=``."""
    text: str = ""
    """The range as written in the file, for display."""

    def relations(self, symbol: sp.Symbol) -> tuple[sp.Basic, ...]:
        """The range as sympy relations on ``symbol`` (for proofs and sampling)."""
        out: list[sp.Basic] = []
        if self.lower is not None:
            out.append(sp.StrictGreaterThan(symbol, self.lower, evaluate=False) if self.lower_strict
                       else sp.GreaterThan(symbol, self.lower, evaluate=False))
        if self.upper is not None:
            out.append(sp.StrictLessThan(symbol, self.upper, evaluate=False) if self.upper_strict
                       else sp.LessThan(symbol, self.upper, evaluate=False))
        return tuple(out)


@dataclass(frozen=True)
class Coordinate:
    """One coordinate, in the order the metric uses."""

    name: str
    """Name as written in the file (``theta``)."""
    symbol: sp.Symbol
    """Real sympy symbol; positive/negative when the range says so."""
    latex: str
    """LaTeX for the symbol (``\\theta``)."""
    range: Range | None = None
    """Declared range, if any."""
    period: sp.Expr | None = None
    """Period of an angular coordinate (``2*pi``), or ``None``."""


@dataclass(frozen=True)
class Parameter:
    """A constant of the spacetime (mass, spin, charge, ...)."""

    name: str
    symbol: sp.Symbol
    """Sympy symbol carrying the declared assumptions."""
    latex: str
    assumptions: tuple[str, ...] = ()
    """Assumption words as declared (``positive``, ``real``, ...)."""
    range: Range | None = None
    """Range relative to numbers or other parameters (``0 <= a < M``)."""
    value: sp.Expr | None = None
    """Representative value for figures and sampling, if declared."""


@dataclass(frozen=True)
class FunctionDecl:
    """A free function of some coordinates, such as ``f(r)`` or ``a(t)``."""

    name: str
    function: Any
    """The sympy undefined function class (``sympy.Function('f')``)."""
    arguments: tuple[sp.Symbol, ...]
    """Coordinate symbols it depends on, in order."""
    latex: str
    assumptions: tuple[str, ...] = ()

    @property
    def applied(self) -> sp.Expr:
        """The function applied to its arguments, ``f(r)``."""
        return self.function(*self.arguments)


@dataclass(frozen=True)
class Definition:
    """A named auxiliary expression (``Sigma = r^2 + a^2 cos^2 theta``)."""

    name: str
    symbol: sp.Symbol
    """Symbol standing for the definition in display forms."""
    latex: str
    expression: sp.Expr
    """The right-hand side as written (may use other definitions' symbols)."""
    expanded: sp.Expr
    """The right-hand side with every definition substituted."""


@dataclass(frozen=True)
class Conventions:
    """Sign and unit conventions; recorded in every result and report."""

    signature: str = "-+++"
    """One sign per coordinate, e.g. ``-+++`` or ``+---`` or ``++`` (Riemannian)."""
    riemann_sign: int = 1
    """+1: R^a_{bcd} = d_c G^a_{db} - ...  (MTW/Wald/Carroll); -1: the opposite sign."""
    units: str = "geometrized"
    """``geometrized`` (G = c = 1) or ``explicit`` (symbols G and c kept)."""
    G: sp.Symbol | None = None
    """Newton's constant symbol when units are explicit."""
    c: sp.Symbol | None = None
    """Speed of light symbol when units are explicit."""

    @property
    def metric_sign(self) -> int:
        """+1 for mostly-plus Lorentzian (or Riemannian), -1 for mostly-minus."""
        return -1 if self.signature.count("-") > self.signature.count("+") else 1

    @property
    def coupling(self) -> sp.Expr:
        """The constant kappa in G_ab + Lambda g_ab = kappa T_ab."""
        if self.units == "explicit" and self.G is not None and self.c is not None:
            return 8 * sp.pi * self.G / self.c**4
        return 8 * sp.pi


@dataclass(frozen=True)
class Section:
    """A reserved section of the file kept as plain located data for later stages."""

    key: str
    data: Any
    """Plain Python data (dict/list/str/number) as loaded."""
    line: int | None = None
    node: Any = None
    """The located :class:`texgen.spec.loader.Node`, for precise error positions."""


@dataclass(frozen=True)
class Spacetime:
    """One validated spacetime definition."""

    source: str
    """Path of the file it was loaded from (or ``<string>``)."""
    sha256: str
    """SHA-256 of the file's bytes."""
    id: str
    title: str
    version: str
    description: str
    references: tuple[str, ...]
    coordinates: tuple[Coordinate, ...]
    parameters: tuple[Parameter, ...]
    functions: tuple[FunctionDecl, ...]
    definitions: tuple[Definition, ...]
    metric: sp.ImmutableMatrix
    """Components g_ab with every definition expanded: what derivations use."""
    metric_display: sp.ImmutableMatrix
    """Components as written, definitions kept as symbols: what reports show."""
    conventions: Conventions
    cosmological_constant: sp.Expr = sp.S.Zero
    notes: str = ""
    family: str = ""
    changelog: tuple[tuple[str, str], ...] = ()
    """(version, text) pairs."""
    derive: tuple[str, ...] = ()
    """Quantities requested; empty means everything."""
    sections: tuple[Section, ...] = field(default_factory=tuple)
    """Reserved sections (claims, source, tetrad, structure, impose, relations, figures)."""

    @property
    def dimension(self) -> int:
        return len(self.coordinates)

    @property
    def coordinate_symbols(self) -> tuple[sp.Symbol, ...]:
        return tuple(c.symbol for c in self.coordinates)

    @property
    def parameter_symbols(self) -> tuple[sp.Symbol, ...]:
        return tuple(p.symbol for p in self.parameters)

    def section(self, key: str) -> Section | None:
        """The reserved section ``key``, or ``None`` if the file has none."""
        for s in self.sections:
            if s.key == key:
                return s
        return None

    def definition_substitutions(self) -> dict[sp.Symbol, sp.Expr]:
        """Map from each definition's symbol to its fully expanded expression."""
        return {d.symbol: d.expanded for d in self.definitions}

    def latex_names(self) -> dict[sp.Symbol, str]:
        """LaTeX for every declared symbol, for the printer."""
        out: dict[sp.Symbol, str] = {}
        for group in (self.coordinates, self.parameters, self.definitions):
            for item in group:
                out[item.symbol] = item.latex
        return out


def spacetime_from_matrix(
    coordinates: tuple[sp.Symbol, ...] | list[sp.Symbol],
    metric: sp.MatrixBase,
    *,
    parameters: tuple[sp.Symbol, ...] | list[sp.Symbol] = (),
    conventions: Conventions | None = None,
    cosmological_constant: sp.Expr = sp.S.Zero,
    id: str = "adhoc",
) -> Spacetime:
    """A minimal :class:`Spacetime` built in Python, for tests and programmatic use.

    Free functions are discovered from the metric; no ranges or definitions.
    """
    g = sp.ImmutableMatrix(metric)
    funcs = sorted({f.func for f in g.atoms(sp.core.function.AppliedUndef)}, key=str)
    fdecls = []
    for f in funcs:
        app = next(a for a in g.atoms(sp.core.function.AppliedUndef) if a.func == f)
        fdecls.append(FunctionDecl(str(f), f, tuple(app.args), sp.latex(f)))
    n = len(coordinates)
    conv = conventions or Conventions(signature="-" + "+" * (n - 1))
    return Spacetime(
        source="<python>", sha256="", id=id, title=id, version="0.0.0", description="",
        references=(),
        coordinates=tuple(Coordinate(str(c), c, sp.latex(c)) for c in coordinates),
        parameters=tuple(Parameter(str(p), p, sp.latex(p)) for p in parameters),
        functions=tuple(fdecls), definitions=(), metric=g, metric_display=g,
        conventions=conv, cosmological_constant=sp.sympify(cosmological_constant),
    )
