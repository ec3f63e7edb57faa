"""What every figure is drawn from: the engine's expressions as numpy functions at the plotted values.

:func:`_context` gathers, once per drawing, the analysis, the radial grid, the
horizons or throats at the plotted values and the length unit of the axes.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import sympy as sp
from mpmath.libmp.libhyper import NoConvergence

from ...errors import DerivationError
from ...physics import analysis
from .settings import FigureSettings

_GRID = 400


def _np():
    import numpy

    return numpy


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


def _assump(c, name):
    """The assumptions of the parameter called ``name`` (for symbols rebuilt from names)."""
    for p in c.st.parameters:
        if p.name == name:
            return p.symbol.assumptions0
    return {}
