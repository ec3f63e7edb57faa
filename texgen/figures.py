"""Figures for reports: radial profiles, invariants, energy conditions, parameter planes, CTCs, light cones.

:func:`draw_figures` evaluates the engine's canonical expressions numerically
(``sympy.lambdify`` to numpy) at the parameter values of the ``figures`` section
(else the declared ``value``, else mid-range) and writes each figure as PDF/PNG
with fixed metadata, so that the bytes depend on the physics only.
:func:`report_section` turns the figures into plain data for
``templates/sections/figures.*.j2``.

The ``figures`` section (all keys optional)::

    figures:
      values: {M: 1, a: 0.6, Q: 0.3}    # parameter values (extra names: constants for `functions`)
      functions: {b: b0^2/r, Phi: 0}    # choices for free functions, in the radial coordinate
      radial_range: [0.1, 10]
      draw: [profiles, invariants, energy_conditions, parameter_plane, ctc, light_cones]
      parameter_plane: {x: a, y: Q, scale: M, x_range: [0, 1.5], y_range: [-1.5, 1.5]}
"""
from __future__ import annotations

import io
import math
import os
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import sympy as sp
from mpmath.libmp.libhyper import NoConvergence

from .errors import ConfigError, ConfigErrors, DerivationError, Location, RenderError, TexgenError

__all__ = ["Figure", "FIGURE_NAMES", "draw_figures", "report_section", "figure_settings"]

FIGURE_NAMES = ("profiles", "invariants", "energy_conditions", "parameter_plane", "ctc", "light_cones")
"""Every figure texgen can draw, in report order."""

FORMATS = ("pdf", "png", "svg")

# Okabe & Ito (2008), "Color Universal Design": distinguishable with colour-vision deficiencies;
# each curve also gets its own line style so that greyscale prints stay readable.
PALETTE = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#0072B2", "#D55E00", "#CC79A7", "#F0E442")
STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 1)))

_GRID = 400
_PLANE = 121
_METADATA = {"pdf": {"CreationDate": None, "Producer": None, "Creator": None},
             "png": {"Software": None}, "svg": {"Date": None, "Creator": None}}
_SETTING_KEYS = ("values", "functions", "radial_range", "draw", "parameter_plane")


@dataclass(frozen=True)
class Figure:
    """One drawn figure."""

    name: str
    """One of :data:`FIGURE_NAMES`."""
    path_pdf: str | None
    """The PDF written, or None when that format was not asked for."""
    path_png: str | None
    """The PNG written, or None."""
    caption: str
    """Caption in plain text with ``$...$`` mathematics (Markdown form)."""
    data: dict
    """What was plotted (plain lists and floats): the figure's testable content."""


@dataclass(frozen=True)
class FigureSettings:
    """The validated ``figures`` section."""

    values: dict
    """Parameter symbol -> float, every parameter included."""
    constants: dict
    """Extra symbol -> float used only by :attr:`functions`."""
    functions: dict
    """Free function class -> ``sympy.Lambda`` of its arguments."""
    radial_range: tuple[float, float] | None
    draw: tuple[str, ...]
    plane: dict | None
    """``{"x": Symbol, "y": Symbol, "scale": Symbol | None, "x_range": (lo, hi), "y_range": (lo, hi)}``."""


# ------------------------------------------------------------------ settings
class _Errors:
    def __init__(self, st):
        self.st = st
        self.items: list[ConfigError] = []

    def add(self, message, node, path, fallback_line=None):
        line = node.line if node is not None else fallback_line
        col = node.column if node is not None else None
        self.items.append(ConfigError(message, Location(self.st.source, line, col, path)))


def _child(node, key):
    if node is None or not isinstance(node.value, (dict, list)):
        return None
    try:
        return node.value[key]
    except (KeyError, IndexError, TypeError):
        return None


def _number(x) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x):
        return None
    return float(x)


def _pair(x) -> tuple[float, float] | None:
    if not isinstance(x, list) or len(x) != 2:
        return None
    a, b = _number(x[0]), _number(x[1])
    if a is None or b is None or not a < b:
        return None
    return a, b


def _default_values(st, given: dict) -> dict:
    """Declared or given values, else a point inside the declared range (mid-range when bounded)."""
    out = dict(given)
    pending = [p for p in st.parameters if p.symbol not in out]
    for p in pending:
        if p.value is not None:
            out[p.symbol] = float(p.value)
    pending = [p for p in pending if p.symbol not in out]
    for _ in range(len(pending) + 1):
        for p in list(pending):
            lo = hi = None
            bounds_ok = True
            if p.range is not None:
                for which in ("lower", "upper"):
                    b = getattr(p.range, which)
                    if b is None:
                        continue
                    v = sp.sympify(b).xreplace({k: sp.Float(x) for k, x in out.items()})
                    if v.free_symbols:
                        bounds_ok = False
                        break
                    try:
                        fv = float(v)
                    except TypeError:
                        bounds_ok = False
                        break
                    lo, hi = (fv, hi) if which == "lower" else (lo, fv)
            if not bounds_ok:
                continue
            if lo is not None and hi is not None:
                x = (lo + hi) / 2
                if x == 0 and hi > 0:  # mid-range of a symmetric range is often a degenerate case (Q = 0)
                    x = hi / 2
            elif lo is not None:
                x = lo + 1.0
            elif hi is not None:
                x = hi - 1.0
            else:
                x = -1.0 if p.symbol.is_negative else 1.0
            out[p.symbol] = x
            pending.remove(p)
    for p in pending:  # cyclic bounds: the checks below see the point
        out[p.symbol] = 1.0
    return out


def figure_settings(spacetime, settings: dict | None = None) -> FigureSettings:
    """The ``figures`` section (updated by ``settings``) validated against the model.

    Raises :class:`~texgen.errors.ConfigError` naming the key path (``figures.values.M``).
    """
    from .expressions import parse_expression
    from .schema import namespace

    st = spacetime
    sec = st.section("figures")
    data = dict(sec.data) if sec is not None and isinstance(sec.data, dict) else {}
    node = sec.node if sec is not None else None
    line = sec.line if sec is not None else None
    if settings:
        data.update(settings)
    err = _Errors(st)
    for key in data:
        if key not in _SETTING_KEYS:
            err.add(f"Expected one of: {', '.join(repr(k) for k in _SETTING_KEYS)} but received: '{key}'",
                    _child(node, key), f"figures.{key}", line)
    params = {p.name: p.symbol for p in st.parameters}
    given: dict = {}
    constants: dict = {}
    raw_values = data.get("values", {})
    vnode = _child(node, "values")
    if not isinstance(raw_values, dict):
        err.add(f"Expected a mapping name -> number but received: {raw_values!r}", vnode, "figures.values", line)
        raw_values = {}
    for name, v in raw_values.items():
        x = _number(v)
        if x is None:
            err.add(f"Expected a number but received: {v!r}", _child(vnode, name), f"figures.values.{name}", line)
        elif name in params:
            given[params[name]] = x
        elif not str(name).isidentifier() or name in {c.name for c in st.coordinates}:
            err.add(f"Expected a parameter name but received: '{name}'", _child(vnode, name),
                    f"figures.values.{name}", line)
        else:
            constants[sp.Symbol(name, real=True)] = x
    functions: dict = {}
    raw_f = data.get("functions", {})
    fnode = _child(node, "functions")
    decl = {f.name: f for f in st.functions}
    used: set = set()
    if not isinstance(raw_f, dict):
        err.add(f"Expected a mapping function -> expression but received: {raw_f!r}", fnode,
                "figures.functions", line)
        raw_f = {}
    ns = namespace(st, {s.name: s for s in constants})
    for name, text in raw_f.items():
        path = f"figures.functions.{name}"
        if name not in decl:
            err.add(f"Expected one of: {', '.join(repr(k) for k in decl) or 'no free functions'} but received: "
                    f"'{name}'", _child(fnode, name), path, line)
            continue
        try:
            expr = parse_expression(text, ns)
        except ConfigError as exc:
            err.add(exc.message, _child(fnode, name), path, line)
            continue
        f = decl[name]
        bad = expr.free_symbols - set(f.arguments) - set(st.parameter_symbols) - set(constants)
        if bad or expr.atoms(sp.core.function.AppliedUndef):
            err.add(f"Expected an expression in {', '.join(map(str, f.arguments))} and parameters but received: "
                    f"'{text}'", _child(fnode, name), path, line)
            continue
        used |= expr.free_symbols
        functions[f.function] = sp.Lambda(f.arguments, expr)
    for s in constants:
        if s not in used:
            err.add(f"Expected a parameter name but received: '{s.name}'", _child(vnode, s.name),
                    f"figures.values.{s.name}", line)
    rr = None
    if "radial_range" in data:
        rr = _pair(data["radial_range"])
        if rr is None:
            err.add(f"Expected a list [lower, upper] of two increasing numbers but received: {data['radial_range']!r}",
                    _child(node, "radial_range"), "figures.radial_range", line)
    draw = FIGURE_NAMES
    if "draw" in data:
        raw = data["draw"]
        dnode = _child(node, "draw")
        if not isinstance(raw, list):
            err.add(f"Expected a list of figure names but received: {raw!r}", dnode, "figures.draw", line)
        else:
            for i, name in enumerate(raw):
                if name not in FIGURE_NAMES:
                    err.add(f"Expected one of: {', '.join(repr(k) for k in FIGURE_NAMES)} but received: '{name}'",
                            _child(dnode, i), f"figures.draw[{i}]", line)
            draw = tuple(n for n in FIGURE_NAMES if n in raw)
    plane = None
    if "parameter_plane" in data:
        raw = data["parameter_plane"]
        pnode = _child(node, "parameter_plane")
        if not isinstance(raw, dict):
            err.add(f"Expected a mapping with keys x, y, scale but received: {raw!r}", pnode,
                    "figures.parameter_plane", line)
        else:
            plane = {"scale": None, "x_range": None, "y_range": None}
            for key, v in raw.items():
                path = f"figures.parameter_plane.{key}"
                if key in ("x", "y", "scale"):
                    if v not in params:
                        err.add(f"Expected one of: {', '.join(repr(k) for k in params)} but received: '{v}'",
                                _child(pnode, key), path, line)
                    else:
                        plane[key] = params[v]
                elif key in ("x_range", "y_range"):
                    plane[key] = _pair(v)
                    if plane[key] is None:
                        err.add(f"Expected a list [lower, upper] of two increasing numbers but received: {v!r}",
                                _child(pnode, key), path, line)
                else:
                    err.add(f"Expected one of: 'x', 'y', 'scale', 'x_range', 'y_range' but received: '{key}'",
                            _child(pnode, key), path, line)
            for key in ("x", "y"):
                if key not in raw:
                    err.add(f"Expected a key '{key}' naming a parameter", pnode, "figures.parameter_plane", line)
            if not err.items and len({plane["x"], plane["y"], plane["scale"]} - {None}) < (3 if plane["scale"] else 2):
                err.add("Expected x, y and scale to name different parameters", pnode, "figures.parameter_plane", line)
    values = _default_values(st, given) if not err.items else {}
    for p in st.parameters:
        if p.symbol not in given or p.range is None:
            continue
        point = {k: sp.Float(v, 17) for k, v in values.items()}
        for rel in p.range.relations(p.symbol):
            if rel.xreplace(point) is not sp.true:
                err.add(f"Expected a value with {p.range.text} but received: {given[p.symbol]:g}",
                        _child(vnode, p.name), f"figures.values.{p.name}", line)
                break
    if len(err.items) == 1:
        raise err.items[0]
    if err.items:
        raise ConfigErrors(err.items)
    return FigureSettings(values=values, constants=constants, functions=functions,
                          radial_range=rr, draw=draw, plane=plane)


# ------------------------------------------------------------------ numerics
class _Numeric:
    """Turns the engine's exact expressions into numpy functions of the radial coordinate (and θ)."""

    def __init__(self, st, fs: FigureSettings, radial, theta):
        self.st = st
        self.fs = fs
        self.radial = radial
        self.theta = theta
        self._theta_arg = theta if theta is not None else sp.Dummy("theta")
        self.subs = {k: sp.Float(v, 17) for k, v in (fs.values | fs.constants).items()}

    def concrete(self, expr) -> sp.Expr | None:
        """``expr`` with function choices and values put in; None if anything else than r, θ is left."""
        if expr is None:
            return None
        e = sp.sympify(expr)
        if self.fs.functions and e.atoms(sp.core.function.AppliedUndef):
            e = e.replace(lambda x: isinstance(x, sp.core.function.AppliedUndef) and x.func in self.fs.functions,
                          lambda x: self.fs.functions[x.func](*x.args)).doit()
        e = e.xreplace(self.subs)
        if e.atoms(sp.core.function.AppliedUndef, sp.Derivative):
            return None
        if e.free_symbols - {self.radial, self.theta}:
            return None
        return e

    def function(self, expr):
        import numpy as np

        e = self.concrete(expr)
        if e is None:
            return None
        try:
            f = sp.lambdify((self.radial, self._theta_arg), e, modules="numpy")
            with np.errstate(all="ignore"):
                f(np.asarray([1.5], dtype=complex), 0.7)
        except (NameError, TypeError, ValueError, ArithmeticError, AttributeError):
            return None  # a function numpy does not know: the figure does not apply

        def call(r, th=math.pi / 2):
            with np.errstate(all="ignore"):
                out = np.asarray(f(np.asarray(r, dtype=complex), th), dtype=complex)
                out = np.broadcast_to(out, np.broadcast(np.asarray(r), np.asarray(th)).shape)
            real = out.real.copy()
            real[~np.isfinite(real) | (np.abs(out.imag) > 1e-9 * (1 + np.abs(out.real)))] = np.nan
            return real
        return call

    def radius(self, expr, th=math.pi / 2) -> float | None:
        """A radius (expression of the parameters, perhaps θ) at the plotted values."""
        e = self.concrete(expr)
        if e is None or self.radial in e.free_symbols:
            return None
        v = complex(sp.N(e.xreplace({self.theta: sp.pi / 2} if self.theta is not None else {}), 17))
        if abs(v.imag) > 1e-12 * (1 + abs(v.real)):
            return None
        return v.real


def _plain(values) -> list:
    return [None if (x is None or not math.isfinite(x)) else float(x) for x in values]


def _roots_numeric(num: _Numeric, h, lower: float | None, hi: float) -> list[float]:
    """Real zeros of the horizon function at the plotted values, outermost first."""
    e = num.concrete(h)
    if e is None:
        return []
    if num.theta is not None:
        e = e.xreplace({num.theta: sp.pi / 2})
    if e.free_symbols != {num.radial}:
        return []
    out = []
    try:
        poly = sp.Poly(sp.together(e).as_numer_denom()[0], num.radial)
        cands = [complex(z) for z in poly.nroots(n=17)]
        out = [z.real for z in cands if abs(z.imag) < 1e-10]
    except (sp.PolynomialError, ValueError, TypeError, ArithmeticError, NoConvergence):
        import numpy as np

        f = num.function(e)
        rs = np.linspace(lower if lower is not None else -hi, hi, 4001)
        ys = f(rs)
        for i in range(len(rs) - 1):
            if np.isfinite(ys[i]) and np.isfinite(ys[i + 1]) and ys[i] * ys[i + 1] < 0:
                try:
                    out.append(float(sp.nsolve(e, num.radial, (rs[i], rs[i + 1]), solver="bisect")))
                except (ValueError, TypeError, ZeroDivisionError, NoConvergence):
                    continue
    keep = sorted({round(x, 12) for x in out if lower is None or x > lower + 1e-12}, reverse=True)
    return [float(x) for x in keep]


# ------------------------------------------------------------------ context
@dataclass
class _Ctx:
    st: object
    cv: object
    an: object
    fs: FigureSettings
    num: _Numeric
    radial: object
    theta: object
    ti: int | None
    ri: int | None
    lower: float | None
    rgrid: list
    specials: list
    """Horizons / throats at the plotted values (outermost first)."""
    values_tex: str
    values_text: str
    horizon: bool
    """True when :attr:`specials` are horizons, False when they are throats (or absent)."""
    unit: float = 1.0
    """The value of the mass used as the unit of the axes (radii shown as r/M), else 1."""
    unit_tex: str = ""
    """The mass's LaTeX name when the axes are in its units, else empty."""

    @property
    def rlabel(self) -> str:
        """The radial axis: ``r/M`` in units of the mass, else ``r``."""
        rn = self.st.coordinates[self.ri].latex
        return f"{rn}/{self.unit_tex}" if self.unit_tex else rn

    def u(self, x: float) -> float:
        """A radius in the axes' units."""
        return x / self.unit

    @property
    def horizons(self) -> list:
        return list(self.specials) if self.horizon else []

    @property
    def throats(self) -> list:
        return [] if self.horizon else list(self.specials)

    @cached_property
    def horizon_names(self) -> list[str]:
        """Names of :attr:`horizons`: r_+, r_- ... from the outside in; an outermost horizon beyond
        which r = const is timelike no more (g^rr < 0 outside, as the cosmological horizon of
        Schwarzschild-de Sitter) is r_c."""
        horizons = self.horizons
        names = ["r_+", "r_-"] + [f"r_{k}" for k in range(3, len(horizons) + 1)]
        if not horizons:
            return []
        finv = self.num.function(self.cv.inverse[self.ri, self.ri])
        outer = max(horizons)
        if finv is not None:
            with _np().errstate(all="ignore"):
                beyond = float(finv([outer + 1e-3 * max(abs(outer), 1.0)])[0])
            if beyond < 0:
                return ["r_c"] + names[: len(horizons) - 1]
        return names[: len(horizons)]


def _values_text(st, fs, tex: bool) -> str:
    items = []
    for p in st.parameters:
        v = fs.values.get(p.symbol)
        if v is not None:
            items.append(f"${p.latex} = {v:g}$" if tex else f"{p.name} = {v:g}")
    for s, v in fs.constants.items():
        items.append(f"${sp.latex(s)} = {v:g}$" if tex else f"{s.name} = {v:g}")
    names = {f.function: f for f in st.functions}
    for func, lam in fs.functions.items():
        f = names[func]
        lhs = f"{f.latex}({', '.join(sp.latex(a) for a in f.arguments)})"
        items.append(f"${lhs} = {sp.latex(lam.expr)}$")
    return ", ".join(items)


def _context(st, cv, fs) -> _Ctx | None:
    import numpy as np

    from . import analysis

    try:
        an = analysis.analyse(st, cv)
    except DerivationError:
        an = None
    radial = getattr(an, "radial", None)
    if radial is None:
        radial = next((c.symbol for c in st.coordinates if c.name in ("r", "rho", "R")), None)
    if radial is None:
        return None
    theta = next((c.symbol for c in st.coordinates if c.name in ("theta", "vartheta")), None)
    sig = st.conventions.signature
    ti = None
    if "-" in sig and "+" in sig:
        odd = "+" if sig.count("+") == 1 else "-"
        ti = sig.index(odd)
    ri = st.coordinate_symbols.index(radial)
    lower = None
    for c in st.coordinates:
        if c.symbol == radial and c.range is not None and c.range.lower is not None:
            try:
                lower = float(sp.sympify(c.range.lower).xreplace({k: sp.Float(v) for k, v in fs.values.items()}))
            except TypeError:
                lower = None
    if lower is None and (radial.is_positive or radial.is_nonnegative):
        lower = 0.0
    num = _Numeric(st, fs, radial, theta)
    specials: list[float] = []
    if an is not None and an.horizons:
        specials = [x for x in (num.radius(h) for h in an.horizons) if x is not None and (lower is None or x > lower)]
    h = getattr(an, "horizon_function", None)
    if not specials and h is not None:
        specials = _roots_numeric(num, h, lower, 1e6)
    if not specials and ti is not None:
        specials = _null_radii(st, num, radial, theta, ri, lower)
    specials = sorted(set(specials), reverse=True)
    if fs.radial_range is not None:
        lo, hi = fs.radial_range
    else:
        scale = max([abs(x) for x in specials] + [abs(v) for v in fs.values.values() if v] + [1.0])
        hi = 5 * max(specials) if specials and max(specials) > 0 else 10 * scale
        lo = lower if lower is not None and lower > 0 else hi / 1000 if lower is not None else -hi
        if specials and lower is not None and lower >= 0 and an is not None and not an.horizons and min(specials) > 0 \
                and not (h is not None and _has_horizon(num, h, st, ti, ri, specials)):
            lo = min(specials)  # a throat: the manifold ends there in these coordinates
    grid = np.unique(np.concatenate([np.geomspace(lo, hi, _GRID) if lo > 0 else np.linspace(lo, hi, _GRID),
                                     [x for x in specials if lo <= x <= hi]]))
    unit, unit_tex = _mass_unit(st, fs, num, radial, ti, ri, grid)
    return _Ctx(st, cv, an, fs, num, radial, theta, ti, ri, lower, list(map(float, grid)), specials,
                _values_text(st, fs, True), _values_text(st, fs, False),
                _has_horizon(num, h, st, ti, ri, specials), unit, unit_tex)


def _mass_unit(st, fs, num, radial, ti, ri, grid) -> tuple[float, str]:
    """(value, LaTeX name) of a mass M that sets the length scale, else (1.0, "").

    M is the unit when the metric functions depend on r only through r/M: g_tt and g_rr are
    unchanged when r and every parameter are scaled together (all parameters lengths, G = c = 1),
    as for Schwarzschild, Reissner-Nordstrom and Kerr-Newman (common practice: radii in units of M).
    """
    mass = next((p for p in st.parameters if p.name in ("M", "m") and (fs.values.get(p.symbol) or 0) > 0), None)
    if mass is None or ti is None or fs.functions:
        return 1.0, ""
    lam = sp.Integer(2)
    scaled = {p.symbol: lam * p.symbol for p in st.parameters} | {radial: lam * radial}
    v = fs.values[mass.symbol]
    pts = [x for x in (1.3 * v, 3.7 * v, 11.0 * v) if grid[0] <= x <= grid[-1]] or [float(grid[len(grid) // 2])]
    for i in (ti, ri):
        g = sp.sympify(st.metric[i, i])
        f, f2 = num.function(g), num.function(g.xreplace(scaled))
        if f is None or f2 is None:
            return 1.0, ""
        a, b = f(pts), f2(pts)
        if not all(math.isfinite(x) and math.isfinite(y) and abs(x - y) <= 1e-9 * (1 + abs(x)) for x, y in zip(a, b)):
            return 1.0, ""
    return v, mass.latex


def _null_radii(st, num, radial, theta, ri, lower) -> list[float]:
    """Radii where the surfaces r = const are null (their induced metric is degenerate), outermost first.

    A horizon where g^rr stays finite: in isotropic Schwarzschild coordinates g^rr = psi^-4 vanishes
    nowhere, yet rho = M/2 (r = 2M) is the horizon, where g_tt and the induced metric degenerate
    (MTW 1973, Exercise 31.7 and eq. (31.22), recalled from memory).  Repeated zeros are taken once.
    """
    det = _induced_det(st, ri, theta)
    try:
        numer = sp.together(det).as_numer_denom()[0]
        factors = [f for f, _ in sp.factor_list(numer, radial)[1] if radial in f.free_symbols]
    except (sp.PolynomialError, ValueError, TypeError, NotImplementedError):
        return []
    out: set = set()
    for f in factors:
        out |= set(_roots_numeric(num, f, lower, 1e6))
    return sorted(out, reverse=True)


def _induced_det(st, ri, theta):
    """Determinant of the metric induced on r = const, on the equator: every other angle with a bounded
    numeric range at its mid-point (the extra polar angles of higher-dimensional spheres too)."""
    keep = [i for i in range(st.dimension) if i != ri]
    det = st.metric.extract(keep, keep).det(method="berkowitz")
    mid = {theta: sp.pi / 2} if theta is not None else {}
    for i in keep:
        c = st.coordinates[i]
        lo, hi = (c.range.lower, c.range.upper) if c.range is not None else (None, None)
        if c.symbol not in mid and lo is not None and hi is not None and sp.sympify(lo).is_number \
                and sp.sympify(hi).is_number:
            mid[c.symbol] = (sp.sympify(lo) + sp.sympify(hi)) / 2
    return det.xreplace(mid)


def _has_horizon(num, h, st, ti, ri, specials) -> bool:
    """True when the surfaces r = const are null at a zero of the horizon function (a horizon, not a throat).

    At a horizon the induced metric on r = const is degenerate; at a wormhole throat it is Lorentzian
    (common practice: Morris and Thorne 1988, Am. J. Phys. 56, 395, the throat is a timelike tube).
    """
    if ti is None or not specials:
        return False
    f = num.function(_induced_det(st, ri, num.theta))
    if f is None:
        return False
    for x in specials:
        at, near = f([x, x * 1.2 if x else 0.2])
        if math.isfinite(near) and (not math.isfinite(at) or abs(at) <= 1e-8 * abs(near)):
            return True
    return False


# ------------------------------------------------------------------ the figures
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


def _np():
    import numpy

    return numpy


# ------------------------------------------------------------------ drawing
def _matplotlib():
    try:
        import matplotlib
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure as MplFigure
    except ImportError:
        raise RenderError("figures need matplotlib: pip install 'texgen[figures]'") from None
    return matplotlib, MplFigure, FigureCanvasAgg


def _marks(ax, c: _Ctx, d: dict):
    u = c.u
    per = f"/{c.unit_tex}" if c.unit_tex else ""
    names = dict(zip(c.horizons, c.horizon_names))  # a figure may mark only some of them
    for x in d.get("horizons") or []:
        ax.axvline(u(x), color=PALETTE[0], linestyle=":", linewidth=1,
                   label=f"horizon ${names.get(x, 'r_h')}{per} = {u(x):.4g}$")
    for x in map(u, d.get("throats") or []):
        ax.axvline(x, color=PALETTE[3], linestyle="-.", linewidth=1, label=f"throat ${x:.4g}$")
    for x in map(u, d.get("ergosurfaces") or []):
        ax.axvline(x, color=PALETTE[6], linestyle=(0, (3, 1, 1, 1)), linewidth=1,
                   label=f"ergosurface (equator) ${x:.4g}$")
    if d.get("photon_sphere") is not None:
        ax.axvline(u(d["photon_sphere"]), color=PALETTE[2], linestyle="--", linewidth=1,
                   label=f"photon sphere ${u(d['photon_sphere']):.4g}$")


def _nan(values):
    return [math.nan if v is None else v for v in values]


def _plot(c: _Ctx, name: str, d: dict, fig):
    np = _np()
    ax = fig.add_subplot(1, 1, 1)
    rtex = f"${c.rlabel}$"
    rs_axis = [c.u(x) for x in d["r"]] if "r" in d and name != "ctc" else None
    if name == "profiles":
        for k, key in enumerate(("minus_g_tt", "g_rr", "one_over_g_inv_rr")):
            ax.plot(rs_axis, _nan(d[key]), color=PALETTE[(4, 5, 3)[k]], linestyle=STYLES[k], label=d["labels"][key])
        vals = [abs(v) for key in ("minus_g_tt", "one_over_g_inv_rr") for v in d[key] if v is not None]
        lim = max(2.0, float(np.percentile(vals, 90)) if vals else 2.0)
        ax.set_ylim(-lim, lim)
        ax.axhline(0, color="0.6", linewidth=0.6)
        _marks(ax, c, d)
        ax.set_xlabel(rtex)
        ax.set_ylabel("metric functions")
    elif name == "invariants":
        ax.semilogy(rs_axis, _nan(d["kretschmann_abs"]), color=PALETTE[5], linestyle=STYLES[0],
                    label=r"$|R_{abcd}R^{abcd}|$")
        _marks(ax, c, {"horizons": d["horizons"], "throats": d["throats"]})
        ax.set_xlabel(rtex)
        ax.set_ylabel(r"$|K|$")
    elif name == "energy_conditions":
        r = rs_axis
        ax.plot(r, _nan(d["rho"]), color=PALETTE[0], linestyle=STYLES[0], label=r"$\rho$")
        k = 1
        for pn, ys in zip(d["pressure_tex"], d["rho_plus_p"]):
            ax.plot(r, _nan(ys), color=PALETTE[k % 7], linestyle=STYLES[k % 6], label=rf"$\rho + p_{{{pn}}}$")
            k += 1
        ax.plot(r, _nan(d["rho_plus_sum_p"]), color=PALETTE[k % 7], linestyle=STYLES[k % 6],
                label=r"$\rho + \Sigma_i\, p_i$")
        k += 1
        for pn, ys in zip(d["pressure_tex"], d["rho_minus_abs_p"]):
            ax.plot(r, _nan(ys), color=PALETTE[k % 7], linestyle=STYLES[k % 6], linewidth=0.8,
                    label=rf"$\rho - |p_{{{pn}}}|$")
            k += 1
        for a, b in d["null_violated"]:
            ax.axvspan(c.u(a), c.u(b), facecolor="none", edgecolor="0.4", hatch="///", linewidth=0,
                       label="null condition violated" if (a, b) == tuple(d["null_violated"][0]) else None)
        ax.axhline(0, color="0.6", linewidth=0.6)
        ax.set_xlabel(rtex)
        ax.set_ylabel("energy-condition combinations")
    elif name == "parameter_plane":
        xs, ys = np.asarray(d["x"]), np.asarray(d["y"])
        counts = np.asarray(d["counts"])
        from matplotlib.colors import ListedColormap

        greys = ListedColormap(["#FFFFFF", "#E69F00", "#56B4E9"])
        ax.pcolormesh(xs, ys, counts, cmap=greys, vmin=0, vmax=2, shading="nearest")
        for k, hatch in ((0, "xx"), (1, "..")):
            if (counts == k).any() and not (counts == k).all():
                ax.contourf(xs, ys, (counts == k).astype(float), levels=[0.5, 1.5], colors="none", hatches=[hatch])
        disc = d.get("_disc")
        if disc is not None:
            f = sp.lambdify((sp.Symbol(d["x_name"], **_assump(c, d["x_name"])),
                             sp.Symbol(d["y_name"], **_assump(c, d["y_name"]))), disc, modules="numpy")
            X, Y = np.meshgrid(xs, ys)
            with np.errstate(all="ignore"):
                Z = np.broadcast_to(np.asarray(f(X, Y), dtype=float), X.shape)
            if np.nanmin(Z) < 0 < np.nanmax(Z):
                ax.contour(xs, ys, Z, levels=[0.0], colors=[PALETTE[0]], linewidths=1.5)
        if d.get("point"):
            ax.plot(*d["point"], marker="o", color=PALETTE[5], linestyle="none", label="plotted values")
        sc = d["scale_tex"]
        ax.set_xlabel(f"${d['x_tex']}/{sc}$" if sc else f"${d['x_tex']}$")
        ax.set_ylabel(f"${d['y_tex']}/{sc}$" if sc else f"${d['y_tex']}$")
        from matplotlib.patches import Patch

        handles = [Patch(facecolor=col, edgecolor="0.3", hatch=ht, label=lab) for col, ht, lab in
                   (("#56B4E9", "", "two horizons"), ("#E69F00", "..", "one horizon"),
                    ("#FFFFFF", "xx", "no horizon (naked singularity)"))
                   if lab in d["regions"]]
        from matplotlib.lines import Line2D

        if disc is not None:
            handles.append(Line2D([], [], color=PALETTE[0], label="extremal"))
        if d.get("point"):
            handles.append(Line2D([], [], color=PALETTE[5], marker="o", linestyle="none", label="plotted values"))
        ax.legend(handles=handles, fontsize="small", loc="upper right")
        return
    elif name == "ctc":
        rs, ths = np.asarray(d["r"]), np.asarray(d["theta"])
        R, T = np.meshgrid(rs, ths)
        Z = np.asarray(d["timelike"], dtype=float)
        X, Y = R * np.sin(T) / c.unit, R * np.cos(T) / c.unit
        ax.contourf(X, Y, Z, levels=[0.5, 1.5], colors=[PALETTE[6]], hatches=["//"], alpha=0.6)
        if Z.min() < 0.5 < Z.max():
            ax.contour(X, Y, Z, levels=[0.5], colors=[PALETTE[0]], linewidths=1)
        for k, rh in enumerate(d["horizons"]):
            ax.plot(c.u(rh) * np.sin(ths), c.u(rh) * np.cos(ths), color=PALETTE[0], linestyle=":", linewidth=1,
                    label=f"horizon ${c.u(rh):.4g}$")
        from matplotlib.patches import Patch

        handles = ax.get_legend_handles_labels()[0]
        handles.append(Patch(facecolor=PALETTE[6], hatch="//", alpha=0.6, label="closed timelike curves"))
        ax.legend(handles=handles, fontsize="small", loc="upper right")
        ax.set_aspect("equal")
        if c.theta is not None:
            unit = f"/{c.unit_tex}" if c.unit_tex else ""
            ax.set_xlabel(rf"${c.st.coordinates[c.ri].latex}\,\sin\theta{unit}$")
            ax.set_ylabel(rf"${c.st.coordinates[c.ri].latex}\,\cos\theta{unit}$")
        else:
            ax.set_xlabel(rtex)
        return
    elif name == "light_cones":
        span = c.u(d["cones"][-1]["r"] - d["cones"][0]["r"])
        size = span / (len(d["cones"]) * 1.3) if span > 0 else 0.3
        for k, cone in enumerate(d["cones"]):
            r0 = c.u(cone["r"])
            (a0, b0), (a1, b1) = cone["directions"]
            col = PALETTE[5] if cone["tipped"] else PALETTE[4]
            ax.fill([r0, r0 + size * a0, r0 + size * a1], [0, size * b0, size * b1], color=col, alpha=0.35,
                    hatch="//" if cone["tipped"] else None, linewidth=0)
            for a, b in cone["directions"]:
                ax.plot([r0, r0 + size * a], [0, size * b], color=col, linestyle="-", linewidth=1)
        _marks(ax, c, {"horizons": d["horizons"], "throats": d["throats"]})
        ax.set_xlabel(rtex)
        ax.set_ylabel(f"${d['t_tex']}/{c.unit_tex}$" if c.unit_tex else f"${d['t_tex']}$")
        ax.set_aspect("equal", adjustable="datalim")
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(fontsize="small", loc="best")


def _assump(c, name):
    for p in c.st.parameters:
        if p.name == name:
            return p.symbol.assumptions0
    return {}


_EQUATOR = r"\theta = \pi/2"
_NEC = r"\rho + p_i \geq 0"
_WEC = r"\rho \geq 0"
_SEC = r"\rho + \sum_i p_i \geq 0"
_DEC = r"\rho \geq |p_i|"


def _caption(c: _Ctx, name: str, d: dict, tex: bool) -> str:
    vals = c.values_tex  # math in both: Markdown renders $...$ as LaTeX does
    def m(text):
        return f"${text}$"

    rn = c.rlabel
    where = f" at {vals}" if vals else ""
    if name == "profiles":
        marks = []
        if d["horizons"]:
            marks.append("horizons at " + ", ".join(m(f"{rn} = {c.u(x):.4g}") for x in d["horizons"]))
        if d["ergosurfaces"]:
            marks.append("the ergosurface on the equator at " + ", ".join(m(f"{rn} = {c.u(x):.4g}") for x in d["ergosurfaces"]))
        if d["throats"]:
            marks.append("the throat at " + ", ".join(m(f"{rn} = {c.u(x):.4g}") for x in d["throats"]))
        if d["photon_sphere"] is not None:
            marks.append("the photon sphere at " + m(f"{rn} = {c.u(d['photon_sphere']):.4g}"))
        text = f"Metric functions {m(d['labels']['minus_g_tt'].strip('$'))}, {m(d['labels']['g_rr'].strip('$'))} " \
               f"and {m(d['labels']['one_over_g_inv_rr'].strip('$'))} against {m(rn)}{where}"
        text += ("; marked: " + "; ".join(marks) + "." if marks else ".")
        if c.theta is not None:
            text += f" Angular dependence evaluated on the equator {m(_EQUATOR)}."
        return text
    if name == "invariants":
        near = c.st.coordinates[c.ri].latex if c.lower == 0 else rn  # r -> 0 reads the same in any unit
        edge = m(near + r" \to " + f"{c.u(c.lower):g}") if c.lower is not None else ""
        text = f"The Kretschmann scalar {m('|R_{abcd}R^{abcd}|')} on a logarithmic scale against {m(rn)}{where}"
        if c.theta is not None:
            text += f", on the equator {m(_EQUATOR)}"
        text += "."
        if d["horizons"] and all(x is not None for x in d["kretschmann_at_special"]):
            text += " It stays finite at the horizons (no curvature singularity there)"
            text += f", and grows without bound as {edge}, a curvature singularity." if d["diverges_at_inner_edge"] else "."
        elif d["throats"] and all(x is not None for x in d["kretschmann_at_special"]):
            text += " It stays finite at the throat, where the metric component $g_{rr}$ blows up (a coordinate singularity)"
            text += ", and grows without bound towards the curvature singularity." if d["diverges_at_inner_edge"] else "."
        elif d["diverges_at_inner_edge"]:
            text += f" It grows without bound as {edge}, a curvature singularity."
        if d["finite_at_inner_edge"]:
            text += f" It has a finite limit as {edge}: no curvature singularity there."
        return text
    if name == "energy_conditions":
        text = (f"Energy-condition combinations in the static frame against {m(rn)}{where}: the null condition needs "
                f"{m(_NEC)}, the weak one also {m(_WEC)}, the strong one also "
                f"{m(_SEC)}, the dominant one {m(_DEC)}.")
        if d["null_violated"]:
            spans = ", ".join(m(f"{c.u(a):.4g} " + r"\leq " + f"{rn} " + r"\leq " + f"{c.u(b):.4g}") for a, b in d["null_violated"])
            text += f" Hatched: the null energy condition is violated for {spans}."
        else:
            text += " The null energy condition holds on the plotted range."
        return text
    if name == "parameter_plane":
        sc = d["scale_tex"]
        xs = f"{d['x_tex']}/{sc}" if sc else d["x_tex"]
        ys = f"{d['y_tex']}/{sc}" if sc else d["y_tex"]
        text = (f"Number of horizons (real zeros of the horizon function with {m(rn)} in the declared range) in the "
                f"{m(xs)}, {m(ys)} plane: " + ", ".join(d["regions"]) + ".")
        if d["_disc"] is not None:
            text += f" The solid line is the extremal case {m(d['extremal_tex'])}, where the two horizons merge."
        if d["point"]:
            text += f" The dot marks {vals}."
        return text
    if name == "ctc":
        a, b = d["r_extent"]
        killing = m(r"\partial_{" + d["coordinate_tex"] + "}")
        extent = m(f"{c.u(a):.3g} " + r"\lesssim " + f"{rn} " + r"\lesssim " + f"{c.u(b):.3g}")
        return (f"Hatched: where the Killing vector {killing} of the periodic "
                f"coordinate {m(d['coordinate_tex'])} is timelike, so that its orbits are closed timelike curves "
                f"({extent} on the grid){where}.")
    if name == "light_cones":
        runs: list = []
        for x in d["cones"]:
            if x["tipped"] and runs and runs[-1][2] == x["towards"] and runs[-1][3]:
                runs[-1][1] = x["r"]
            elif x["tipped"]:
                runs.append([x["r"], x["r"], x["towards"], True])
            if not x["tipped"] and runs:
                runs[-1][3] = False
        dash = "--" if tex else "–"
        plane = m(c.st.coordinates[c.ri].latex)
        text = (f"Radial light cones (future null directions) in the {m(d['t_tex'])}{dash}{plane} plane{where}.")
        if runs:
            parts = []
            for a, b, towards, _ in runs:
                span = m(f"{c.u(a):.3g} " + r"\leq " + f"{rn} " + r"\leq " + f"{c.u(b):.3g}") if a != b else m(f"{rn} = {c.u(a):.3g}")
                parts.append(f"at {span} both future null directions point to {towards} {m(rn)}")
            text += " Hatched cones have tipped over: " + "; ".join(parts) + "."
        else:
            text += " No cone tips over on the plotted range."
        return text
    return name


def _render_bytes(mpl, MplFigure, Canvas, draw, fmt: str) -> bytes:
    with mpl.rc_context():
        mpl.rcdefaults()
        mpl.rcParams.update({"svg.hashsalt": "texgen", "pdf.compression": 6, "path.simplify": True,
                             "axes.prop_cycle": mpl.cycler(color=list(PALETTE))})
        fig = MplFigure(figsize=(6.0, 4.0), dpi=100)
        Canvas(fig)
        draw(fig)
        fig.tight_layout()
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, metadata=_METADATA[fmt], dpi=150)
    return buf.getvalue()


def draw_figures(spacetime, curvature, directory, stem, *, formats=("pdf", "png"), settings=None,
                 skipped: list | None = None) -> tuple[Figure, ...]:
    """Draw every figure that applies and write ``directory/{stem}-{name}.{ext}``.

    Parameters
    ----------
    spacetime:
        The frozen model; its ``figures`` section chooses values, ranges and figures.
    curvature:
        Its :class:`texgen.derive.Curvature`.
    directory, stem:
        Where the files go and the start of their names.
    formats:
        Any of ``pdf``, ``png``, ``svg``.
    settings:
        Keys of the ``figures`` section overriding the file's.
    skipped:
        If a list, a figure whose computation fails (a stage over its budget, a numerical
        error) is noted there as ``{"stage": "figures", "reason": ...}`` and the others are
        still drawn; otherwise the error is raised.

    Raises :class:`~texgen.errors.ConfigError` for a bad ``figures`` section and
    :class:`~texgen.errors.RenderError` when matplotlib is missing or a file cannot be written.
    """
    from .render import write_atomic

    bad = [f for f in formats if f not in FORMATS]
    if bad:
        raise RenderError(f"Expected one of: {', '.join(repr(f) for f in FORMATS)} but received: '{bad[0]}'")
    fs = figure_settings(spacetime, settings)
    if not fs.draw:
        return ()
    mpl, MplFigure, Canvas = _matplotlib()
    c = _context(spacetime, curvature, fs)
    if c is None:
        return ()
    out = []
    for name in fs.draw:
        try:
            d = _BUILDERS[name](c)
            rendered = {} if d is None else {
                fmt: _render_bytes(mpl, MplFigure, Canvas, lambda fig: _plot(c, name, d, fig), fmt) for fmt in formats}
            captions = () if d is None else (_caption(c, name, d, True), _caption(c, name, d, False))
        except (DerivationError, ValueError, TypeError, ArithmeticError, NotImplementedError, NoConvergence) as exc:
            if skipped is None:
                raise
            why = exc.message if isinstance(exc, TexgenError) else f"{type(exc).__name__}: {exc}"
            skipped.append({"stage": "figures", "reason": f"the {name.replace('_', ' ')} figure: {why}"})
            continue
        if d is None:
            continue
        files: dict = {}
        for fmt, data in rendered.items():
            path = Path(directory) / f"{stem}-{name}.{fmt}"
            try:
                write_atomic(path, data, own_check=False)
            except OSError as exc:
                raise RenderError(f"Cannot write {path}: {exc.strerror or exc}") from None
            files[fmt] = str(path)
        plain = {k: v for k, v in d.items() if not k.startswith("_")}
        plain["values"] = {s.name: v for s, v in (fs.values | fs.constants).items()}
        plain["caption_tex"] = captions[0]
        out.append(Figure(name, files.get("pdf"), files.get("png"), captions[1], plain))
    return tuple(out)


def report_section(spacetime, curvature, printer, figures, *, relative_to=None) -> dict | None:
    """Plain data for ``templates/sections/figures.*.j2``, or None without figures.

    File names are relative to ``relative_to`` (the report's directory) when given, else bare names
    (figures written next to the report).
    """
    if not figures:
        return None

    def rel(p):
        if p is None:
            return ""
        if relative_to is None:
            return Path(p).name
        return Path(os.path.relpath(p, relative_to)).as_posix()

    items = []
    for f in figures:
        items.append({"name": f.name, "file_pdf": rel(f.path_pdf), "file_png": rel(f.path_png),
                      "caption_tex": f.data.get("caption_tex", f.caption), "caption_md": f.caption,
                      "label": f"fig:{spacetime.id}-{f.name}"})
    return {"template_tex": "sections/figures.tex.j2", "template_md": "sections/figures.md.j2", "figures": items}
