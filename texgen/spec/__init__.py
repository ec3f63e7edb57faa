"""Input: a spacetime file read, checked and frozen into a :class:`~texgen.spec.model.Spacetime`.

``loader`` reads YAML safely with line and column of every node, ``expressions``
parses formulas through a whitelist (never ``eval``), ``schema`` checks the whole
file and builds the model, ``sampling`` draws reproducible points in its ranges.
Nothing here knows about curvature, physics or reports.
"""
from __future__ import annotations

from pathlib import Path

from .loader import load_file, load_text
from .model import Spacetime
from .schema import build_model

__all__ = ["Spacetime", "load_spacetime", "load_spacetime_text", "spacetime_files"]


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
