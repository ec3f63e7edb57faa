"""The later stages of a report, registered explicitly: each with its results, its section and its figures.

A stage runs after the curvature: it reads the model and the curvature and adds a
block to the JSON results (``results``), a section to the LaTeX and Markdown reports
(``section``, plain data naming its own templates, or ``None`` when it has nothing to
say) and the figures drawn from it (names among
:data:`texgen.output.figures.FIGURE_NAMES`).  A new capability adds one entry
to :data:`STAGES`; nothing is found by module name.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from ..errors import BudgetExceeded
from ..spec.model import Spacetime
from .printer import ExpressionPrinter
from .sections import analysis, checks


@dataclass(frozen=True)
class Stage:
    """One later stage of the pipeline."""

    name: str
    """Its name in "not computed" notes (``analysis``, ``claims``)."""
    results: Callable[[Spacetime, Any], dict]
    """``results(spacetime, curvature)``: JSON-ready blocks keyed by name."""
    section: Callable[[Spacetime, Any, ExpressionPrinter], dict | None]
    """``section(spacetime, curvature, printer)``: the report section's plain data, or ``None``."""
    figures: tuple[str, ...] = ()
    """Figures drawn from this stage, in report order."""


STAGES: tuple[Stage, ...] = (
    Stage("analysis", analysis.results, analysis.report_section,
          ("profiles", "invariants", "energy_conditions", "parameter_plane", "ctc", "light_cones")),
    Stage("claims", checks.results, checks.report_section),
)
"""The later stages in report order."""


def stage_sections(spacetime: Spacetime, curvature, printer: ExpressionPrinter,
                   missing: list[dict] | None = None, stages: tuple[Stage, ...] = STAGES) -> list[dict]:
    """Plain-data sections of the later stages for the templates.

    With a ``missing`` list, a stage over its budget is noted there instead of raised.
    """
    out = []
    for stage in stages:
        try:
            section = stage.section(spacetime, curvature, printer)
        except BudgetExceeded as exc:
            if missing is None:
                raise
            missing.append({"stage": stage.name, "reason": exc.message})
            continue
        if section:
            out.append(section)
    return out


def stage_results(spacetime: Spacetime, curvature, missing: list[dict] | None = None,
                  stages: tuple[Stage, ...] = STAGES) -> dict:
    """JSON-ready results of the later stages, keyed by block (``matter``, ``claims``, ...)."""
    out: dict = {}
    for stage in stages:
        try:
            out.update(stage.results(spacetime, curvature))
        except BudgetExceeded as exc:
            if missing is None:
                raise
            missing.append({"stage": stage.name, "reason": exc.message})
    return out


def stage_figures(stages: tuple[Stage, ...] = STAGES) -> tuple[str, ...]:
    """Every figure the stages draw, in report order."""
    return tuple(name for stage in stages for name in stage.figures)
