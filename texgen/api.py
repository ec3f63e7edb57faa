"""The public Python API, in one place: what the command line does, callable from Python.

Everything a script or notebook-free pipeline needs is importable from here (and
the most used names from :mod:`texgen` itself)::

    import texgen
    st = texgen.load_spacetime("metrics_yaml/kerr/kerr.yaml")
    cv = texgen.derive(st)                      # lazy: only what is asked for is computed
    cv.kretschmann, cv.christoffel[1, 0, 0]
    texgen.build_report(st, "kerr.tex", curvature=cv)

The stages below it (``texgen.spec``, ``texgen.engine``, ``texgen.physics``,
``texgen.output``, ``texgen.library``) may change between versions; these names
do not.
"""
from __future__ import annotations

from pathlib import Path
from typing import Callable

from .engine import Budget, Curvature, derive
from .library.build import LibraryBuild, build_library
from .library.cache import ResultCache
from .library.diff import SpacetimeDiff, diff_models, git_revision_text
from .library.entries import DEMO_FILE, check_library, library_dir, list_entries, load_entries
from .library.versions import RECORD_FILE, record as version_record
from .output.document import BuildOptions, ReportWriter, compile_pdf
from .output.render import dump_json, write_atomic
from .output.sections.checks import results as claim_results
from .physics.analysis import analyse
from .physics.claims import check_source, decide_claims
from .spec import load_spacetime, load_spacetime_text, spacetime_files
from .spec.expressions import expression_to_text, parse_expression
from .spec.model import Spacetime

__all__ = ["Budget", "BuildOptions", "Curvature", "DEMO_FILE", "LibraryBuild", "RECORD_FILE", "ReportWriter",
           "ResultCache", "Spacetime", "SpacetimeDiff", "analyse", "build_library", "build_report", "check_library",
           "check_source", "claim_results", "compile_pdf", "decide_claims", "derive", "diff_models", "dump_json",
           "expression_to_text", "git_revision_text", "library_dir", "list_entries", "load_entries",
           "load_spacetime", "load_spacetime_text", "parse_expression", "report_text", "spacetime_files",
           "version_record", "write_atomic"]


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

    Several reports of one derivation share their figures through one :class:`ReportWriter`.
    """
    from .output.document import report_format

    options = options or BuildOptions()
    model = spacetime if isinstance(spacetime, Spacetime) else load_spacetime(spacetime)
    report_format(output, options)  # a bad name fails before any derivation
    cv = curvature or derive(model, budget=budget, progress=progress, jobs=jobs)
    return ReportWriter(model, cv).write(output, options)


def report_text(spacetime: Spacetime, curvature, fmt: str, options: BuildOptions | None = None) -> str:
    """The report of ``spacetime`` in format ``fmt`` as text, without figures."""
    return ReportWriter(spacetime, curvature).text(fmt, options)
