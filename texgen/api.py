"""The public Python API: what the command line does, callable from Python."""
from __future__ import annotations

import shutil
import subprocess
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Callable

from .errors import BudgetExceeded, RenderError
from .loader import load_file, load_text
from .model import Spacetime
from .schema import build_model

DEMO_FILE = "demo/veiled_black_hole.yaml"
"""The embedded default spacetime (an invented example) that ``texgen demo`` builds."""


def load_spacetime(path: str | Path) -> Spacetime:
    """Load and validate one spacetime file.

    Parameters
    ----------
    path:
        A YAML spacetime file.

    Raises :class:`~texgen.errors.ConfigError` (or ``ConfigErrors``) naming
    file, line, column and key path of every problem found.
    """
    return build_model(load_file(path))


def load_spacetime_text(text: str, source: str = "<string>") -> Spacetime:
    """Load and validate a spacetime given as YAML text."""
    return build_model(load_text(text, source))


def spacetime_files(paths: list[str | Path]) -> list[Path]:
    """Expand folders into the ``.yaml``/``.yml`` files below them, sorted; keep files as given."""
    out: list[Path] = []
    for p in map(Path, paths):
        if p.is_dir():
            out.extend(sorted(q for q in p.rglob("*") if q.suffix in (".yaml", ".yml") and q.is_file()))
        else:
            out.append(p)
    return out


def library_dir() -> Path:
    """The shipped library of spacetimes: package data when installed, metrics_yaml/ in a checkout."""
    packaged = Path(str(resources.files("texgen"))) / "library"
    if (packaged / DEMO_FILE).is_file():
        return packaged
    return Path(__file__).resolve().parent.parent / "metrics_yaml"


def derive(spacetime: Spacetime, *, budget=None, progress: Callable | None = None, jobs: int | None = None):
    """A lazy :class:`texgen.derive.Curvature` for ``spacetime``.

    Parameters
    ----------
    spacetime:
        The model.
    budget:
        Seconds per stage or a :class:`texgen.derive.Budget`; a stage over it raises
        :class:`~texgen.errors.BudgetExceeded`, and raises it again at once when asked again.
    progress:
        ``progress(stage, done, total)``, e.g. a :class:`texgen._progress.ProgressBar`.
    jobs:
        More than 1: compute the Riemann, Weyl and invariant stages now, in that
        many worker processes (see :mod:`texgen._parallel`).
    """
    from .derive import Curvature

    if budget is None and (jobs is None or jobs == 1):
        return Curvature(spacetime, budget=budget, progress=progress)
    from ._parallel import HeavyCurvature

    cv = HeavyCurvature(spacetime, budget=budget, progress=progress)
    if jobs is not None:
        cv.compute_parallel(jobs)
    return cv


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


SECTION_MODULES = ("texgen.analysis", "texgen.claims")
"""Later stages that add a report section: each has ``report_section`` and ``results``."""


def _stage_modules() -> list:
    import importlib

    mods = []
    for name in SECTION_MODULES:
        try:
            mods.append(importlib.import_module(name))
        except ModuleNotFoundError as exc:
            if exc.name != name:
                raise
    return mods


def extra_sections(spacetime: Spacetime, curvature, printer, missing: list[dict] | None = None) -> list[dict]:
    """Plain-data sections (matter, energy conditions, structure, checks) for the templates.

    Each stage module's ``report_section(spacetime, curvature, printer)`` returns a
    dict with ``template_tex`` and ``template_md`` (templates under templates/sections/)
    and its data, or ``None`` when it has nothing to say for this spacetime.  With a
    ``missing`` list, a stage over its budget is noted there instead of raised.
    """
    out = []
    for mod in _stage_modules():
        try:
            section = mod.report_section(spacetime, curvature, printer)
        except BudgetExceeded as exc:
            if missing is None:
                raise
            missing.append({"stage": mod.__name__.rsplit(".", 1)[-1], "reason": exc.message})
            continue
        if section:
            out.append(section)
    return out


def extra_results(spacetime: Spacetime, curvature, missing: list[dict] | None = None) -> dict:
    """JSON-ready results of the later stages, keyed by stage (``matter``, ``claims``, ...)."""
    out: dict = {}
    for mod in _stage_modules():
        try:
            out.update(mod.results(spacetime, curvature))
        except BudgetExceeded as exc:
            if missing is None:
                raise
            missing.append({"stage": mod.__name__.rsplit(".", 1)[-1], "reason": exc.message})
    return out


def report_text(spacetime: Spacetime, curvature, fmt: str, options: BuildOptions | None = None,
                figures: dict | None = None, missing: list[dict] | None = None) -> str:
    """The report of ``spacetime`` in format ``fmt`` as text.

    ``figures`` is the figures section (see :func:`draw_report_figures`); ``missing``
    lists stages that were not carried out, for the report's "Not computed" section.
    """
    from .render import dump_json, render
    from .report import ExpressionPrinter, ReportOptions, build_context, build_results

    options = options or BuildOptions()
    if fmt == "json":
        skipped: list[dict] = []
        data = build_results(spacetime, curvature, extra_results(spacetime, curvature, skipped))
        data["missing"].extend(skipped)
        return dump_json(data)
    ropts = ReportOptions(section_level=options.section_level, shorthands=options.shorthands)
    skipped: list[dict] = []
    sections = extra_sections(spacetime, curvature, ExpressionPrinter(spacetime, ropts), skipped)
    if figures:
        sections.append(figures)
    ctx = build_context(spacetime, curvature, ropts, extra_sections=sections)
    ctx["missing"].extend(skipped)
    ctx["missing"].extend(missing or [])
    ctx["standalone"] = options.standalone
    template = {"tex": "report.tex.j2", "md": "report.md.j2"}.get(fmt)
    if template is None:
        raise RenderError(f"Expected one of: 'tex', 'md', 'json' but received: '{fmt}'")
    return render(template, ctx, options.template_dir)


def build_report(spacetime: Spacetime | str | Path, output: str | Path, options: BuildOptions | None = None,
                 curvature=None, *, budget=None, progress: Callable | None = None,
                 jobs: int | None = None) -> Path:
    """Derive and write one report; the format comes from ``options.fmt`` or the extension.

    Parameters
    ----------
    spacetime:
        A loaded model, or the path of a spacetime file.
    output:
        The report file to write (atomically).
    options:
        Format, LaTeX shape, templates, overwrite permission.
    curvature:
        An existing derivation to reuse (then ``budget``, ``progress`` and ``jobs`` are not used).
    budget, progress, jobs:
        As for :func:`derive`; what goes over the budget is listed as not computed.
    """
    from .render import FORMATS, write_atomic

    options = options or BuildOptions()
    model = spacetime if isinstance(spacetime, Spacetime) else load_spacetime(spacetime)
    out = Path(output)
    fmt = options.fmt or FORMATS.get(out.suffix)
    if fmt is None:
        raise RenderError(f"Cannot tell the report format from '{out.name}'",
                          hint="use an extension .tex, .md or .json, or --format")
    cv = curvature or derive(model, budget=budget, progress=progress, jobs=jobs)
    section, missing = None, []
    if fmt in ("tex", "md") and options.figures:
        section, missing = draw_report_figures(model, cv, out)
    return write_atomic(out, report_text(model, cv, fmt, options, section, missing), force=options.force)


def draw_report_figures(spacetime: Spacetime, curvature, report: Path) -> tuple[dict | None, list[dict]]:
    """Draw the figures that apply next to ``report``; return their section and what was skipped.

    Figures are named after the report (``kerr.tex`` gets ``kerr-profiles.pdf`` and
    ``kerr-profiles.png``), so LaTeX and Markdown reports of one entry share them.
    """
    from . import figures
    from .errors import DerivationError

    # The .tex and .md reports of one entry share the drawing: keep it with the curvature.
    memo = curvature.__dict__.setdefault("_report_figures", {})
    key = (str(report.parent.resolve()), report.stem)
    if key not in memo:
        skipped: list[dict] = []  # one figure that cannot be computed does not cost the others
        try:
            drawn = figures.draw_figures(spacetime, curvature, report.parent, report.stem, formats=("pdf", "png"),
                                         skipped=skipped)
            memo[key] = (figures.report_section(spacetime, curvature, None, drawn), skipped)
        except (RenderError, DerivationError) as exc:
            memo[key] = (None, [{"stage": "figures", "reason": exc.message}])
    return memo[key]


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
