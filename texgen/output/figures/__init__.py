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

import os
from dataclasses import dataclass
from pathlib import Path

from mpmath.libmp.libhyper import NoConvergence

from ...errors import DerivationError, RenderError, TexgenError
from ..render import write_atomic
from .captions import _caption
from .data import _BUILDERS
from .evaluate import _context
from .plot import _matplotlib, _plot, _render_bytes
from .settings import FIGURE_NAMES, FigureSettings, figure_settings

__all__ = ["Figure", "FIGURE_NAMES", "FigureSettings", "draw_figures", "report_section", "figure_settings"]


FORMATS = ("pdf", "png", "svg")


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


def draw_figures(spacetime, curvature, directory, stem, *, formats=("pdf", "png"), settings=None,
                 skipped: list | None = None, names: tuple[str, ...] | None = None) -> tuple[Figure, ...]:
    """Draw every figure that applies and write ``directory/{stem}-{name}.{ext}``.

    Parameters
    ----------
    spacetime:
        The frozen model; its ``figures`` section chooses values, ranges and figures.
    curvature:
        Its :class:`texgen.engine.Curvature`.
    directory, stem:
        Where the files go and the start of their names.
    formats:
        Any of ``pdf``, ``png``, ``svg``.
    settings:
        Keys of the ``figures`` section overriding the file's.
    names:
        The figures that may be drawn (default: all of :data:`FIGURE_NAMES`); the
        ``figures`` section chooses among them.
    skipped:
        If a list, a figure whose computation fails (a stage over its budget, a numerical
        error) is noted there as ``{"stage": "figures", "reason": ...}`` and the others are
        still drawn; otherwise the error is raised.

    Raises :class:`~texgen.errors.ConfigError` for a bad ``figures`` section and
    :class:`~texgen.errors.RenderError` when matplotlib is missing or a file cannot be written.
    """
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
        if names is not None and name not in names:
            continue
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
