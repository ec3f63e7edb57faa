"""One derivation written out: the report text in each format, its figures, the PDF.

:class:`ReportWriter` holds one model and its curvature and writes any number of
reports of it; figures are drawn once per output folder and name, and shared by
the LaTeX and Markdown reports of that name.  :func:`build_report` is the
one-report form of the public API.
"""
from __future__ import annotations

import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

from ..errors import DerivationError, RenderError
from ..spec.model import Spacetime
from . import figures
from .context import build_context
from .printer import ExpressionPrinter, ReportOptions
from .render import FORMATS, dump_json, render, write_atomic
from .results import build_results
from .stages import stage_figures, stage_results, stage_sections

REPORT_TEMPLATES = {"tex": "report.tex.j2", "md": "report.md.j2"}


@dataclass(frozen=True)
class BuildOptions:
    """How ``build`` writes a report."""

    fmt: str | None = None
    """``tex``, ``md`` or ``json``; ``None`` takes it from the output's extension."""
    standalone: bool = True
    """A complete LaTeX document, or a fragment for ``\\input{}``."""
    section_level: int = 1
    template_dir: str | None = None
    force: bool = False
    figures: bool = True
    """Draw figures next to LaTeX and Markdown reports (needs matplotlib)."""
    shorthands: bool = True
    """Introduce short names for sub-expressions repeated across the results (display only)."""

    def report_options(self) -> ReportOptions:
        """The presentation choices the report context depends on."""
        return ReportOptions(section_level=self.section_level, shorthands=self.shorthands)


def report_format(output: str | Path, options: BuildOptions) -> str:
    """The format of a report: ``options.fmt``, else from the extension of ``output``."""
    out = Path(output)
    fmt = options.fmt or FORMATS.get(out.suffix)
    if fmt is None:
        raise RenderError(f"Cannot tell the report format from '{out.name}'",
                          hint="use an extension .tex, .md or .json, or --format")
    return fmt


class ReportWriter:
    """Reports of one derivation: text in any format, figures drawn once per folder and name.

    Parameters
    ----------
    spacetime:
        The model.
    curvature:
        Its curvature (any :class:`texgen.engine.Curvature`).
    """

    def __init__(self, spacetime: Spacetime, curvature):
        self.spacetime = spacetime
        self.curvature = curvature
        self._figures: dict[tuple[str, str], tuple[dict | None, list[dict]]] = {}

    def figures(self, report: str | Path) -> tuple[dict | None, list[dict]]:
        """Draw the figures that apply next to ``report``; return their section and what was skipped.

        Figures are named after the report (``kerr.tex`` gets ``kerr-profiles.pdf`` and
        ``kerr-profiles.png``), so LaTeX and Markdown reports of one entry share them.
        """
        report = Path(report)
        key = (str(report.parent.resolve()), report.stem)
        if key not in self._figures:
            skipped: list[dict] = []  # one figure that cannot be computed does not cost the others
            st, cv = self.spacetime, self.curvature
            try:
                drawn = figures.draw_figures(st, cv, report.parent, report.stem, formats=("pdf", "png"),
                                             skipped=skipped, names=stage_figures())
                self._figures[key] = (figures.report_section(st, cv, None, drawn), skipped)
            except (RenderError, DerivationError) as exc:
                self._figures[key] = (None, [{"stage": "figures", "reason": exc.message}])
        return self._figures[key]

    def text(self, fmt: str, options: BuildOptions | None = None, figures_section: dict | None = None,
             missing: list[dict] | None = None) -> str:
        """The report in format ``fmt`` as text.

        ``figures_section`` is the figures' section (see :meth:`figures`); ``missing``
        lists stages that were not carried out, for the report's "Not computed" section.
        """
        st, cv = self.spacetime, self.curvature
        options = options or BuildOptions()
        if fmt == "json":
            skipped: list[dict] = []
            data = build_results(st, cv, stage_results(st, cv, skipped))
            data["missing"].extend(skipped)
            return dump_json(data)
        ropts = options.report_options()
        skipped = []
        sections = stage_sections(st, cv, ExpressionPrinter(st, ropts), skipped)
        if figures_section:
            sections.append(figures_section)
        ctx = build_context(st, cv, ropts, extra_sections=sections)
        ctx["missing"].extend(skipped)
        ctx["missing"].extend(missing or [])
        ctx["standalone"] = options.standalone
        template = REPORT_TEMPLATES.get(fmt)
        if template is None:
            raise RenderError(f"Expected one of: 'tex', 'md', 'json' but received: '{fmt}'")
        return render(template, ctx, options.template_dir)

    def write(self, output: str | Path, options: BuildOptions | None = None) -> Path:
        """Write one report (atomically); LaTeX and Markdown reports get their figures next to them."""
        options = options or BuildOptions()
        out = Path(output)
        fmt = report_format(out, options)
        section, missing = None, []
        if fmt in ("tex", "md") and options.figures:
            section, missing = self.figures(out)
        return write_atomic(out, self.text(fmt, options, section, missing), force=options.force)


def build_report(spacetime: Spacetime, output: str | Path, options: BuildOptions | None = None,
                 curvature=None) -> Path:
    """Write one report of ``spacetime`` (derived here unless ``curvature`` is given)."""
    from ..engine import derive

    options = options or BuildOptions()
    report_format(output, options)  # a bad name fails before any derivation
    return ReportWriter(spacetime, curvature or derive(spacetime)).write(output, options)


def compile_pdf(tex: str | Path, *, runs: int = 2) -> Path:
    """Compile a standalone LaTeX report with pdflatex (non-stop); returns the PDF path."""
    exe = shutil.which("pdflatex")
    if exe is None:
        raise RenderError("pdflatex is not installed", hint="install a TeX distribution, e.g. texlive-latex-recommended")
    tex = Path(tex).resolve()
    for _ in range(runs):
        proc = subprocess.run([exe, "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape", tex.name],
                              cwd=tex.parent, stdin=subprocess.DEVNULL, capture_output=True, text=True,
                              errors="replace", timeout=300)
        if proc.returncode != 0:
            raise RenderError(f"pdflatex failed on {tex.name}; see {tex.with_suffix('.log')}")
    return tex.with_suffix(".pdf")
