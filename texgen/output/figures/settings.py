"""The ``figures`` section of a spacetime file, validated: values, function choices, range, figures, plane.

Every problem names its key path (``figures.values.M``); values not given are the
parameters' declared ``value``, else a point inside the declared range.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import sympy as sp

from ...errors import ConfigError, ConfigErrors, Location
from ...spec.expressions import parse_expression
from ...spec.schema import namespace


FIGURE_NAMES = ("profiles", "invariants", "energy_conditions", "parameter_plane", "ctc", "light_cones")
"""Every figure texgen can draw, in report order."""


_SETTING_KEYS = ("values", "functions", "radial_range", "draw", "parameter_plane")


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
