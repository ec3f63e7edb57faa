"""The entries of a library folder: loading them all, listing them, checking the whole library.

The shipped library (``metrics_yaml/`` in a checkout, package data when
installed) is found by :func:`library_dir`; ``texgen library --check`` is
:func:`check_library`: every entry valid, relations proved, versions and recorded
physics hashes consistent.
"""
from __future__ import annotations

from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Iterable

from ..errors import ConfigError, Location
from ..spec import load_spacetime, spacetime_files
from ..spec.model import Spacetime
from .cache import entry_key, options_key
from .relations import RelationResult, relation_results
from .versions import RECORD_FILE, check_versions, load_record

DEMO_FILE = "demo/veiled_black_hole.yaml"
"""The embedded default spacetime (an invented example) that ``texgen demo`` builds."""

PACKAGE_DATA = "metrics_yaml"
"""Where the shipped spacetime files are installed inside the package (package data, not a module)."""


def library_dir() -> Path:
    """The shipped library of spacetimes: package data when installed, metrics_yaml/ in a checkout."""
    packaged = Path(str(resources.files("texgen"))) / PACKAGE_DATA
    if (packaged / DEMO_FILE).is_file():
        return packaged
    return Path(__file__).resolve().parents[2] / "metrics_yaml"


def load_entries(paths: Iterable[str | Path]) -> tuple[dict[str, Spacetime], list[ConfigError]]:
    """Load every spacetime file under ``paths``; problems (bad file, duplicate id) are collected."""
    entries: dict[str, Spacetime] = {}
    errors: list[ConfigError] = []
    for path in spacetime_files(list(paths)):
        try:
            model = load_spacetime(path)
        except ConfigError as exc:
            errors.append(exc)
            continue
        if model.id in entries:
            errors.append(ConfigError(f"Expected a unique id but '{model.id}' is also used by "
                                      f"{entries[model.id].source}", Location(str(path), path="id")))
            continue
        entries[model.id] = model
    return entries, errors


def claims_status(results: dict | None) -> str:
    """'3/3 hold', '2/3 hold, 1 fails', 'no claims' from a results dict; '' when unknown."""
    if results is None or "claims" not in results:
        return ""
    claims = results["claims"]
    src = results.get("source_check")
    items = list(claims) + ([src] if src else [])
    if not items:
        return "no claims"
    good = sum(1 for c in items if c.get("holds"))
    out = f"{good}/{len(items)} hold"
    return out if good == len(items) else out + f", {len(items) - good} fail" + ("s" if len(items) - good == 1 else "")


@dataclass(frozen=True)
class LibraryEntry:
    """One line of ``texgen library``."""

    id: str
    title: str
    version: str
    dimension: int
    family: str
    claims: str
    """Status from the cache when present, else the number of claims and 'not checked'."""
    file: str


def list_entries(paths: Iterable[str | Path], *, cache=None) -> tuple[list[LibraryEntry], list[ConfigError]]:
    """The entries under ``paths``, sorted by id, with claims status from ``cache`` where it has one."""
    entries, errors = load_entries(paths)
    rows = []
    for model in sorted(entries.values(), key=lambda m: m.id):
        status = ""
        if cache is not None:
            hit = cache.get(entry_key(model, options_key(None))) or cache.get(
                entry_key(model, options_key(None, figures=True)))
            status = claims_status(hit["results"]) if hit else ""
        if not status:
            section = model.section("claims")
            k = len(section.data) if section and isinstance(section.data, list) else 0
            status = f"{k} claims, not checked" if k else "no claims"
        rows.append(LibraryEntry(model.id, model.title, model.version, model.dimension, model.family, status,
                                 model.source))
    return rows, errors


@dataclass(frozen=True)
class LibraryCheck:
    """Everything ``texgen library --check`` found."""

    entries: int
    problems: tuple[str, ...]
    relations: tuple[RelationResult, ...]

    @property
    def ok(self) -> bool:
        return not self.problems


def check_library(folder: str | Path, *, record_path: str | Path | None = None) -> LibraryCheck:
    """Validate every entry, check relations, versions, changelogs and the stored physics hashes."""
    entries, errors = load_entries([folder])
    problems = [e.format_message() for e in errors]
    results, rel_errors = relation_results(entries)
    problems += [e.format_message() for e in rel_errors]
    problems += [f"{r.source}: relations[{r.index}]: {r.message}" for r in results if not r.holds]
    rp = Path(record_path) if record_path is not None else Path(folder) / RECORD_FILE
    try:
        stored = load_record(rp)
        problems += [i.format_message() for i in check_versions(entries.values(), stored)]
    except ConfigError as exc:
        problems.append(exc.format_message())
    return LibraryCheck(len(entries), tuple(problems), tuple(results))
